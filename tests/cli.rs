//! End-to-end tests of the `assort` binary on temporary copies of recipes.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A scratch folder holding a recipe and its data, and a way to run
/// `assort` on it.
struct Case {
    dir: tempfile::TempDir,
}

impl Case {
    /// A copy of the shipped demo (recipe and data).
    fn demo() -> Case {
        let case = Case::empty();
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes");
        case.copy(&root.join("coop-members.assort"), "coop-members.assort");
        for f in ["coop_members.csv", "coop_members_planted.csv"] {
            case.copy(&root.join("data").join(f), &format!("data/{f}"));
        }
        case
    }

    fn empty() -> Case {
        Case {
            dir: tempfile::tempdir().unwrap(),
        }
    }

    fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    fn copy(&self, from: &Path, to: &str) {
        let to = self.path(to);
        std::fs::create_dir_all(to.parent().unwrap()).unwrap();
        std::fs::copy(from, to).unwrap();
    }

    fn write(&self, rel: &str, text: &str) -> &Case {
        let p = self.path(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
        self
    }

    fn read(&self, rel: &str) -> String {
        std::fs::read_to_string(self.path(rel)).unwrap()
    }

    /// Replaces the first occurrence of `from` in a file.
    fn edit(&self, rel: &str, from: &str, to: &str) -> &Case {
        let text = self.read(rel);
        assert!(text.contains(from), "`{from}` not in {rel}");
        self.write(rel, &text.replacen(from, to, 1))
    }

    fn assort(&self, args: &[&str], env: &[(&str, &str)]) -> Run {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_assort"));
        cmd.args(args)
            .current_dir(self.dir.path())
            .env("NO_COLOR", "1");
        for (k, v) in env {
            cmd.env(k, v);
        }
        Run(cmd.output().unwrap())
    }

    fn run(&self, recipe: &str) -> Run {
        self.assort(&["run", recipe], &[])
    }
}

struct Run(Output);

impl Run {
    fn stdout(&self) -> String {
        String::from_utf8_lossy(&self.0.stdout).into_owned()
    }

    fn stderr(&self) -> String {
        String::from_utf8_lossy(&self.0.stderr).into_owned()
    }

    #[track_caller]
    fn ok(self) -> Run {
        assert!(
            self.0.status.success(),
            "expected success, got {:?}\nstdout:\n{}\nstderr:\n{}",
            self.0.status,
            self.stdout(),
            self.stderr()
        );
        self
    }

    #[track_caller]
    fn fails(self) -> Run {
        assert!(
            !self.0.status.success(),
            "expected failure\nstdout:\n{}",
            self.stdout()
        );
        self
    }

    #[track_caller]
    fn stderr_has(self, text: &str) -> Run {
        assert!(
            self.stderr().contains(text),
            "stderr lacks `{text}`:\n{}",
            self.stderr()
        );
        self
    }

