//! Every quick fix the checker offers leaves a recipe without syntax
//! errors, whatever its layout: a property over generated recipes (lists
//! on one line or continued over lines, comments after commas and between
//! statements, blank lines, misspelt words and columns, text columns among
//! the features, rules for columns that are no features). A text column
//! moved to `categories` is no longer refused as a feature.
//!
//! Data: a small invented member file; the property is the editor's: a
//! fix applied must never break the recipe it mends.

mod common;

use assort::check::diagnostic::{CheckError, Problem};
use assort::check::{self, fixes::fixes, RecipeSource};
use common::case::Case;
use proptest::prelude::*;

const DATA: &str = "member_id,visits_per_month,basket_value,branch,region,tenure\n\
                    M1,4.5,23.1,Riverside,north,12\nM2,1.2,80.5,Old Mill,south,\n\
                    M3,0.8,12.0,Riverside,north,40\nM4,9.1,31.7,Harbour,east,7\n";

/// Columns a `features` list may name: numbers, text, a misspelling.
const COLUMNS: &[&str] = &[
    "visits_per_month",
    "basket_value",
    "branch",
    "region",
    "tenure",
    "vists_per_month",
];

/// Statements that may follow, some misspelt or naming a column that is
/// not a feature.
const OTHERS: &[&str] = &[
    "scale zscore",
    "scale zscor",
    "kmeans k 2..3",
    "kmaens k 2",
    "weight basket_value 2",
    "weight tenure 2",
    "missing fill median",
    "transform basket_value log1p",
    "tree linkage ward distance manhattan k 2",
    "choose k by silhouete",
];

/// A `features` statement over `names`, laid out as `layout` says: all on
/// one line (0), one per continued line (1), or continued with a comment
/// after each comma (2).
fn features(names: &[&str], layout: u8) -> String {
    let mut s = String::from("features ");
    for (i, n) in names.iter().enumerate() {
        if i > 0 {
            s.push_str(match layout {
                0 => ", ",
                1 => ",\n         ",
                _ => ",  # a note\n         ",
            });
        }
        s.push_str(n);
    }
    s
}

fn recipe() -> impl Strategy<Value = String> {
    (
        proptest::sample::subsequence(COLUMNS, 1..=4),
        any::<bool>(),
        0u8..3,
        proptest::sample::subsequence(OTHERS, 0..=4),
        proptest::collection::vec(0u8..3, 6),
    )
        .prop_map(|(names, reverse, layout, others, gaps)| {
            let mut names = names;
            if reverse {
                names.reverse();
            }
            let mut statements = vec![
                "input \"members.csv\" key member_id".to_string(),
                features(&names, layout),
            ];
            statements.extend(others.iter().map(|s| s.to_string()));
            let mut text = String::new();
            for (s, gap) in statements
                .iter()
                .zip(gaps.iter().chain(std::iter::repeat(&0)))
            {
                text.push_str(match gap {
                    1 => "\n",
                    2 => "# a comment line\n",
                    _ => "",
                });
                text.push_str(s);
                text.push('\n');
            }
            text
        })
}

fn applied(text: &str, edits: &[(check::Span, String)]) -> String {
    let mut edits = edits.to_vec();
    edits.sort_by_key(|(s, _)| std::cmp::Reverse(s.start));
    let mut out = text.to_string();
    for (s, new) in edits {
        out.replace_range(s.start..s.end, &new);
    }
    out
}

fn syntax_errors(text: &str) -> Vec<String> {
    assort::syntax::parse(text)
        .errors
        .iter()
        .map(|e| e.to_string())
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn no_quick_fix_leaves_a_syntax_error(text in recipe()) {
        let case = Case::empty();
        case.write("members.csv", DATA);
        let path = case.path("r.assort");
        let checked = check::check(&RecipeSource { path, text: text.clone() });
        for problem in &checked.problems {
            for fix in fixes(problem, &text) {
                let mended = applied(&text, &fix.edits);
                let errors = syntax_errors(&mended);
                prop_assert!(
                    errors.is_empty(),
                    "`{}` on\n{}\ngave\n{}\n{:?}", fix.title, text, mended, errors
                );
                if fix.title.starts_with("move `") {
                    let again = check::check(&RecipeSource {
                        path: case.path("r.assort"),
                        text: mended.clone(),
                    });
                    let column = fix.title.split('`').nth(1).unwrap_or("");
                    let still = again.problems.iter().any(|p| matches!(
                        p,
                        Problem::Check(CheckError::TextFeature { column: c, .. }) if c == column
                    ));
                    prop_assert!(!still, "`{}` still a feature in\n{}", column, mended);
                }
            }
        }
    }
}

#[test]
fn a_text_feature_moved_to_categories_checks_clean_in_every_layout() {
    let case = Case::empty();
    case.write("members.csv", DATA);
    let input = "input \"members.csv\" key member_id\n";
    for features in [
        "features branch\n",
        "features visits_per_month, branch\n",
        "features branch, visits_per_month\n",
        "features visits_per_month,\n         branch\n",
        "features visits_per_month,  # how often\n         branch\n",
        "features visits_per_month,\n         # the shop they use\n         branch\n",
        "features branch,  # the shop they use\n         visits_per_month\n",
        "features visits_per_month, branch, basket_value\n",
    ] {
        let text = format!("{input}{features}missing fill median\nkmeans k 2\n");
        let checked = check::check(&RecipeSource {
            path: case.path("r.assort"),
            text: text.clone(),
        });
        let fix = checked
            .problems
            .iter()
            .flat_map(|p| fixes(p, &text))
            .find(|f| f.title.starts_with("move `branch` to `categories`"))
            .unwrap_or_else(|| panic!("no fix offered for\n{text}"));
        let mended = applied(&text, &fix.edits);
        let again = check::check(&RecipeSource {
            path: case.path("r.assort"),
            text: mended.clone(),
        });
        let errors: Vec<String> = again
            .problems
            .iter()
            .filter(|p| p.is_error())
            .map(|p| p.to_string())
            .collect();
        assert!(errors.is_empty(), "{text}\nbecame\n{mended}\n{errors:?}");
        assert!(mended.contains("categories branch\n"), "{mended}");
    }
}
