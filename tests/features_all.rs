//! `features all` says what it took and what it left, and warns on a
//! taken column that looks like a code (a year, a date, an identifier)
//! rather than a measure.
//!
//! Data: the wine and Iris data (tests/data/, see ATTRIBUTION.md; outside
//! data, whose measurements must raise no false alarm), and Iris with two
//! code columns added by the test: a customer number that grows line by
//! line and a sign-up year.

mod common;

use common::case::Case;

fn data_file(name: &str) -> String {
    std::fs::read_to_string(format!("{}/tests/data/{name}", env!("CARGO_MANIFEST_DIR"))).unwrap()
}

/// A column the test adds: its name and its value for record `i`.
type Added<'a> = (&'a str, fn(usize) -> String);

/// `csv` with a key column `id` in front, and `extra` columns after it,
/// each a function of the record's number.
fn keyed(csv: &str, extra: &[Added<'_>]) -> String {
    let mut out = String::new();
    for (i, line) in csv.lines().enumerate() {
        let mut cells = vec![if i == 0 {
            "id".to_string()
        } else {
            format!("r{i}")
        }];
        for (name, value) in extra {
            cells.push(if i == 0 { name.to_string() } else { value(i) });
        }
        cells.push(line.to_string());
        out.push_str(&(cells.join(",") + "\n"));
    }
    out
}

fn check(data: &str, categories: &str) -> String {
    let case = Case::empty();
    case.write("data/d.csv", data).write(
        "r.assort",
        &format!(
            "input \"data/d.csv\" key id\n{categories}features all\nscale zscore\nkmeans k 3\n"
        ),
    );
    let run = case.assort(&["check", "r.assort"], &[]).ok();
    // One line, without the frame the renderer draws at wrapped lines.
    run.stderr()
        .split_whitespace()
        .filter(|w| *w != "│")
        .collect::<Vec<_>>()
        .join(" ")
}

#[test]
fn features_all_lists_what_it_took_and_left() {
    let said = check(&keyed(&data_file("wine.csv"), &[]), "");
    assert!(
        said.contains("`features all` took 13 numeric columns: `alcohol`, `malic_acid`"),
        "{said}"
    );
    assert!(said.contains("and 1 more"), "{said}");
    assert!(
        said.contains("left out the key `id`; text columns `cultivar`"),
        "{said}"
    );
    let said = check(&keyed(&data_file("iris.csv"), &[]), "categories species\n");
    assert!(said.contains("took 4 numeric columns"), "{said}");
    assert!(
        said.contains("left out the key `id`; categories `species`"),
        "{said}"
    );
}

#[test]
fn measurements_of_outside_data_raise_no_code_warning() {
    // Wine's magnesium and proline are whole numbers; neither is a code.
    for file in ["wine.csv", "iris.csv"] {
        let said = check(&keyed(&data_file(file), &[]), "");
        assert!(!said.contains("looks like"), "{file}: {said}");
    }
}

#[test]
fn a_customer_number_and_a_year_taken_by_all_are_named() {
    let data = keyed(
        &data_file("iris.csv"),
        &[
            ("cust_no", |i| (1000 + i).to_string()),
            ("signup_year", |i| (2015 + i % 8).to_string()),
            ("first_order", |i| {
                format!("2024{:02}{:02}", 1 + i % 12, 1 + i % 28)
            }),
        ],
    );
    let said = check(&data, "categories species\n");
    assert!(
        said.contains("`cust_no` looks like an identifier, not a measure"),
        "{said}"
    );
    assert!(
        said.contains("`signup_year` looks like a year, not a measure"),
        "{said}"
    );
    assert!(
        said.contains("`first_order` looks like a date written as a number"),
        "{said}"
    );
    assert!(said.contains("`features all except cust_no`"), "{said}");
    assert!(!said.contains("`sepal_length_cm` looks like"), "{said}");
}