    #[track_caller]
    fn stdout_has(self, text: &str) -> Run {
        assert!(
            self.stdout().contains(text),
            "stdout lacks `{text}`:\n{}",
            self.stdout()
        );
        self
    }
}

const DEMO: &str = "coop-members.assort";
const DEMO_OUTPUTS: [&str; 6] = [
    "out/segment_model.json",
    "out/member_segments.csv",
    "out/segment_profiles.csv",
    "out/segment_profiles.json",
    "out/segment_centroids.csv",
    "out/coop-members.run.json",
];

fn outputs(case: &Case) -> Vec<Vec<u8>> {
    DEMO_OUTPUTS
        .iter()
        .map(|f| std::fs::read(case.path(f)).unwrap())
        .collect()
}

#[test]
fn the_demo_prints_the_sweep_and_profiles_and_writes_every_output() {
    let case = Case::demo();
    let run = case.run(DEMO).ok();
    let out = run.stdout();
    assert!(out.contains("k-means sweep"), "{out}");
    assert!(out.contains("chosen: k = "), "{out}");
    assert!(out.contains("segments at k = "), "{out}");
    assert!(out.contains("weekly fresh regulars"), "{out}");
    for f in DEMO_OUTPUTS {
        assert!(
            out.contains(&format!(
                "wrote {}",
                Path::new(DEMO).parent().unwrap().join(f).display()
            )),
            "{out}"
        );
    }
    // Readable at 100 columns.
    for line in out.lines() {
        assert!(
            line.chars().count() <= 100,
            "line wider than 100 columns: {line}"
        );
    }
    let assignments = case.read("out/member_segments.csv");
    let mut lines = assignments.lines();
    assert_eq!(
        lines.next(),
        Some("member_id,segment,label,distance,margin")
    );
    // Every member is assigned (gaps are filled, none dropped).
    assert_eq!(lines.count(), 6000);
    let json: serde_json::Value =
        serde_json::from_str(&case.read("out/segment_profiles.json")).unwrap();
    let segments = json["segments"].as_array().unwrap();
    let total: u64 = segments.iter().map(|s| s["size"].as_u64().unwrap()).sum();
    assert_eq!(total, 6000);
}

#[test]
fn the_demo_recovers_its_planted_segments() {
    // The demo data has five planted segments; the recipe must find five and
    // agree with them closely (adjusted Rand index printed by `validate`).
    let case = Case::demo();
    let out = case.run(DEMO).ok().stdout();
    assert!(out.contains("chosen: k = 5 "), "{out}");
    let ari: f64 = out
        .split("adjusted Rand index ")
        .nth(1)
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .unwrap();
    assert!(ari > 0.9, "adjusted Rand index {ari}");
}

#[test]
fn reruns_and_thread_counts_give_byte_identical_outputs() {
    let case = Case::demo();
    case.run(DEMO).ok();
    let first = outputs(&case);
    case.run(DEMO).ok();
    assert!(first == outputs(&case), "a second run changed the outputs");
    for threads in ["1", "2", "8"] {
        case.assort(&["run", DEMO], &[("RAYON_NUM_THREADS", threads)])
            .ok();
        assert!(
            first == outputs(&case),
            "RAYON_NUM_THREADS={threads} changed the outputs"
        );
    }
}

#[test]
fn a_misspelt_column_is_located_and_the_right_name_suggested() {
    let case = Case::demo();
    case.edit(DEMO, "visits_per_month", "vists_per_month");
    let text = case.read(DEMO);
    let at = text.find("vists_per_month").unwrap();
    let line = text[..at].lines().count();
    let col = at - text[..at].rfind('\n').map(|i| i + 1).unwrap_or(0) + 1;
    case.assort(&["check", DEMO], &[])
        .fails()
        .stderr_has(&format!("{DEMO}:{line}:{col}"))
        .stderr_has("no column `vists_per_month`")
        .stderr_has("did you mean `visits_per_month`?");
}

#[test]
fn a_recipe_that_fails_to_check_writes_nothing() {
    let case = Case::demo();
    case.edit(DEMO, "scale zscore", "scale zscor");
    case.run(DEMO)
        .fails()
        .stderr_has("unknown scale method `zscor`")
        .stderr_has("nothing was run");
    assert!(!case.path("out").exists());
}

#[test]
fn a_recipe_that_fails_to_parse_gives_every_diagnostic_and_writes_nothing() {
    let case = Case::demo();
    case.edit(DEMO, "seed 2026", "seed twenty");
    case.edit(DEMO, "kmeans k 2..8", "kmeans k 2..8 restart 3");
    case.run(DEMO)
        .fails()
        .stderr_has("found `twenty`, expected a number")
        .stderr_has("did you mean `restarts`?")
        .stderr_has("2 errors");
    assert!(!case.path("out").exists());
}

#[test]
fn check_and_plan_succeed_on_the_demo() {
    let case = Case::demo();
    case.assort(&["check", DEMO], &[])
        .ok()
        .stdout_has("checks out: 8 numeric features, 1 category column, k 2..8");
    let plan: serde_json::Value =
        serde_json::from_str(&case.assort(&["plan", DEMO], &[]).ok().stdout()).unwrap();
    // Defaults are written out.
    assert_eq!(plan["method"]["method"], "kmeans");
    assert_eq!(plan["method"]["rounds"], 300);
    assert_eq!(plan["method"]["seeding"], "kmeans++");
    assert_eq!(plan["features"][2]["transform"], "log1p");
}

// ------------------------------------------------------------ bad data --

fn small(case: &Case, data: &str) {
    case.write("data.csv", data).write(
        "r.assort",
        "input \"data.csv\" key id\nfeatures a, b\nkmeans k 2\nsave assignments \"out/a.csv\"\n",
    );
}

#[test]
fn a_non_numeric_value_in_the_checked_sample_is_named_by_file_line_and_column() {
    let case = Case::empty();
    small(
        &case,
        "id,a,b\n1,1.0,2.0\n2,1.5,2.5\n3,oops,3.0\n4,9.0,9.0\n",
    );
    case.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("`data.csv` line 4, column 2 (`a`): found `oops`, expected a number");
    case.run("r.assort").fails();
    assert!(!case.path("out").exists());
}

/// Data whose first 1,200 records are clean, so the checker's sample
/// passes and the run itself meets `bad` on line 1,202.
fn long_data_with(bad: &str) -> String {
    let mut text = String::from("id,a,b\n");
    for i in 0..1200 {
        text.push_str(&format!("{i},{}.5,{}\n", i % 7, i % 5));
    }
    text.push_str(&format!("9999,{bad}\n"));
    text
}

#[test]
fn a_non_numeric_value_past_the_sample_is_named_by_file_line_and_column() {
    let case = Case::empty();
    small(&case, &long_data_with("oops,3.0"));
    case.run("r.assort")
        .fails()
        .stderr_has("`data.csv` line 1202, column 2 (`a`): found `oops`, expected a number");
    assert!(!case.path("out").exists());
}

#[test]
fn infinity_in_the_data_is_refused_at_its_place() {
    let case = Case::empty();
    small(&case, &long_data_with("1.0,inf"));
    case.run("r.assort")
        .fails()
        .stderr_has("line 1202, column 3 (`b`): found `inf`")
        .stderr_has("values must be finite");
}

#[test]
fn a_missing_value_without_a_rule_is_located_and_a_rule_suggested() {
    let case = Case::empty();
    small(&case, "id,a,b\n1,1.0,2.0\n2,,2.5\n3,2.0,3.0\n4,9.0,9.0\n");
    case.run("r.assort")
        .fails()
        .stderr_has("`data.csv` line 3, column 2 (`a`)")
        .stderr_has("missing fill median");
}

#[test]
fn a_malformed_csv_line_is_named() {
    let case = Case::empty();
    // The checker samples the file, so this is caught before any run.
    small(&case, "id,a,b\n1,1.0,2.0\n2,1.5,2.5,7\n3,2.0,3.0\n");
    case.run("r.assort")
        .fails()
        .stderr_has("line 3: found 4 fields, expected 3 as in the header");
}

#[test]
fn a_duplicate_key_is_named_with_both_lines() {
    let case = Case::empty();
    small(
        &case,
        "id,a,b\n1,1.0,2.0\n2,1.5,2.5\n1,2.0,3.0\n4,9.0,9.0\n",
    );
    case.run("r.assort")
        .fails()
        .stderr_has("line 4, column 1 (`id`): key `1` appears again (first on line 2)");
}

#[test]
fn missing_values_are_dropped_or_filled_and_counted() {
    let case = Case::empty();
    case.write("data.csv", "id,a,b\n1,1.0,2.0\n2,,2.5\n3,2.0,\n4,9.0,9.0\n5,8.0,8.5\n").write(
        "r.assort",
        "input \"data.csv\" key id\nfeatures a, b\nmissing drop for a\nmissing fill 0 for b\nkmeans k 2\nsave assignments \"out/a.csv\"\n",
    );
    case.run("r.assort")
        .ok()
        .stdout_has("1 dropped for missing values, 4 segmented (missing in a 1)")
        .stdout_has("b: 1 filled with 0.000");
    let a = case.read("out/a.csv");
    assert_eq!(a.lines().count(), 5, "{a}");
    assert!(
        !a.contains("\n2,"),
        "the dropped record is not assigned: {a}"
    );
}

#[test]
fn a_failed_run_leaves_earlier_outputs_untouched() {
    let case = Case::empty();
    small(
        &case,
        "id,a,b\n1,1.0,2.0\n2,1.5,2.5\n3,2.0,3.0\n4,9.0,9.0\n",
    );
    case.run("r.assort").ok();
    let before = case.read("out/a.csv");
    small(&case, "id,a,b\n1,1.0,2.0\n2,1.5,2.5\n3,2.0,x\n4,9.0,9.0\n");
    case.run("r.assort").fails();
    assert_eq!(case.read("out/a.csv"), before);
    let before_record = case.read("out/r.run.json");
    assert_eq!(case.read("out/r.run.json"), before_record);
    let mut left: Vec<String> = std::fs::read_dir(case.path("out"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    left.sort();
    assert_eq!(left, ["a.csv", "r.run.json"], "temporary files left behind");
}

#[test]
fn log_of_zero_is_refused_at_its_place() {
    let case = Case::empty();
    case.write(
        "data.csv",
        "id,a,b\n1,1.0,2.0\n2,0,2.5\n3,2.0,3.0\n4,9.0,9.0\n",
    )
    .write(
        "r.assort",
        "input \"data.csv\" key id\nfeatures a, b\nreshape a log\nkmeans k 2\n",
    );
    case.run("r.assort")
        .fails()
        .stderr_has("`data.csv` line 3, column 2 (`a`): `log` cannot take 0");
}

// ------------------------------------------------------ hostile paths --

#[test]
fn paths_outside_the_recipe_folder_are_refused_and_nothing_is_written() {
    for (input, output) in [
        ("/etc/passwd", "out/a.csv"),
        ("../data.csv", "out/a.csv"),
        ("data.csv", "../a.csv"),
        ("data.csv", "/tmp/a.csv"),
    ] {
        let case = Case::empty();
        case.write("sub/data.csv", "id,a\n1,1\n2,2\n3,3\n")
            .write("data.csv", "id,a\n1,1\n2,2\n3,3\n")
            .write("sub/r.assort", &format!("input \"{input}\" key id\nfeatures a\nkmeans k 2\nsave assignments \"{output}\"\n"));
        case.run("sub/r.assort")
            .fails()
            .stderr_has("leads outside the recipe's folder");
        assert!(!case.path("a.csv").exists() && !case.path("sub/out").exists());
    }
}

#[test]
fn an_output_may_not_overwrite_the_input() {
    let case = Case::empty();
    small(&case, "id,a,b\n1,1.0,2.0\n2,1.5,2.5\n3,2.0,3.0\n");
    case.edit("r.assort", "out/a.csv", "./data.csv");
    let before = case.read("data.csv");
    case.run("r.assort")
        .fails()
        .stderr_has("would overwrite the input data");
    assert_eq!(case.read("data.csv"), before);
}

#[test]
fn an_impossible_k_is_refused() {
    let case = Case::empty();
    small(&case, "id,a,b\n1,1.0,2.0\n2,1.5,2.5\n3,2.0,3.0\n");
    case.edit("r.assort", "kmeans k 2", "kmeans k 2..4");
    case.run("r.assort")
        .fails()
        .stderr_has("impossible k: k 4 is more than the 3 records in `data.csv`");
}

#[test]
fn a_missing_recipe_file_is_an_error_not_a_panic() {
    let case = Case::empty();
    case.assort(&["run", "nope.assort"], &[])
        .fails()
        .stderr_has("cannot read recipe `nope.assort`");
}

// ------------------------------------------------ outside reference --

#[test]
fn iris_through_a_recipe_reaches_the_reference_within_cluster_sum_of_squares() {
    // Reference: scikit-learn 1.9.1, KMeans(n_clusters=3, n_init=100) on the
    // four raw Iris measurements: best inertia 78.851441426146
    // (tests/data/reference.json). Iris has no key column, so the test adds
    // a row number as the key.
    let iris =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/iris.csv"))
            .unwrap();
    let keyed: String = iris
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 {
                format!("row,{l}\n")
            } else {
                format!("{i},{l}\n")
            }
        })
        .collect();
    let case = Case::empty();
    case.write("iris.csv", &keyed).write(
        "iris.assort",
        "input \"iris.csv\" key row\nfeatures all\nscale none\nkmeans k 3 restarts 100\nsave profiles \"out/p.json\"\n",
    );
    let out = case.run("iris.assort").ok().stdout();
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/reference.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let expected = reference["iris_raw_k3"]["best_inertia"].as_f64().unwrap();
    let row = out
        .lines()
        .find(|l| l.trim_start_matches('>').trim_start().starts_with("3 "))
        .unwrap();
    let within: f64 = row
        .split_whitespace()
        .filter(|w| *w != ">")
        .nth(1)
        .unwrap()
        .parse()
        .unwrap();
    // The table prints three decimals.
    assert!((within - expected).abs() < 5e-4, "{within} vs {expected}");
    let json: serde_json::Value = serde_json::from_str(&case.read("out/p.json")).unwrap();
    let mut sizes: Vec<u64> = json["segments"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["size"].as_u64().unwrap())
        .collect();
    sizes.sort();
    assert_eq!(sizes, vec![38, 50, 62]);
}

// -------------------------------------------------------------- trees --

/// Iris with a row number as key (Iris has no key column).
fn keyed_iris() -> String {
    let iris =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/iris.csv"))
            .unwrap();
    iris.lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 {
                format!("row,{l}\n")
            } else {
                format!("{i},{l}\n")
            }
        })
        .collect()
}

