//! Fuzzes the recipe front end: parse, check against a small data file,
//! render the diagnostics, and format. Formatting must be idempotent (the
//! formatted text formats to itself) and meaning-preserving (the formatted
//! recipe parses to the same statements, spans aside, and the checker finds
//! the same problems). Any panic is a finding.
//!
//!     cargo +nightly fuzz run recipe fuzz/seeds/recipe
#![no_main]

use assort::check::{check, diagnostic::render, RecipeSource};
use assort::syntax::{format::format, parse};
use libfuzzer_sys::fuzz_target;
use std::path::PathBuf;
use std::sync::OnceLock;

/// A folder holding `data/members.csv` and `data/people.csv`, so recipes
/// that name them are checked against a real header and sample.
fn folder() -> &'static PathBuf {
    static FOLDER: OnceLock<PathBuf> = OnceLock::new();
    FOLDER.get_or_init(|| {
        let dir = tempfile::Builder::new()
            .prefix("assort-fuzz-")
            .tempdir()
            .expect("a temporary folder for the fuzz data")
            .keep();
        std::fs::create_dir_all(dir.join("data")).expect("data folder");
        for (name, text) in [
            ("members.csv", include_str!("../../tests/golden/data/members.csv")),
            ("people.csv", include_str!("../../tests/golden/data/people.csv")),
        ] {
            std::fs::write(dir.join("data").join(name), text).expect("fuzz data file");
        }
        dir
    })
}

/// The parsed statements without their spans: what the recipe means.
fn meaning(text: &str) -> serde_json::Value {
    fn strip(v: &mut serde_json::Value) {
        match v {
            serde_json::Value::Object(map) => {
                map.remove("span");
                map.values_mut().for_each(strip);
            }
            serde_json::Value::Array(items) => items.iter_mut().for_each(strip),
            _ => {}
        }
    }
    let mut v = serde_json::to_value(&parse(text).statements).expect("statements serialise");
    strip(&mut v);
    v
}

/// The problems the checker finds, by code and message, in order.
fn problems(text: &str) -> Vec<String> {
    let source = RecipeSource {
        path: folder().join("fuzz.assort"),
        text: text.to_string(),
    };
    let checked = check(&source);
    render(&checked.problems, "fuzz.assort", text, false);
    checked
        .problems
        .iter()
        .map(|p| {
            use miette::Diagnostic;
            let code = p.code().map(|c| c.to_string()).unwrap_or_default();
            format!("{code}: {p}")
        })
        .collect()
}

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let found = problems(text);
    if let Ok(formatted) = format(text) {
        let again = format(&formatted).expect("formatted text parses");
        assert_eq!(again, formatted, "formatting is not idempotent");
        assert_eq!(meaning(&formatted), meaning(text), "formatting changed the statements");
        assert_eq!(problems(&formatted), found, "formatting changed the checker's findings");
    }
});
