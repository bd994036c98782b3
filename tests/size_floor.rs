//! The size floor (`choose ... floor N`): a k whose segmentation has a
//! segment below the floor is marked in the sweep and never chosen, the
//! choice says what was set aside, and a floor no k meets stops the run
//! with advice and nothing written.
//!
//! Data: the wine recognition data (tests/data/wine.csv, Forina et al.,
//! UCI; see tests/data/ATTRIBUTION.md) with a key column added. On it a
//! complete-linkage tree cut at k = 2..8 gives Davies-Bouldin's best k a
//! segment of 2 wines, and an average-linkage tree keeps one wine alone at
//! every k from 2 to 6: outside data with the small segments a floor is for.

mod common;

use common::case::Case;

/// The wine data with a key column `id` (`w1`, `w2`, ...) in front.
fn wine_case() -> Case {
    let case = Case::empty();
    let wine = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/wine.csv"))
        .unwrap();
    let mut keyed = String::new();
    for (i, line) in wine.lines().enumerate() {
        let key = if i == 0 {
            "id".to_string()
        } else {
            format!("w{i}")
        };
        keyed.push_str(&format!("{key},{line}\n"));
    }
    case.write("data/wine.csv", &keyed);
    case
}

fn recipe(linkage: &str, floor: &str) -> String {
    format!(
        "input \"data/wine.csv\" key id\n\
         features alcohol, malic_acid, ash, alcalinity_of_ash, magnesium, total_phenols,\n\
         \x20        flavanoids, nonflavanoid_phenols, proanthocyanins, color_intensity, hue,\n\
         \x20        od280_od315_of_diluted_wines, proline\n\
         scale zscore\n\
         tree linkage {linkage} k 2..8\n\
         choose k by davies-bouldin{floor}\n\
         save assignments \"out/wine.csv\"\n"
    )
}

/// The sweep's rows as (marked chosen, k, smallest segment cell).
fn rows(stdout: &str) -> Vec<(bool, usize, String)> {
    stdout
        .lines()
        .filter_map(|l| {
            let chosen = l.starts_with('>');
            let mut cells = l.trim_start_matches('>').split_whitespace();
            let k = cells.next()?.parse().ok()?;
            let rest: Vec<&str> = cells.collect();
            // The last cell is the smallest segment, `2 *` below the floor.
            let from = rest.len() - if rest.last() == Some(&"*") { 2 } else { 1 };
            (rest.len() >= 4).then(|| (chosen, k, rest[from..].join(" ")))
        })
        .collect()
}

#[test]
fn without_a_floor_davies_bouldin_chooses_a_k_with_a_segment_of_two_wines() {
    let case = wine_case();
    case.write("w.assort", &recipe("complete", ""));
    let out = case.run("w.assort").ok().stdout();
    let chosen: Vec<usize> = rows(&out).iter().filter(|r| r.0).map(|r| r.1).collect();
    assert_eq!(chosen, vec![8], "{out}");
    // The segment sizes behind the floor test below, from the assignments.
    let assigned = case.read("out/wine.csv");
    let mut sizes = std::collections::HashMap::<String, usize>::new();
    for line in assigned.lines().skip(1) {
        *sizes
            .entry(line.split(',').nth(1).unwrap().to_string())
            .or_default() += 1;
    }
    assert_eq!(sizes.values().min(), Some(&2), "{sizes:?}");
}

#[test]
fn a_floor_sets_aside_every_k_with_a_smaller_segment_and_says_so() {
    let case = wine_case();
    // 5 % of 178 wines is 8.9, so the floor is 9 wines.
    case.write("w.assort", &recipe("complete", " floor 0.05"));
    let out = case.run("w.assort").ok().stdout();
    let table = rows(&out);
    let chosen = table.iter().find(|r| r.0).expect("a chosen row").1;
    assert!(chosen < 6, "chose k = {chosen}:\n{out}");
    for (is_chosen, k, smallest) in &table {
        let below = smallest.ends_with('*');
        let size: usize = smallest
            .trim_end_matches(" *")
            .replace(',', "")
            .parse()
            .unwrap();
        assert_eq!(below, size < 9, "k = {k}: `{smallest}`\n{out}");
        assert!(
            !(below && *is_chosen),
            "k = {k} chosen below the floor\n{out}"
        );
    }
    assert!(table.iter().any(|r| r.2.ends_with('*')), "{out}");
    let flat = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains("set aside for a segment below the floor of 5 % of the records (9)"),
        "{out}"
    );
    assert!(
        flat.contains("without the floor k = 8 would have been chosen"),
        "{out}"
    );
    // The segments delivered keep the floor.
    let assigned = case.read("out/wine.csv");
    let mut sizes = std::collections::HashMap::<String, usize>::new();
    for line in assigned.lines().skip(1) {
        *sizes
            .entry(line.split(',').nth(1).unwrap().to_string())
            .or_default() += 1;
    }
    assert_eq!(sizes.len(), chosen);
    assert!(sizes.values().all(|&n| n >= 9), "{sizes:?}");
}

#[test]
fn a_floor_no_k_meets_stops_the_run_with_advice_and_writes_nothing() {
    let case = wine_case();
    case.write("w.assort", &recipe("average", " floor 20"));
    case.run("w.assort")
        .fails()
        .stderr_has("no k leaves every segment at or above the floor of 20 records")
        .stderr_has("k = 2 has a segment of 1")
        .stderr_has("lower the floor to");
    assert!(!case.path("out").exists(), "something was written");
}

#[test]
fn a_floor_must_be_a_count_or_a_share() {
    let case = wine_case();
    for (floor, expected) in [
        ("0", "a whole number of records, or a share between 0 and 1"),
        (
            "2.5",
            "a whole number of records, or a share between 0 and 1",
        ),
        (
            "-4",
            "a whole number of records, or a share between 0 and 1",
        ),
        ("500", "at most the 178 records of the data"),
    ] {
        case.write("w.assort", &recipe("complete", &format!(" floor {floor}")));
        case.assort(&["check", "w.assort"], &[])
            .fails()
            .stderr_has(expected);
    }
    case.write("w.assort", &recipe("complete", " flor 10"));
    case.assort(&["check", "w.assort"], &[])
        .fails()
        .stderr_has("did you mean `floor`");
}