#[test]
fn an_iris_tree_recipe_cuts_like_the_reference_and_writes_its_tree() {
    // Reference: scipy 1.17.1, linkage(method='average') on the raw Iris
    // measurements, fcluster(maxclust=3) (tests/data/reference.json).
    let case = Case::empty();
    case.write("iris.csv", &keyed_iris()).write(
        "iris.assort",
        "input \"iris.csv\" key row\nfeatures all\nscale none\ntree linkage average k 3\n\
         save assignments \"out/a.csv\"\nsave merges \"out/merges.csv\"\nsave tree \"out/iris.nwk\"\n",
    );
    case.run("iris.assort")
        .ok()
        .stdout_has("tree sweep: average linkage, euclidean distance, over 150 records")
        .stdout_has("cophenetic correlation 0.8770");
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/reference.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let theirs: Vec<u64> = reference["trees"]["iris/average/euclidean"]["cut3_labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    let ours: Vec<u64> = case
        .read("out/a.csv")
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap().parse().unwrap())
        .collect();
    assert_eq!(
        assort::engine::compare::adjusted_rand_index(&ours, &theirs),
        1.0
    );

    let merges = case.read("out/merges.csv");
    assert_eq!(merges.lines().next(), Some("step,first,second,height,size"));
    assert_eq!(merges.lines().count(), 150, "a header and 149 merges");
    assert!(merges.lines().last().unwrap().ends_with(",150"));
    let newick = case.read("out/iris.nwk");
    assert!(newick.ends_with(");\n"), "{newick}");
    assert_eq!(newick.matches('(').count(), 149);
    assert_eq!(newick.matches(')').count(), 149);
    assert_eq!(newick.matches(',').count(), 149);
}

