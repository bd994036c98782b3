//! Golden tests for diagnostics: every `tests/golden/*.assort` recipe is
//! checked and its rendered diagnostics (no colour) compared with the
//! `.txt` file of the same name. One recipe per class of problem.
//!
//! To rewrite the expected files after an intended change of wording:
//!
//!     UPDATE_GOLDEN=1 cargo test --release --test golden
//!
//! then review the diff like code.

use assort::check::{check, diagnostic::render, RecipeSource};
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
        let rendered = render(&checked.problems, &source.name(), &source.text, false);
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
