//! Golden tests for diagnostics: every `tests/golden/*.assort` recipe is
//! checked and its rendered diagnostics (no colour) compared with the
//! `.txt` file of the same name. One recipe per class of problem.
//!
//! To rewrite the expected files after an intended change of wording:
//!
//!     UPDATE_GOLDEN=1 cargo test --release --test golden
//!
//! then review the diff like code.

use assort::check::diagnostic::{render, Screen};
use assort::check::{check, RecipeSource};
use std::path::Path;

#[test]
fn every_golden_recipe_renders_its_expected_diagnostics() {
    let dir = Path::new("tests/golden");
    let update = std::env::var_os("UPDATE_GOLDEN").is_some();
    let mut recipes: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "assort"))
        .collect();
    recipes.sort();
    assert!(
        recipes.len() >= 20,
        "golden recipes went missing: {}",
        recipes.len()
    );
    let mut failures = Vec::new();
    for recipe in &recipes {
        let source = RecipeSource::read(recipe).unwrap();
        let checked = check(&source);
        assert!(
            !checked.problems.is_empty(),
            "{}: no diagnostics at all",
            recipe.display()
        );
        let rendered = render(
            &checked.problems,
            &source.name(),
            &source.text,
            Screen::PLAIN,
        );
        let expected_path = recipe.with_extension("txt");
        if update {
            std::fs::write(&expected_path, &rendered).unwrap();
            continue;
        }
        let expected = std::fs::read_to_string(&expected_path).unwrap_or_default();
        if rendered != expected {
            failures.push(format!("--- {}\n{rendered}", expected_path.display()));
        }
    }
    assert!(
        failures.is_empty(),
        "diagnostics differ from their golden files:\n{}",
        failures.join("\n")
    );
}

/// The rendering of every golden recipe in a terminal of `width` columns.
fn rendered_at(width: usize) -> Vec<(String, String)> {
    let mut out = Vec::new();
    for entry in std::fs::read_dir("tests/golden").unwrap() {
        let recipe = entry.unwrap().path();
        if recipe.extension().is_none_or(|e| e != "assort") {
            continue;
        }
        let source = RecipeSource::read(&recipe).unwrap();
        let checked = check(&source);
        let screen = Screen {
            colour: false,
            width: Some(width),
        };
        let text = render(&checked.problems, &source.name(), &source.text, screen);
        out.push((recipe.display().to_string(), text));
    }
    out
}

/// Lines of a report fit a 60-column terminal, except the frame's header,
/// which names the recipe file by the path it was given. At 40 columns the
/// recipe's lines and their underlines fit; the labels of two words on one
/// line may not, and then wrap below the underline.
#[test]
fn in_a_narrow_terminal_no_line_wraps() {
    for width in [40, 60] {
        let rows = |l: &&str| {
            let recipe_row = l.contains(" │ ") && !l.contains('·');
            let underline = l.contains('·') && !l.contains('╰');
            width == 60 || recipe_row || underline
        };
        for (recipe, text) in rendered_at(width) {
            for line in text.lines().filter(|l| !l.contains("╭─[")).filter(rows) {
                let n = line.chars().count();
                assert!(n <= width, "{recipe} at {width}: {line:?}\n{text}");
            }
        }
    }
}

/// In a 40- or 60-column terminal each underline lies under recipe text
/// as written (not under a `…` of a cut line), and the frame's header
/// names the line and column of the recipe as written.
#[test]
fn in_a_narrow_terminal_each_underline_lies_under_its_word() {
    let plain: std::collections::HashMap<String, String> = rendered_at(100).into_iter().collect();
    let mut underlines = 0;
    for width in [40, 60] {
        for (recipe, text) in rendered_at(width) {
            let original = std::fs::read_to_string(&recipe).unwrap();
            let lines: Vec<&str> = original.lines().collect();
            let rows: Vec<Vec<char>> = text.lines().map(|l| l.chars().collect()).collect();
            for pair in rows.windows(2) {
                let Some(number) = source_row(&pair[0]) else {
                    continue;
                };
                let under = &pair[1];
                if !under.iter().any(|&c| c == '─' || c == '┬') || !under.contains(&'·') {
                    continue;
                }
                let line = lines[number - 1];
                for (a, b) in runs(under) {
                    let word: String = pair[0][a..b.min(pair[0].len())].iter().collect();
                    assert!(
                        b <= pair[0].len() && !word.contains('…') && line.contains(&word),
                        "{recipe} at {width}: underline {a}..{b} under {word:?}, not text of line {number}\n{text}"
                    );
                    underlines += 1;
                }
            }
            assert_eq!(
                headers(&text),
                headers(&plain[&recipe]),
                "{recipe} at {width}\n{text}"
            );
        }
    }
    assert!(underlines > 100, "only {underlines} underlines checked");
}

/// The line number of a frame's source row, ` 12 │ text`.
fn source_row(row: &[char]) -> Option<usize> {
    let s: String = row.iter().collect();
    let (number, _) = s.trim_start().split_once(" │ ")?;
    number.parse().ok()
}

/// The column ranges of the underline marks in an underline row.
fn runs(row: &[char]) -> Vec<(usize, usize)> {
    let mark = |c: char| matches!(c, '─' | '┬' | '▲');
    let bar = row.iter().position(|&c| c == '·').unwrap_or(0);
    let mut out = Vec::new();
    let mut i = bar + 1;
    while i < row.len() {
        if mark(row[i]) {
            let start = i;
            while i < row.len() && mark(row[i]) {
                i += 1;
            }
            out.push((start, i));
        } else {
            i += 1;
        }
    }
    out
}

/// The `line:column` of each frame header `╭─[name:line:column]`.
fn headers(text: &str) -> Vec<(usize, usize)> {
    text.lines()
        .filter_map(|l| {
            let inside = l.split_once("╭─[")?.1.strip_suffix(']')?;
            let mut parts = inside.rsplitn(3, ':');
            let column = parts.next()?.parse().ok()?;
            let line = parts.next()?.parse().ok()?;
            Some((line, column))
        })
        .collect()
}
