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

#[test]
fn every_word_the_checker_accepts_has_hover_help_and_a_place_in_the_docs() {
    use assort::plan::{Criterion, Linkage, Metric, Scale, Seeding, SilhouetteMode, Transform};
    let cases: &[(&str, &[&str])] = &[
        ("transform", &Transform::NAMES),
        ("scale", &Scale::NAMES),
        ("choose", &Criterion::NAMES),
        ("tree", &Linkage::NAMES),
        ("tree", &Metric::NAMES),
        ("kmeans", &Seeding::NAMES),
        ("evidence", &SilhouetteMode::NAMES),
        ("save", &vocab::SAVE_WHAT),
        ("missing", &vocab::FILL_WORDS),
    ];
    for (statement, words) in cases {
        for w in *words {
            assert!(
                vocab::value(statement, w).is_some(),
                "`{w}` in `{statement}` has no hover help in check::vocab::values"
            );
        }
    }
    // And every word with help is explained in the language reference.
    let doc = language_md();
    for v in vocab::VALUES {
        assert!(
            mentions(&doc, v.word),
            "docs/language.md does not mention `{}` of `{}`",
            v.word,
            v.statement
        );
    }
}

/// Whether `word` stands in `doc` as a whole word (`-` and `+` belong to
/// words, as in `kmeans++` and `calinski-harabasz`).
fn mentions(doc: &str, word: &str) -> bool {
    let part = |c: char| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '+');
    doc.match_indices(word).any(|(at, _)| {
        !doc[..at].chars().next_back().is_some_and(part)
            && !doc[at + word.len()..].chars().next().is_some_and(part)
    })
}
