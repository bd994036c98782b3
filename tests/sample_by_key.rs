//! `kmeans ... sample N by key`: the records put in key order, the sample
//! drawn by a hash of each record's key and the refinement summed exactly
//! (src/run/driven.rs), so nothing the run writes depends on the order of
//! the records, to the last digit of the model.
//!
//! Data: the invented demo's members (recipes/data), in file order, in
//! reverse, and shuffled by a seeded permutation.

mod common;

use common::case::Case;

const BY_KEY: &str = "kmeans k 2..8 restarts 10 sample 2000 by key";

/// The demo with its k-means line replaced by `line`.
fn demo_with(line: &str) -> Case {
    let case = Case::demo();
    case.edit("coop-members.assort", "kmeans k 2..8 restarts 50", line);
    case
}

/// The demo's data file with its records in `order` (places in the file).
fn reorder(case: &Case, order: impl Fn(usize) -> Vec<usize>) {
    let text = case.read("data/coop_members.csv");
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let records: Vec<&str> = lines.collect();
    let mut out = format!("{header}\n");
    for i in order(records.len()) {
        out.push_str(records[i]);
        out.push('\n');
    }
    case.write("data/coop_members.csv", &out);
}

/// What a run says about the segments, order aside: each member's
/// segment (sorted by key), the centres, the profiles, and the model with
/// every parameter and centre in full digits (less the input's digest).
fn segments(case: &Case) -> (Vec<String>, String, String, String) {
    let mut assigned: Vec<String> = case
        .read("out/member_segments.csv")
        .lines()
        .skip(1)
        .map(str::to_string)
        .collect();
    assigned.sort();
    (
        assigned,
        case.read("out/segment_centroids.csv"),
        case.read("out/segment_profiles.csv"),
        case.read("out/segment_model.json")
            .lines()
            .filter(|l| !l.contains("input_sha256"))
            .collect(),
    )
}

#[test]
fn segments_by_key_do_not_depend_on_the_order_of_the_records() {
    let case = demo_with(BY_KEY);
    let run = case.run("coop-members.assort").ok();
    assert!(
        common::case::unwrapped(&run.stdout())
            .contains("ran on a sample of 2,000 of 6,000 records drawn by key"),
        "{}",
        run.stdout()
    );
    let in_file_order = segments(&case);
    // The records are written in key order.
    let written: Vec<String> = case
        .read("out/member_segments.csv")
        .lines()
        .skip(1)
        .map(str::to_string)
        .collect();
    assert!(written == in_file_order.0, "assignments in key order");
    reorder(&case, |n| (0..n).rev().collect());
    case.run("coop-members.assort").ok();
    assert!(segments(&case) == in_file_order, "reversed records");
    // A seeded shuffle (a linear congruential walk over the places).
    reorder(&case, |n| {
        let mut order: Vec<usize> = (0..n).collect();
        let mut state: u64 = 2026;
        for i in (1..n).rev() {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            order.swap(i, (state >> 33) as usize % (i + 1));
        }
        order
    });
    case.run("coop-members.assort").ok();
    assert!(segments(&case) == in_file_order, "shuffled records");
}

#[test]
fn by_key_needs_a_sample_the_word_key_and_a_key_column() {
    let case = demo_with("kmeans k 2..8 restarts 10 by key");
    case.assort(&["check", "coop-members.assort"], &[])
        .fails()
        .stderr_has("give its size too, such as `sample 200000 by key`");
    let case = demo_with("kmeans k 2..8 restarts 10 sample 2000 by member_id");
    case.assort(&["check", "coop-members.assort"], &[])
        .fails()
        .stderr_has("`sample 200000 by key` draws the sample by each record's key");
    let case = Case::demo();
    case.write(
        "keyless.assort",
        "seed 1\ninput \"data/coop_members.csv\" no key\nfeatures tenure_months, basket_value\nkmeans k 2..4 sample 2000 by key\n",
    );
    case.assort(&["check", "keyless.assort"], &[])
        .fails()
        .stderr_has("drawing the sample by key is meant to be free of");
    // Records standing for others are refused when the recipe is checked.
    case.write(
        "weighted.assort",
        "seed 1\ninput \"data/coop_members.csv\" key member_id\nfeatures tenure_months, share_fresh\n\
         represents visits_per_month\nkmeans k 2..4 sample 2000 by key\n",
    );
    case.assort(&["check", "weighted.assort"], &[])
        .fails()
        .stderr_has("is not available with `sample ... by key`");
}
