//! The documentation keeps up with the language: every statement word and
//! every option the checker knows has its place in docs/language.md, so the
//! help the session and the editor show (from the same vocabulary) is
//! explained there too.

use assort::check::vocab;
use std::path::Path;

fn language_md() -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/language.md")).unwrap()
}

#[test]
fn every_statement_has_a_section_with_an_example() {
    let doc = language_md();
    for s in vocab::STATEMENTS {
        assert!(
            doc.contains(&format!("### `{}`", s.word)),
            "docs/language.md has no section for `{}`",
            s.word
        );
    }
}

#[test]
fn every_option_is_documented() {
    let doc = language_md();
    for word in vocab::statement_words() {
        for o in vocab::options_for(word) {
            assert!(
                doc.contains(&format!("| `{}` |", o.name)),
                "docs/language.md does not list option `{}` of `{word}`",
                o.name
            );
        }
    }
}

#[test]
fn every_output_and_criterion_is_named() {
    let doc = language_md();
    for what in vocab::SAVE_WHAT {
        assert!(
            doc.contains(&format!("save {what}")) || doc.contains(&format!("`{what}`")),
            "output `{what}` is not documented"
        );
    }
    for c in assort::plan::Criterion::NAMES {
        assert!(
            doc.contains(&format!("choose k by {c}")),
            "criterion `{c}` is not documented"
        );
    }
}