#[test]
fn the_two_stage_tree_recovers_the_demo_segments() {
    let case = Case::demo();
    case.edit(
        DEMO,
        "kmeans k 2..8 restarts 50",
        "tree linkage ward k 2..8 micro 300",
    );
    let out = case.run(DEMO).ok().stdout();
    assert!(
        out.contains("over 300 k-means micro-segments (weighted by size)"),
        "{out}"
    );
    assert!(out.contains("chosen: k = 5 "), "{out}");
    let ari: f64 = out
        .split("adjusted Rand index ")
        .nth(1)
        .and_then(|r| r.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .unwrap();
    assert!(ari > 0.9, "adjusted Rand index {ari}");
}

/// 200,000 records in three planted groups, two features.
fn many_records() -> String {
    let mut s = assort::engine::rng::Stream::new(8, 0);
    let mut data = String::with_capacity(200_000 * 24);
    data.push_str("id,a,b\n");
    let centres = [(0.0, 0.0), (6.0, 0.0), (3.0, 5.0)];
    for i in 0..200_000 {
        let (cx, cy) = centres[i % 3];
        data.push_str(&format!("{i},{:.4},{:.4}\n", cx + s.unit(), cy + s.unit()));
    }
    data
}

#[test]
fn a_tree_over_200000_records_is_refused_and_the_two_stage_route_runs() {
    let case = Case::empty();
    case.write("big.csv", &many_records()).write(
        "r.assort",
        "input \"big.csv\" key id\nfeatures a, b\ntree linkage ward k 2..4\nsave assignments \"out/a.csv\"\n",
    );
    case.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("too many for a tree over every record (at most 20000)")
        .stderr_has("add `micro 500`");
    assert!(!case.path("out").exists());

    case.edit("r.assort", "k 2..4", "k 2..4 micro 100");
    case.edit(
        "r.assort",
        "save assignments",
        "save merges \"out/merges.csv\"\nsave assignments",
    );
    let out = case.run("r.assort").ok().stdout();
    assert!(out.contains("over 100 k-means micro-segments"), "{out}");
    assert!(out.contains("chosen: k = 3 "), "{out}");
    assert_eq!(case.read("out/a.csv").lines().count(), 200_001);
    let merges = case.read("out/merges.csv");
    assert_eq!(
        merges.lines().count(),
        100,
        "a header and 99 merges of 100 micro-segments"
    );
    assert!(merges.contains(",micro-"), "{merges}");
}

#[test]
fn an_iris_tree_cut_by_height_matches_the_reference_cut() {
    // Reference: scipy 1.17.1 average linkage on the raw Iris measurements;
    // its last merges are at 1.7856, 1.9636 and 4.0627, so a cut at 1.9
    // undoes the top two and leaves fcluster's three segments
    // (tests/data/reference.json).
    let case = Case::empty();
    case.write("iris.csv", &keyed_iris()).write(
        "iris.assort",
        "input \"iris.csv\" key row\nfeatures all\nscale none\ntree linkage average height 1.9\nsave assignments \"out/a.csv\"\n",
    );
    case.assort(&["check", "iris.assort"], &[])
        .ok()
        .stdout_has("height 1.9");
    case.run("iris.assort")
        .ok()
        .stdout_has("k = 3: the segments left when the tree is cut at height 1.9");
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/reference.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let block = &reference["trees"]["iris/average/euclidean"];
    let heights: Vec<f64> = block["heights"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert!(
        heights[146] < 1.9 && heights[147] > 1.9,
        "the reference heights moved: {:?}",
        &heights[145..]
    );
    let theirs: Vec<u64> = block["cut3_labels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    let ours: Vec<u64> = case
        .read("out/a.csv")
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap().parse().unwrap())
        .collect();
    assert_eq!(
        assort::engine::compare::adjusted_rand_index(&ours, &theirs),
        1.0
    );
}

#[test]
fn a_height_above_the_whole_tree_is_a_clear_error() {
    let case = Case::empty();
    case.write("iris.csv", &keyed_iris()).write(
        "iris.assort",
        "input \"iris.csv\" key row\nfeatures all\ntree linkage average height 1000\n",
    );
    case.run("iris.assort")
        .fails()
        .stderr_has("cutting the tree at height 1000 leaves a single segment");
}

// ----------------------------------------------------------- evidence --

#[test]
fn evidence_adds_gap_and_stability_and_can_choose_k() {
    let case = Case::empty();
    case.write("iris.csv", &keyed_iris()).write(
        "iris.assort",
        "input \"iris.csv\" key row\nfeatures all\nscale zscore\nkmeans k 2..5 restarts 10\n\
         evidence gap 10 stability 10\nchoose k by stability\nsave profiles \"out/p.csv\"\n",
    );
    let out = case.run("iris.assort").ok().stdout();
    assert!(
        out.contains("gap (se)") && out.contains("stability"),
        "{out}"
    );
    assert!(
        out.contains("stability: mean adjusted Rand index over bootstrap resamples"),
        "{out}"
    );
    assert!(out.contains("has the highest stability"), "{out}");
    assert!(out.contains("stability (Jaccard)"), "{out}");
    let profiles = case.read("out/p.csv");
    assert!(
        profiles.starts_with("segment,label,size,share,silhouette,stability,"),
        "{profiles}"
    );
}

#[test]
fn a_structureless_cloud_is_called_so_in_plain_words() {
    // One Gaussian cloud: the gap statistic's rule answers k = 1.
    let mut s = assort::engine::rng::Stream::new(3, 0);
    let mut normal = || {
        let (u1, u2) = (1.0 - s.unit(), s.unit());
        (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
    };
    let mut data = String::from("id,a,b\n");
    for i in 0..300 {
        data.push_str(&format!("{i},{:.6},{:.6}\n", normal(), normal()));
    }
    let case = Case::empty();
    case.write("cloud.csv", &data).write(
        "r.assort",
        "input \"cloud.csv\" key id\nfeatures a, b\nkmeans k 2..5\nchoose k by gap\n",
    );
    case.run("r.assort")
        .ok()
        .stdout_has("the gap statistic finds no cluster structure")
        .stdout_has("k = 2, the smallest of the range, is shown");
}

// ------------------------------------------------------------- reruns --

#[test]
fn verify_passes_after_a_run_and_names_a_data_change() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.assort(&["verify", DEMO], &[])
        .ok()
        .stdout_has("verified: the rerun of `coop-members.assort` matches its run record");
    // One byte of the data changes: a digit of the first member's tenure.
    let data = case.read("data/coop_members.csv");
    let at = data.find("\nM10001,").unwrap() + "\nM10001,Riverside,".len();
    let mut bytes = data.into_bytes();
    bytes[at] = if bytes[at] == b'9' {
        b'8'
    } else {
        bytes[at] + 1
    };
    std::fs::write(case.path("data/coop_members.csv"), bytes).unwrap();
    case.assort(&["verify", DEMO], &[])
        .fails()
        .stderr_has("data changed: `data/coop_members.csv`");
}

#[test]
fn verify_names_a_recipe_change_and_an_edited_output() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.write("out/segment_centroids.csv", "tampered\n");
    case.assort(&["verify", DEMO], &[])
        .fails()
        .stderr_has("output edited: `out/segment_centroids.csv`");
    case.edit(DEMO, "restarts 50", "restarts 51");
    case.assort(&["verify", DEMO], &[])
        .fails()
        .stderr_has("recipe changed");
}

#[test]
fn verify_without_a_record_says_to_run_first() {
    let case = Case::demo();
    case.assort(&["verify", DEMO], &[])
        .fails()
        .stderr_has("cannot read the run record")
        .stderr_has("run the recipe once");
}

#[test]
fn the_run_record_holds_digests_of_everything() {
    let case = Case::demo();
    case.run(DEMO).ok();
    let rec: serde_json::Value =
        serde_json::from_str(&case.read("out/coop-members.run.json")).unwrap();
    assert_eq!(rec["format"], "assort-run/1");
    assert_eq!(rec["seed"], 2026);
    assert_eq!(rec["chosen_k"], 5);
    assert_eq!(rec["inputs"][0]["records"], 6000);
    assert_eq!(rec["inputs"][1]["role"], "validate");
    assert_eq!(rec["outputs"].as_array().unwrap().len(), 6);
    assert_eq!(rec["plan"]["method"]["restarts"], 50);
    // The digest of each output is the SHA-256 of its bytes (checked here
    // with an independent count: a 64-digit lowercase hex string that
    // changes when the file does).
    let first = rec["outputs"][0]["sha256"].as_str().unwrap();
    assert_eq!(first.len(), 64);
    assert!(first
        .chars()
        .all(|c| c.is_ascii_hexdigit() && !c.is_ascii_uppercase()));
}

#[test]
fn a_dry_run_lists_reads_and_writes_and_writes_nothing() {
    let case = Case::demo();
    case.assort(&["run", "--dry-run", DEMO], &[])
        .ok()
        .stdout_has("would read  data/coop_members.csv")
        .stdout_has("would write out/member_segments.csv")
        .stdout_has("would write out/coop-members.run.json (the run record)");
    assert!(!case.path("out").exists());
}

#[cfg(unix)]
#[test]
fn a_symbolic_link_out_of_the_folder_is_refused_unless_allowed() {
    let outside = tempfile::tempdir().unwrap();
    std::fs::write(outside.path().join("d.csv"), "id,a\n1,1\n2,2\n3,3\n").unwrap();
    let case = Case::empty();
    std::os::unix::fs::symlink(outside.path(), case.path("shared")).unwrap();
    case.write(
        "r.assort",
        "input \"shared/d.csv\" key id\nfeatures a\nkmeans k 2\nsave assignments \"out/a.csv\"\n",
    );
    case.run("r.assort")
        .fails()
        .stderr_has("path `shared/d.csv` leads outside the recipe's folder")
        .stderr_has("--allow-dir");
    assert!(!case.path("out").exists());
    let allow = outside.path().to_string_lossy().into_owned();
    case.assort(&["run", "--allow-dir", &allow, "r.assort"], &[])
        .ok();
    assert!(case.path("out/a.csv").exists());
}

#[test]
fn an_output_may_not_overwrite_the_known_grouping_either() {
    let case = Case::demo();
    case.edit(
        DEMO,
        "save centroids \"out/segment_centroids.csv\"",
        "save centroids \"data/coop_members_planted.csv\"",
    );
    let before = case.read("data/coop_members_planted.csv");
    case.run(DEMO)
        .fails()
        .stderr_has("would overwrite the input data");
    assert_eq!(case.read("data/coop_members_planted.csv"), before);
    assert!(!case.path("out").exists());
}

// ------------------------------------------------------------- models --

#[test]
fn assigning_the_training_data_with_the_model_reproduces_the_run() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/coop_members.csv",
            "--out",
            "out/again.csv",
        ],
        &[],
    )
    .ok()
    .stderr_has("assigned 6000 records of 6000")
    .stderr_has("values filled with the training fill value: basket_value 81");
    assert_eq!(
        std::fs::read(case.path("out/again.csv")).unwrap(),
        std::fs::read(case.path("out/member_segments.csv")).unwrap()
    );
    // To standard output, the same bytes.
    let to_stdout = case
        .assort(
            &["assign", "out/segment_model.json", "data/coop_members.csv"],
            &[],
        )
        .ok();
    assert_eq!(
        to_stdout.0.stdout,
        std::fs::read(case.path("out/member_segments.csv")).unwrap()
    );
}

