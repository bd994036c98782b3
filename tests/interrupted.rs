//! A run killed (SIGKILL) or interrupted (SIGINT) at each point of writing
//! its outputs, including between two renames, leaves either the whole old
//! set or the whole new set (a killed run's half-written set is put back
//! by the next run's recovery), and never a temporary.
//!
//! The run announces each step of writing and pauses there when
//! `ASSORT_TEST_WRITE_PAUSE_MS` is set (a test hook, src/output/set.rs).

mod common;

use common::case::Case;
use std::io::{BufRead, BufReader};
use std::process::{Command, Stdio};

const RECIPE: &str = "r.assort";
/// The folder's files when the set is whole and nothing is left over.
const WHOLE: [&str; 5] = [
    "d.csv",
    "out/a.csv",
    "out/p.csv",
    "out/r.run.json",
    "r.assort",
];
const OUTPUTS: [&str; 3] = ["out/a.csv", "out/p.csv", "out/r.run.json"];

fn recipe(k: usize) -> String {
    format!(
        "input \"d.csv\" key id\nfeatures a, b\nkmeans k {k}\nsave assignments \"out/a.csv\"\nsave profiles \"out/p.csv\"\n"
    )
}

fn data() -> String {
    let mut s = String::from("id,a,b\n");
    for i in 0..40 {
        s.push_str(&format!(
            "k{i},{},{}\n",
            (i % 4) * 3 + i / 20,
            (i % 5) as f64 * 0.7
        ));
    }
    s
}

/// The bytes of each output, or none where it does not exist.
type Set = Vec<Option<Vec<u8>>>;

fn set_of(case: &Case) -> Set {
    OUTPUTS
        .iter()
        .map(|o| std::fs::read(case.path(o)).ok())
        .collect()
}

/// Every file in the case's folder, recursively, by relative name.
fn files(case: &Case) -> Vec<String> {
    fn walk(dir: &std::path::Path, base: &std::path::Path, out: &mut Vec<String>) {
        for e in std::fs::read_dir(dir).unwrap().flatten() {
            let p = e.path();
            if p.is_dir() {
                walk(&p, base, out);
            } else {
                out.push(p.strip_prefix(base).unwrap().display().to_string());
            }
        }
    }
    let mut out = Vec::new();
    walk(case.path("").as_path(), case.path("").as_path(), &mut out);
    out.sort();
    out
}

/// The old set (k = 2) written, the recipe changed to k = 3; and the new
/// set, from a clean run of the changed recipe elsewhere.
fn old_and_new() -> (Case, Set, Set) {
    let fresh = Case::empty();
    fresh.write("d.csv", &data()).write(RECIPE, &recipe(3));
    fresh.run(RECIPE).ok();
    let new = set_of(&fresh);
    let case = Case::empty();
    case.write("d.csv", &data()).write(RECIPE, &recipe(2));
    case.run(RECIPE).ok();
    let old = set_of(&case);
    assert_ne!(old, new);
    case.write(RECIPE, &recipe(3));
    (case, old, new)
}

/// Starts the run, waits for the step `at`, sends `signal`; returns the
/// exit status.
fn signal_at(case: &Case, at: &str, signal: &str) -> std::process::ExitStatus {
    let mut child = Command::new(env!("CARGO_BIN_EXE_assort"))
        .args(["run", RECIPE])
        .current_dir(case.path(""))
        .env("ASSORT_TEST_WRITE_PAUSE_MS", "300")
        .env("NO_COLOR", "1")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut lines = BufReader::new(child.stderr.take().unwrap()).lines();
    let wanted = format!("assort-test: {at}");
    loop {
        let line = lines
            .next()
            .expect("the run ended before the step")
            .unwrap();
        if line == wanted {
            break;
        }
    }
    let sent = Command::new("kill")
        .args([signal, &child.id().to_string()])
        .status()
        .unwrap();
    assert!(sent.success());
    // Drain the rest so the child never blocks on a full pipe.
    for _ in lines {}
    child.wait().unwrap()
}

const POINTS: [&str; 7] = [
    "journal",
    "temporaries",
    "backup 0",
    "backup 2",
    "rename 0",
    "rename 1",
    "committed",
];

#[test]
fn a_killed_run_leaves_the_old_or_the_new_set_after_recovery_and_no_temporary() {
    for at in POINTS {
        let (case, old, new) = old_and_new();
        let status = signal_at(&case, at, "-KILL");
        assert!(!status.success(), "{at}");
        // What the next run does first.
        assort::output::set::recover(&case.path(".r.assort.assort-journal")).unwrap();
        let now = set_of(&case);
        assert!(
            now == old || now == new,
            "{at}: a mix of old and new outputs"
        );
        assert_eq!(files(&case), WHOLE, "{at}");
        // And the next run completes the new set.
        case.run(RECIPE).ok();
        assert_eq!(set_of(&case), new, "{at}");
    }
}

#[test]
fn an_interrupted_run_completes_the_set_it_began_and_leaves_no_temporary() {
    for at in POINTS {
        let (case, _, new) = old_and_new();
        let status = signal_at(&case, at, "-INT");
        assert_eq!(status.code(), Some(130), "{at}");
        assert_eq!(set_of(&case), new, "{at}");
        assert_eq!(files(&case), WHOLE, "{at}");
    }
}
