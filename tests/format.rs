//! The formatter: idempotent on every recipe in the repository and on the
//! golden test inputs, and it keeps every comment and every statement.

use assort::syntax::{format::format, parse};
use std::path::{Path, PathBuf};

fn recipes() -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut out = Vec::new();
    for dir in ["recipes", "tests/golden"] {
        for e in std::fs::read_dir(root.join(dir)).unwrap() {
            let p = e.unwrap().path();
            if p.extension().is_some_and(|x| x == "assort") {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

#[test]
fn formatting_is_idempotent_on_every_recipe_that_parses() {
    let mut formatted = 0;
    for path in recipes() {
        let text = std::fs::read_to_string(&path).unwrap();
        let Ok(once) = format(&text) else {
            // Golden inputs for syntax errors do not parse; the formatter
            // refuses them (tested beside the formatter).
            continue;
        };
        let twice = format(&once).unwrap();
        assert_eq!(
            once,
            twice,
            "{} is not stable under formatting",
            path.display()
        );
        // Nothing is lost: the same statements parse, and every comment stays.
        assert_eq!(
            parse(&once).statements.len(),
            parse(&text).statements.len(),
            "{}",
            path.display()
        );
        let comments = |t: &str| t.lines().filter(|l| l.contains('#')).count();
        assert_eq!(comments(&once), comments(&text), "{}", path.display());
        formatted += 1;
    }
    assert!(formatted >= 30, "only {formatted} recipes were formatted");
}

#[test]
fn the_shipped_demo_is_already_in_canonical_layout() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes/coop-members.assort");
    let text = std::fs::read_to_string(path).unwrap();
    assert_eq!(format(&text).unwrap(), text);
}