#[test]
fn scoring_new_records_counts_what_it_could_not_use() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.write(
        "new.csv",
        "member_id,home_branch,tenure_months,visits_per_month,basket_value,share_fresh,share_bulk,share_prepared,online_ratio,coupon_rate\n\
         N1,Riverside,12,4.0,30.5,0.4,0.2,0.1,0.1,0.05\n\
         N2,Lakeside,40,2.0,140.0,0.2,0.5,0.05,0.1,0.1\n\
         N3,Hilltop,,1.0,20.0,0.3,0.1,0.3,0.3,0.1\n\
         N4,Harbour,20,lots,50.0,0.1,0.1,0.5,0.7,0.1\n\
         N5,Harbour,20,3.0,-5,0.1,0.1,0.5,0.7,0.1\n",
    );
    let run = case
        .assort(&["assign", "out/segment_model.json", "new.csv"], &[])
        .ok();
    let out = run.stdout();
    // N4 has a word for a number and N5 a basket log1p cannot take; the
    // blank tenure of N3 is filled, the unseen branch of N2 scored as none.
    assert_eq!(out.lines().count(), 4, "{out}");
    assert!(
        out.contains("\nN1,") && out.contains("\nN2,") && out.contains("\nN3,"),
        "{out}"
    );
    run.stderr_has("assigned 3 records of 5")
        .stderr_has("values filled with the training fill value: tenure_months 1")
        .stderr_has("records left out: a value that is not a number: visits_per_month 1")
        .stderr_has("records left out: a value the transform cannot take: basket_value 1")
        .stderr_has("category values not seen in training (scored as no level): home_branch 1");
}

#[test]
fn scoring_data_without_a_model_column_is_an_error() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.write(
        "new.csv",
        "member_id,home_branch,tenure_months\nN1,Riverside,12\n",
    );
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "new.csv",
            "--out",
            "out/scored.csv",
        ],
        &[],
    )
    .fails()
    .stderr_has("`new.csv` has no column `visits_per_month`, which the model needs");
    assert!(!case.path("out/scored.csv").exists());
}

