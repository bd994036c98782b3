//! Record weights (`represents COLUMN`): a record of weight w counts as w
//! identical records. The property pinned here: with whole-number weights,
//! every method gives the same partition, criteria, sizes, shares and
//! profiles as the same recipe on the data with each record repeated w
//! times, and a bad weight stops the run at its data line with nothing
//! written.
//!
//! Data: the iris measurements (tests/data/iris.csv, Fisher 1936 via UCI
//! and scikit-learn; see tests/data/ATTRIBUTION.md), outside data. The
//! weights 1, 2, 3, 1, 2, 3, ... are this test's construction, not data.

mod common;

use common::case::Case;
use serde_json::Value;

const FEATURES: &str = "sepal_length_cm, sepal_width_cm, petal_length_cm, petal_width_cm";

/// The iris records keyed `r0`, `r1`, ... with a weight column `members`
/// (1 + i mod 3), and the same records each repeated `members` times.
fn iris_case() -> Case {
    let case = Case::empty();
    let iris = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/iris.csv"))
        .unwrap();
    let mut lines = iris.lines();
    let header = lines.next().unwrap();
    let mut weighted = format!("id,{header},members\n");
    let mut repeated = format!("id,{header},members\n");
    for (i, line) in lines.enumerate() {
        let w = 1 + i % 3;
        weighted.push_str(&format!("r{i},{line},{w}\n"));
        for copy in 0..w {
            repeated.push_str(&format!("r{i}c{copy},{line},1\n"));
        }
    }
    case.write("data/weighted.csv", &weighted);
    case.write("data/repeated.csv", &repeated);
    case
}

/// The run's `--json` summary of `body` over the weighted file (with
/// `represents members`) and over the repeated file (without).
fn both(case: &Case, body: &str) -> (Value, Value) {
    let run = |file: &str, weights: &str, name: &str| {
        case.write(
            name,
            &format!("input \"data/{file}\" key id\n{weights}{body}"),
        );
        let out = case.assort(&["run", "--json", name], &[]).ok().stdout();
        let v = serde_json::from_str::<Value>(&out).unwrap_or_else(|e| panic!("{e}: {out}"));
        v["result"].clone()
    };
    (
        run("weighted.csv", "represents members\n", "w.assort"),
        run("repeated.csv", "", "r.assort"),
    )
}

fn close(a: f64, b: f64, what: &str) {
    let scale = a.abs().max(b.abs()).max(1e-12);
    assert!((a - b).abs() <= 1e-9 * scale, "{what}: {a} against {b}");
}

fn numbers(v: &Value) -> Vec<f64> {
    match v {
        Value::Array(xs) => xs.iter().flat_map(numbers).collect(),
        Value::Number(n) => vec![n.as_f64().unwrap()],
        _ => Vec::new(),
    }
}

/// The weighted run equals the repeated run: the chosen k, every
/// criterion of the sweep, each segment's members, share and profile.
fn assert_same(weighted: &Value, repeated: &Value) {
    assert_eq!(weighted["chosen_k"], repeated["chosen_k"]);
    assert_eq!(
        weighted["weighted_members"].as_f64(),
        repeated["segmented"].as_f64()
    );
    let (ws, rs) = (
        weighted["sweep"].as_array().unwrap(),
        repeated["sweep"].as_array().unwrap(),
    );
    assert_eq!(ws.len(), rs.len());
    for (w, r) in ws.iter().zip(rs) {
        for c in [
            "within_ss",
            "silhouette",
            "calinski_harabasz",
            "davies_bouldin",
        ] {
            close(
                w[c].as_f64().unwrap(),
                r[c].as_f64().unwrap(),
                &format!("k = {} {c}", w["k"]),
            );
        }
        assert_eq!(w["smallest_weighted"].as_f64(), r["smallest"].as_f64());
    }
    let (wseg, rseg) = (
        weighted["segments"].as_array().unwrap(),
        repeated["segments"].as_array().unwrap(),
    );
    assert_eq!(wseg.len(), rseg.len());
    for (w, r) in wseg.iter().zip(rseg) {
        assert_eq!(
            w["weighted_members"].as_f64(),
            r["size"].as_f64(),
            "{w} {r}"
        );
        close(
            w["share"].as_f64().unwrap(),
            r["share"].as_f64().unwrap(),
            "share",
        );
        for part in ["means", "medians", "quartiles", "silhouette"] {
            let (a, b) = (numbers(&w[part]), numbers(&r[part]));
            assert_eq!(a.len(), b.len(), "{part}");
            for (x, y) in a.iter().zip(&b) {
                close(*x, *y, part);
            }
        }
    }
}

// k-means and k-prototypes restarts draw their starts from the records, so
// a weighted file and its repeated copy try different starts: at k where
// iris has several local optima (k = 4 and up) each can end in another
// one. Their runs are compared at k = 2 and 3, where every restart finds
// the same optimum; the engine test below runs both from the same start
// at a larger k.

#[test]
fn whole_weights_give_k_means_the_results_of_repeated_records() {
    let case = iris_case();
    let (w, r) = both(
        &case,
        &format!("features {FEATURES}\nkmeans k 2..3 restarts 20\nchoose k by silhouette\n"),
    );
    assert_same(&w, &r);
    // The sweep said the weights were used, and where.
    let notes = w["notes"].to_string();
    assert!(notes.contains("stand for 300 weighted members"), "{notes}");
}

