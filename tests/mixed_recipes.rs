//! Recipes with the methods for numbers and categories together
//! (`kmedoids` on Gower's dissimilarity, `kprototypes`, a tree on
//! `distance gower`), run end to end on the shipped demo data (invented):
//! the segments, the typical members, the model and `assort assign`, the
//! thread count, and what the checker refuses with them.

mod common;

use common::case::Case;

/// The demo's columns with a method of our choosing.
fn recipe(method: &str, extra: &str) -> String {
    format!(
        r#"recipe "mixed"
seed 2026
input "data/coop_members.csv" key member_id
features tenure_months, visits_per_month, basket_value, share_fresh,
         share_bulk, share_prepared, online_ratio, coupon_rate
categories home_branch weight 0.5
missing fill median
transform basket_value log1p
{method}
save assignments "out/a.csv"
save profiles "out/p.json"
save model "out/m.json"
save report "out/r.html"
{extra}
"#
    )
}

/// Runs `method` on the demo, then `assort assign` with the saved model
/// on the same file; returns the case and how many members the model
/// scores into another segment than the run put them in.
fn run_and_assign(method: &str) -> (Case, usize) {
    let case = Case::demo();
    case.write("m.assort", &recipe(method, ""));
    case.run("m.assort").ok();
    case.assign("out/m.json", "data/coop_members.csv", "out/s.csv")
        .ok();
    let run = case.segments_by_key("out/a.csv");
    let scored = case.segments_by_key("out/s.csv");
    assert_eq!(run.len(), 6000);
    assert_eq!(scored.len(), 6000);
    let moved = run.iter().filter(|(k, s)| scored[*k] != **s).count();
    (case, moved)
}

/// Each segment's typical member, from the profiles JSON.
fn typical_members(case: &Case) -> Vec<(usize, String)> {
    let v: serde_json::Value = serde_json::from_str(&case.read("out/p.json")).unwrap();
    v["segments"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            (
                s["segment"].as_u64().unwrap() as usize,
                s["typical_member"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

#[test]
fn kmedoids_on_gower_centres_each_segment_on_a_member_and_assign_scores_alike() {
    let (case, moved) = run_and_assign("kmedoids k 4..5 restarts 3");
    // The run's labels are each member's nearest medoid, as the model's.
    assert_eq!(moved, 0);
    let model = case.read("out/m.json");
    assert!(model.contains("\"format\": \"assort-model/3\""));
    assert!(model.contains("\"measure\": \"gower\""));
    let assignments = case.read("out/a.csv");
    let typical = typical_members(&case);
    assert!(typical.len() >= 4);
    for (segment, key) in &typical {
        // A medoid sits in its own segment, at distance 0 from its centre.
        let line = assignments
            .lines()
            .find(|l| l.starts_with(&format!("{key},")))
            .unwrap();
        let cells: Vec<&str> = line.split(',').collect();
        assert_eq!(cells[1], segment.to_string(), "{line}");
        assert_eq!(cells[3].parse::<f64>().unwrap(), 0.0, "{line}");
    }
    let report = case.read("out/r.html");
    assert!(report.contains("A typical member of this segment (its medoid)"));
    assert!(report.contains(&typical[0].1));
}

#[test]
fn kprototypes_runs_on_numbers_and_a_category_and_assign_scores_alike() {
    let (case, moved) = run_and_assign("kprototypes k 3..5 restarts 5");
    assert_eq!(moved, 0);
    let model = case.read("out/m.json");
    assert!(model.contains("\"measure\": \"prototypes\""));
    let run = case.assort(&["run", "m.assort"], &[]).ok();
    run.stdout_has("k-prototypes sweep")
        .stdout_has("judged on the method's own measure");
}

#[test]
fn a_gower_tree_gives_medoids_and_its_model_scores_by_them() {
    let (case, moved) = run_and_assign("tree linkage average distance gower k 3..5");
    // The tree's border members may sit nearer another segment's medoid,
    // as a tree's do nearer another mean; most stay.
    assert!(moved < 600, "{moved} of 6,000 moved");
    assert!(!typical_members(&case).is_empty());
}

#[test]
fn kmedoids_outputs_are_byte_identical_on_one_two_and_eight_threads() {
    let case = Case::demo();
    case.write("m.assort", &recipe("kmedoids k 4 restarts 4", ""));
    let read =
        || ["out/a.csv", "out/p.json", "out/m.json"].map(|f| std::fs::read(case.path(f)).unwrap());
    case.assort(&["run", "m.assort"], &[("RAYON_NUM_THREADS", "1")])
        .ok();
    let first = read();
    for threads in ["2", "8"] {
        case.assort(&["run", "m.assort"], &[("RAYON_NUM_THREADS", threads)])
            .ok();
        assert!(
            first == read(),
            "RAYON_NUM_THREADS={threads} changed the outputs"
        );
    }
}

#[test]
fn what_these_methods_cannot_do_is_refused_at_check_and_nothing_is_written() {
    let cases = [
        (
            "kmedoids k 3..5",
            "evidence gap 10",
            "`evidence gap` is not available with `kmedoids`",
        ),
        (
            "kprototypes k 3..5",
            "choose k by stability",
            "`choose k by stability` is not available with `kprototypes`",
        ),
        (
            "kmedoids k 3..5",
            "save scoring \"out/s.sql\"",
            "`save scoring` is not available with `kmedoids`",
        ),
        ("tree linkage ward distance gower k 3..5", "", "needs"),
        (
            "tree linkage average distance gower k 3..5 micro 200",
            "",
            "`micro` is not available with `distance gower`",
        ),
        ("kmedoids k 3..5\nkmeans k 3..5", "", "a method"),
        ("kprototypes k 3..5 gamma 0", "", "a number above 0"),
    ];
    for (method, extra, message) in cases {
        let case = Case::demo();
        case.write("m.assort", &recipe(method, extra));
        case.run("m.assort").fails().stderr_has(message);
        assert!(
            !case.path("out").exists(),
            "{method} / {extra} wrote outputs"
        );
    }
}

/// Next quarter with `previous`: a k-medoids run on the same members,
/// matched to last run's saved model and assignments, keeps every member
/// in the segment of the same number, and `verify` accepts the outputs.
#[test]
fn a_kmedoids_rerun_with_previous_keeps_its_numbers_and_verifies() {
    let case = Case::demo();
    case.write("m.assort", &recipe("kmedoids k 4 restarts 3", ""));
    case.run("m.assort").ok();
    let first = case.segments_by_key("out/a.csv");
    std::fs::copy(case.path("out/m.json"), case.path("last_model.json")).unwrap();
    std::fs::copy(case.path("out/a.csv"), case.path("last_a.csv")).unwrap();
    case.write(
        "m.assort",
        &recipe(
            "kmedoids k 4 restarts 3",
            "previous \"last_model.json\" assignments \"last_a.csv\"",
        ),
    );
    case.run("m.assort").ok();
    assert_eq!(first, case.segments_by_key("out/a.csv"));
    case.assort(&["verify", "m.assort"], &[]).ok();
}