#[test]
fn assign_refuses_to_overwrite_its_input() {
    let case = Case::demo();
    case.run(DEMO).ok();
    let before = case.read("data/coop_members.csv");
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/coop_members.csv",
            "--out",
            "data/coop_members.csv",
        ],
        &[],
    )
    .fails()
    .stderr_has("would overwrite one of the inputs");
    assert_eq!(case.read("data/coop_members.csv"), before);
}

// --------------------------------------------------------- comparison --

#[test]
fn compare_shows_a_hand_checked_migration_table() {
    // Worked by hand: old 1,1,1,2,2 and new 1,1,2,2,2 on keys a..e, plus a
    // key only in each file. Old 1 keeps 2 of 3 in new 1 (Jaccard 2/3);
    // old 2 lands wholly in new 2 (Jaccard 2/3: 2 shared of 3 in the union).
    let case = Case::empty();
    case.write("old.csv", "id,segment,label,distance,margin\na,1,,0,0\nb,1,,0,0\nc,1,,0,0\nd,2,,0,0\ne,2,,0,0\nx,2,,0,0\n")
        .write("new.csv", "id,segment,label,distance,margin\na,1,,0,0\nb,1,,0,0\nc,2,,0,0\nd,2,,0,0\ne,2,,0,0\ny,1,,0,0\n");
    let out = case
        .assort(&["compare", "old.csv", "new.csv"], &[])
        .ok()
        .stdout();
    assert!(
        out.contains("5 in both; 1 only in the old; 1 only in the new"),
        "{out}"
    );
    let rows: Vec<Vec<&str>> = out
        .lines()
        .filter(|l| l.starts_with("  1 ") || l.starts_with("  2 "))
        .map(|l| l.split_whitespace().collect())
        .collect();
    assert_eq!(rows[0], ["1", "2", "1", "3", "1", "(0.67)"], "{out}");
    assert_eq!(rows[1], ["2", "0", "2", "2", "2", "(0.67)"], "{out}");
    assert_eq!(rows[2], ["1", "67%", "33%"], "{out}");
    assert_eq!(rows[3], ["2", "0%", "100%"], "{out}");
}

#[test]
fn compare_gives_the_reference_adjusted_rand_index() {
    // Reference: scikit-learn 1.9.1 adjusted_rand_score on the tiny example's
    // labellings, 0.39114391143911437 (../shared/data/REFERENCE.md;
    // tests/data/reference.json).
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/reference.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let t = &reference["tiny"];
    let file = |labels: &serde_json::Value| -> String {
        let mut s = String::from("id,segment\n");
        for (i, l) in labels.as_array().unwrap().iter().enumerate() {
            s.push_str(&format!("r{i},{l}\n"));
        }
        s
    };
    let case = Case::empty();
    case.write("truth.csv", &file(&t["labels_truth"]))
        .write("pred.csv", &file(&t["labels_pred"]));
    case.assort(&["compare", "truth.csv", "pred.csv"], &[])
        .ok()
        .stdout_has("adjusted Rand index 0.3911 ");
    let read = |n: &str| assort::run::comparison::read_assignments(&case.path(n), n).unwrap();
    let c =
        assort::run::comparison::compare("truth", &read("truth.csv"), "pred", &read("pred.csv"));
    let expected = t["ari_truth_vs_pred"].as_f64().unwrap();
    assert!(
        (c.adjusted_rand_index - expected).abs() < 1e-12,
        "{} vs {expected}",
        c.adjusted_rand_index
    );
}