#[test]
fn whole_weights_give_k_medoids_on_gower_the_results_of_repeated_records() {
    let case = iris_case();
    let (w, r) = both(
        &case,
        &format!(
            "features {FEATURES}\ncategories species\nkmedoids k 2..4 distance gower restarts 5\nchoose k by silhouette\n"
        ),
    );
    assert_same(&w, &r);
}

#[test]
fn whole_weights_give_k_prototypes_the_results_of_repeated_records() {
    let case = iris_case();
    let (w, r) = both(
        &case,
        &format!(
            "features {FEATURES}\ncategories species\nkprototypes k 2..3 restarts 20\nchoose k by silhouette\n"
        ),
    );
    assert_same(&w, &r);
}

#[test]
fn whole_weights_give_ward_and_average_trees_the_results_of_repeated_records() {
    let case = iris_case();
    for linkage in ["ward", "average", "complete"] {
        let (w, r) = both(
            &case,
            &format!(
                "features {FEATURES}\ntree linkage {linkage} k 2..5\nchoose k by calinski-harabasz\n"
            ),
        );
        assert_same(&w, &r);
    }
}

#[test]
fn a_weight_of_zero_in_the_sample_is_refused_by_the_check() {
    let case = iris_case();
    let data = case.read("data/weighted.csv").replace(
        "\nr41,4.5,2.3,1.3,0.3,setosa,3",
        "\nr41,4.5,2.3,1.3,0.3,setosa,0",
    );
    case.write("data/weighted.csv", &data);
    case.write(
        "w.assort",
        &format!(
            "input \"data/weighted.csv\" key id\nrepresents members\nfeatures {FEATURES}\nkmeans k 3\nsave assignments \"out/a.csv\"\n"
        ),
    );
    let err = case.run("w.assort").fails().stderr();
    assert!(
        err.contains("`members` cannot weigh records: it holds `0` on line 43"),
        "{err}"
    );
    assert!(!case.path("out/a.csv").exists());
}

#[test]
fn a_bad_weight_past_the_checked_sample_stops_the_run_at_its_line_and_writes_nothing() {
    // 1,500 records, past the 1,000 the check samples; the weight on line
    // 1,402 is blank, then (a second run) negative.
    let case = Case::empty();
    let iris = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/iris.csv"))
        .unwrap();
    let rows: Vec<&str> = iris.lines().skip(1).collect();
    for (bad, shown) in [("", "a blank"), ("-2", "`-2`")] {
        let mut data = format!("id,{},members\n", iris.lines().next().unwrap());
        for i in 0..1500 {
            let w = if i == 1400 {
                bad.to_string()
            } else {
                (1 + i % 3).to_string()
            };
            data.push_str(&format!("r{i},{},{w}\n", rows[i % rows.len()]));
        }
        case.write("data/big.csv", &data);
        case.write(
            "w.assort",
            &format!(
                "input \"data/big.csv\" key id\nrepresents members\nfeatures {FEATURES}\nkmeans k 3\nsave assignments \"out/a.csv\"\n"
            ),
        );
        let err = case.run("w.assort").fails().stderr();
        let want = format!(
            "`data/big.csv` line 1402, column 7 (`members`): {shown} cannot weigh a record"
        );
        assert!(err.contains(&want), "{err}");
        assert!(!case.path("out/a.csv").exists());
    }
}

#[test]
fn from_the_same_start_weighted_lloyd_is_lloyd_on_repeated_records() {
    use assort::engine::kmeans::{kmeans, kmeans_weighted, KMeansSettings, Seeding};
    use assort::engine::weights::Weights;
    let iris = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/iris.csv"))
        .unwrap();
    let rows: Vec<Vec<f64>> = (iris.lines().skip(1))
        .map(|l| l.split(',').take(4).map(|v| v.parse().unwrap()).collect())
        .collect();
    let weights: Vec<f64> = (0..rows.len()).map(|i| (1 + i % 3) as f64).collect();
    let flat =
        |rs: &[Vec<f64>]| ndarray::Array2::from_shape_vec((rs.len(), 4), rs.concat()).unwrap();
    let repeated: Vec<Vec<f64>> = (rows.iter().zip(&weights))
        .flat_map(|(r, &w)| std::iter::repeat_n(r.clone(), w as usize))
        .collect();
    // Start from records 0, 50, 100, 25, 75, 125.
    let start: Vec<f64> = [0, 50, 100, 25, 75, 125]
        .iter()
        .flat_map(|&i| rows[i].clone())
        .collect();
    let settings = KMeansSettings {
        k: 6,
        restarts: 0,
        max_rounds: 300,
        tolerance: 0.0,
        seeding: Seeding::KMeansPlusPlus,
        seed: 3,
        sample: None,
        start: Some(start),
    };
    // No seeded restart: only the given start runs; a tolerance of 0 runs
    // Lloyd until no record moves.
    let w = kmeans_weighted(flat(&rows).view(), Weights::of(&weights), &settings).unwrap();
    let r = kmeans(flat(&repeated).view(), &settings).unwrap();
    assert!(
        w.from_start && r.from_start,
        "both keep the given start's result"
    );
    close(w.inertia, r.inertia, "within-SS");
    let expanded: Vec<u32> = (w.labels.iter().zip(&weights))
        .flat_map(|(&l, &n)| std::iter::repeat_n(l, n as usize))
        .collect();
    assert_eq!(
        assort::engine::compare::adjusted_rand_index(&expanded, &r.labels),
        1.0
    );
}