#[test]
fn a_recipe_compares_itself_with_last_quarter() {
    let case = Case::demo();
    case.run(DEMO).ok();
    std::fs::copy(
        case.path("out/member_segments.csv"),
        case.path("last_quarter.csv"),
    )
    .unwrap();
    case.edit(
        DEMO,
        "validate against",
        "compare with \"last_quarter.csv\"\nvalidate against",
    );
    case.run(DEMO)
        .ok()
        .stdout_has("comparison: `last_quarter.csv` (old) with `this run` (new)")
        .stdout_has("6000 in both; 0 only in the old; 0 only in the new")
        .stdout_has("adjusted Rand index 1.0000");
    let rec: serde_json::Value =
        serde_json::from_str(&case.read("out/coop-members.run.json")).unwrap();
    assert!(rec["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .any(|i| i["role"] == "compare"));
}

#[test]
fn comparing_a_file_without_segments_is_an_error() {
    let case = Case::empty();
    case.write("a.csv", "id,group\n1,2\n")
        .write("b.csv", "id,segment\n1,2\n");
    case.assort(&["compare", "a.csv", "b.csv"], &[])
        .fails()
        .stderr_has("`a.csv` is not an assignments file: it has no `segment` column");
}

// ------------------------------------------------------ personal data --

#[test]
fn an_acknowledged_column_is_not_warned_about_again() {
    let case = Case::empty();
    case.write(
        "p.csv",
        "id,age_band,visits\n1,2,3.0\n2,3,1.0\n3,4,2.0\n4,1,5.0\n",
    )
    .write(
        "r.assort",
        "input \"p.csv\" key id\nfeatures visits, age_band\nkmeans k 2\n",
    );
    case.assort(&["check", "r.assort"], &[])
        .ok()
        .stderr_has("`age_band` looks like a protected attribute");
    case.edit(
        "r.assort",
        "kmeans k 2",
        "acknowledge age_band \"reviewed with the privacy office, ref 2026-114\"\nkmeans k 2",
    );
    let run = case.assort(&["check", "r.assort"], &[]).ok();
    assert!(run.stderr().is_empty(), "{}", run.stderr());
}

#[test]
fn the_demo_raises_no_personal_data_warning() {
    let case = Case::demo();
    let run = case.assort(&["check", DEMO], &[]).ok();
    assert!(run.stderr().is_empty(), "{}", run.stderr());
}

// ------------------------------------------------------------ formatter --

#[test]
fn fmt_rewrites_a_recipe_and_check_reports_it() {
    let case = Case::empty();
    case.write(
        "r.assort",
        "seed   7 # fixed\nfeatures a ,b,\n   c\n\n\n\nkmeans k 2\n",
    );
    case.assort(&["fmt", "--check", "r.assort"], &[])
        .fails()
        .stdout_has("would reformat r.assort");
    case.assort(&["fmt", "r.assort"], &[])
        .ok()
        .stdout_has("formatted r.assort");
    assert_eq!(
        case.read("r.assort"),
        "seed 7  # fixed\nfeatures a, b,\n         c\n\nkmeans k 2\n"
    );
    case.assort(&["fmt", "--check", "r.assort"], &[]).ok();
}

#[test]
fn fmt_refuses_a_recipe_that_does_not_parse() {
    let case = Case::empty();
    case.write("r.assort", "seed abc\n");
    case.assort(&["fmt", "r.assort"], &[])
        .fails()
        .stderr_has("was not formatted: it does not parse");
    assert_eq!(case.read("r.assort"), "seed abc\n");
}

// ------------------------------------------------------------ session --

impl Case {
    /// Runs `assort` with `input` piped to standard input.
    fn assort_piped(&self, args: &[&str], input: &str) -> Run {
        use std::io::Write;
        let mut child = Command::new(env!("CARGO_BIN_EXE_assort"))
            .args(args)
            .current_dir(self.dir.path())
            .env("NO_COLOR", "1")
            .stdin(std::process::Stdio::piped())
            .stdout(std::process::Stdio::piped())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        child
            .stdin
            .take()
            .unwrap()
            .write_all(input.as_bytes())
            .unwrap();
        Run(child.wait_with_output().unwrap())
    }
}

#[test]
fn a_piped_session_builds_runs_varies_and_saves_a_recipe() {
    let case = Case::demo();
    let script = "input \"data/coop_members.csv\" key member_id\n\
                  features tenure_months, visits_per_month, basket_value,\n\
                  \x20        share_fresh, share_bulk, share_prepared\n\
                  missing fill median\n\
                  reshape basket_value log1p\n\
                  kmeans k 2..5 restarts 5\n\
                  :run\n\
                  kmeans k 4 restarts 5\n\
                  scale robust\n\
                  weight share_fresh 2\n\
                  features vists_per_month\n\
                  :undo\n\
                  :run\n\
                  :again sweep\n\
                  :save tried.assort\n\
                  :quit\n";
    let run = case.assort_piped(&["repl", "tried.assort"], script).ok();
    let out = run.stdout();
    assert!(out.contains("k-means sweep: 5 restarts per k"), "{out}");
    assert!(out.contains("replaced the earlier `kmeans`"), "{out}");
    assert!(out.contains("did you mean `visits_per_month`?"), "{out}");
    assert!(
        out.contains("not kept: the `features` statement has an error"),
        "{out}"
    );
    assert!(out.contains("removed `weight share_fresh 2`"), "{out}");
    assert!(out.contains("saved tried.assort"), "{out}");
    // The last run's table, as the session showed it.
    let session_sweep = out
        .split("chosen: ")
        .nth(2)
        .and_then(|s| s.lines().next())
        .unwrap()
        .to_string();

    // The saved recipe checks cleanly, is formatted, and runs to the same
    // results the session showed.
    let saved = case.read("tried.assort");
    assert_eq!(assort::syntax::format::format(&saved).unwrap(), saved);
    assert!(
        saved.contains("kmeans k 4 restarts 5")
            && saved.contains("scale robust")
            && !saved.contains("weight"),
        "{saved}"
    );
    let check = case.assort(&["check", "tried.assort"], &[]).ok();
    assert!(check.stderr().is_empty(), "{}", check.stderr());
    let rerun = case.run("tried.assort").ok().stdout();
    assert!(
        rerun.contains(&format!("chosen: {session_sweep}")),
        "session: {session_sweep}\nrerun:\n{rerun}"
    );
}

#[test]
fn a_session_explains_unknown_commands_and_helps() {
    let case = Case::empty();
    let out = case
        .assort_piped(&["repl"], ":rnu\n:help kmeans\n:again\n:quit\n")
        .ok()
        .stdout();
    assert!(
        out.contains("unknown command `:rnu`; did you mean `:run`?"),
        "{out}"
    );
    assert!(out.contains("kmeans: the method"), "{out}");
    assert!(out.contains("restarts"), "{out}");
    assert!(out.contains("nothing to show: `:run` first"), "{out}");
}

#[test]
fn a_session_on_the_demo_changes_k_and_scaling_and_saves_a_recipe_that_reruns_the_same() {
    let case = Case::demo();
    let script = "kmeans k 3..6 restarts 10\nscale robust\n:run\n:save varied.assort\n:quit\n";
    let out = case.assort_piped(&["repl", DEMO], script).ok().stdout();
    assert!(
        out.contains("replaced the earlier `kmeans`")
            && out.contains("replaced the earlier `scale`"),
        "{out}"
    );
    assert!(out.contains("saved varied.assort"), "{out}");
    // The sweep and the profiles the session showed are what the saved
    // recipe runs to.
    let section = |text: &str| -> String {
        let start = text.find("k-means sweep").unwrap();
        let end = ["\nwrote ", "\nsaved "]
            .iter()
            .filter_map(|m| text[start..].find(m))
            .min()
            .map_or(text.len(), |e| start + e);
        text[start..end]
            .replace("coop-members", "varied")
            .trim_end()
            .to_string()
    };
    let shown = section(&out);
    let rerun = case.run("varied.assort").ok().stdout();
    assert_eq!(section(&rerun), shown);
    let saved = case.read("varied.assort");
    assert!(
        saved.contains("kmeans k 3..6 restarts 10")
            && saved.contains("scale robust")
            && saved.contains("# Quarterly review"),
        "{saved}"
    );
}

// ----------------------------------------------------- machine output --

/// Parses a `--json` document and checks the keys every document has.
#[track_caller]
fn json_doc(run: &Run, format: &str) -> serde_json::Value {
    let doc: serde_json::Value = serde_json::from_str(&run.stdout())
        .unwrap_or_else(|e| panic!("not JSON ({e}):\n{}", run.stdout()));
    assert_eq!(doc["format"], format, "{doc}");
    assert!(doc["ok"].is_boolean(), "{doc}");
    doc
}

#[test]
fn every_command_speaks_json_as_documented() {
    // The schema: docs/json.md.
    let case = Case::demo();
    let check = json_doc(
        &case.assort(&["check", "--json", DEMO], &[]).ok(),
        "assort-check/1",
    );
    assert_eq!(check["cut"], "k 2..8");
    assert!(check["diagnostics"].as_array().unwrap().is_empty());

    let plan = json_doc(
        &case.assort(&["plan", "--json", DEMO], &[]).ok(),
        "assort-plan/1",
    );
    assert_eq!(plan["plan"]["seed"], 2026);

    let run = json_doc(
        &case.assort(&["run", "--json", DEMO], &[]).ok(),
        "assort-result/1",
    );
    let result = &run["result"];
    assert_eq!(result["chosen_k"], 5);
    assert_eq!(result["sweep"].as_array().unwrap().len(), 7);
    assert_eq!(result["segments"].as_array().unwrap().len(), 5);
    assert_eq!(result["features"].as_array().unwrap().len(), 8);
    for key in [
        "k",
        "within_ss",
        "silhouette",
        "calinski_harabasz",
        "davies_bouldin",
        "gap",
        "stability",
        "restarts_at_best",
    ] {
        assert!(
            result["sweep"][0].get(key).is_some(),
            "sweep rows lack `{key}`"
        );
    }
    assert!(result["written"]
        .as_array()
        .unwrap()
        .last()
        .unwrap()
        .as_str()
        .unwrap()
        .ends_with(".run.json"));

    let verify = json_doc(
        &case.assort(&["verify", "--json", DEMO], &[]).ok(),
        "assort-verify/1",
    );
    assert_eq!(verify["differences"].as_array().unwrap().len(), 0);

    let compare = json_doc(
        &case
            .assort(
                &[
                    "compare",
                    "--json",
                    "out/member_segments.csv",
                    "out/member_segments.csv",
                ],
                &[],
            )
            .ok(),
        "assort-compare/1",
    );
    assert_eq!(compare["comparison"]["adjusted_rand_index"], 1.0);
    assert_eq!(compare["comparison"]["in_both"], 6000);
}

#[test]
fn json_failures_carry_located_diagnostics() {
    let case = Case::demo();
    case.edit(DEMO, "visits_per_month", "vists_per_month");
    let run = case.assort(&["run", "--json", DEMO], &[]).fails();
    let doc = json_doc(&run, "assort-result/1");
    assert_eq!(doc["ok"], false);
    let d = &doc["diagnostics"][0];
    assert_eq!(d["code"], "assort::unknown_column");
    assert_eq!(d["range"]["start"]["line"], 8);
    assert_eq!(d["help"], "did you mean `visits_per_month`?");
    assert!(run.stderr().is_empty(), "{}", run.stderr());
}

#[test]
fn output_to_a_pipe_has_no_escape_codes_even_without_no_color() {
    let case = Case::demo();
    case.edit(DEMO, "scale zscore", "scale zscor");
    for args in [&["run", DEMO][..], &["check", DEMO]] {
        let out = Command::new(env!("CARGO_BIN_EXE_assort"))
            .args(args)
            .current_dir(case.dir.path())
            .env_remove("NO_COLOR")
            .output()
            .unwrap();
        let all = [out.stdout, out.stderr].concat();
        assert!(!all.contains(&0x1b), "escape codes in `{}`", args.join(" "));
    }
}

#[test]
fn quiet_runs_print_nothing_but_still_write() {
    let case = Case::demo();
    let run = case.assort(&["run", "--quiet", DEMO], &[]).ok();
    assert!(run.stdout().is_empty(), "{}", run.stdout());
    assert!(case.path("out/member_segments.csv").exists());
}

// ------------------------------------------------------ charts, report --

/// Parses a document as XML, panicking with the parser's message.
#[track_caller]
fn well_formed(text: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse_with_options(
        text,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..Default::default()
        },
    )
    .unwrap_or_else(|e| panic!("not well-formed: {e}"))
}

#[test]
fn the_demo_report_is_well_formed_and_holds_every_segment_and_chart() {
    let case = Case::demo();
    case.run(DEMO).ok();
    let html = case.read("out/segment_report.html");
    let doc = well_formed(&html);
    let cards = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("card"))
        .count();
    assert_eq!(cards, 5);
    for label in [
        "weekly fresh regulars",
        "bulk planners",
        "online convenience",
        "coupon-driven",
        "occasional newcomers",
    ] {
        assert!(html.contains(label), "no card for `{label}`");
    }
    let svgs: Vec<_> = doc
        .descendants()
        .filter(|n| n.tag_name().name() == "svg")
        .collect();
    assert_eq!(
        svgs.len(),
        5,
        "criteria, sizes, silhouettes, heat map, projection"
    );
    // Self-contained: nothing to fetch, nothing to run.
    // (The SVG namespace names a URI; nothing is fetched from it.)
    for fetch in ["<script", " src=", "href=", "@import", "url("] {
        assert!(!html.contains(fetch), "the report contains `{fetch}`");
    }
    assert!(html.contains("may be unlawful or unfair"));
}

#[test]
fn every_chart_is_well_formed_svg_for_kmeans_and_tree_recipes() {
    for method in ["kmeans k 2..5 restarts 5", "tree linkage ward k 2..5"] {
        let case = Case::demo();
        case.edit(DEMO, "kmeans k 2..8 restarts 50", method);
        case.edit(
            DEMO,
            "choose k by silhouette",
            "choose k by silhouette\nevidence gap 3 stability 3",
        );
        case.run(DEMO).ok();
        let html = case.read("out/segment_report.html");
        let doc = well_formed(&html);
        let svgs: Vec<_> = doc
            .descendants()
            .filter(|n| n.tag_name().name() == "svg")
            .collect();
        let expected = if method.starts_with("tree") { 6 } else { 5 };
        assert_eq!(svgs.len(), expected, "{method}");
        for svg in svgs {
            // Each chart stands alone as an SVG document too.
            let text = &html[svg.range()];
            let alone = well_formed(text);
            let root = alone.root_element();
            assert_eq!(root.tag_name().name(), "svg");
            assert!(
                root.descendants().any(|n| n.tag_name().name() == "title"),
                "a chart without a title"
            );
            assert!(
                root.descendants().filter(|n| n.is_element()).count() > 10,
                "an empty chart"
            );
        }
        if method.starts_with("tree") {
            assert!(html.contains("cut: "), "the dendrogram has no cut");
        }
    }
}

#[test]
fn on_a_terminal_colour_shows_unless_no_color_is_set() {
    // `script` (util-linux, an essential Debian package) runs the command
    // under a pseudo-terminal, as a person at a terminal would.
    let case = Case::demo();
    case.edit(DEMO, "scale zscore", "scale zscor");
    let under_terminal = |no_color: bool| {
        let mut cmd = Command::new("script");
        cmd.args([
            "-qec",
            &format!("{} check {DEMO}", env!("CARGO_BIN_EXE_assort")),
            "/dev/null",
        ])
        .current_dir(case.dir.path())
        .env_remove("NO_COLOR");
        if no_color {
            cmd.env("NO_COLOR", "1");
        }
        let out = cmd
            .output()
            .expect("`script` runs the command under a terminal");
        String::from_utf8_lossy(&out.stdout).into_owned()
    };
    let coloured = under_terminal(false);
    assert!(coloured.contains("unknown scale method"), "{coloured}");
    assert!(coloured.contains('\u{1b}'), "no colour on a terminal");
    let plain = under_terminal(true);
    assert!(plain.contains("unknown scale method"), "{plain}");
    assert!(
        !plain.contains('\u{1b}'),
        "escape codes despite NO_COLOR:\n{plain}"
    );
}
