//! The `previous` statement: last run's segment model (and, optionally,
//! its assignments), whose segment numbers and labels this run keeps.
//!
//! Both files may be this recipe's own outputs from its last run: they
//! are read before anything is written, and replaced as a set.
//!
//! The checker reads only what it must judge from the model: its format,
//! its columns and its segments' numbers. The model's full meaning (its
//! preparation and centres) belongs to the run.

use super::diagnostic::CheckError;
use super::{probe, Checker};
use crate::plan::{ComparePlan, PreviousPlan};
use crate::syntax::ast::{Spanned, Statement, StatementKind, Value};
use serde::Deserialize;

/// The model formats `previous` reads: those `assort assign` reads.
use crate::plan::MODEL_FORMATS_READ as FORMATS;

/// What the checker reads of a model file.
#[derive(Deserialize)]
struct ModelView {
    format: String,
    #[serde(default)]
    provenance: ProvenanceView,
    features: Vec<Named>,
    categories: Vec<Named>,
    segments: Vec<Numbered>,
}

/// What the checker reads of a model's provenance: the recipe that made
/// it and the statements that shaped its segments (none in older models).
#[derive(Deserialize, Default)]
struct ProvenanceView {
    #[serde(default)]
    recipe: String,
    #[serde(default)]
    settings: Vec<String>,
}

#[derive(Deserialize)]
struct Named {
    column: String,
}

#[derive(Deserialize)]
struct Numbered {
    segment: usize,
}

/// What the rest of the checker needs to know of a previous model.
pub(super) struct Previous {
    pub plan: PreviousPlan,
    /// The highest segment number the model holds.
    pub highest: usize,
}

impl Checker {
    /// Checks `previous "model" [assignments "file"]` against the recipe's
    /// numeric features and categories.
    pub(super) fn previous(
        &mut self,
        stmt: Option<&Statement>,
        features: Option<&[String]>,
        categories: Option<&[String]>,
        key: Option<&str>,
    ) -> Option<Option<Previous>> {
        let Some(Statement {
            kind: StatementKind::Previous { path, options },
            ..
        }) = stmt
        else {
            return Some(None);
        };
        let opts = self.options("previous", options, super::vocab::PREVIOUS_OPTIONS);
        let assignments = match opts.get("assignments") {
            None => Some(None),
            Some(o) => match &o.value.node {
                Value::Text(t) => {
                    let file = Spanned::new(t.clone(), o.value.span);
                    self.previous_assignments(&file, key).map(Some)
                }
                other => {
                    self.bad_value(
                        "assignments",
                        other,
                        "a quoted path",
                        o.value.span,
                        r#"for example `assignments "out/last_quarter.csv"`"#,
                    );
                    None
                }
            },
        };
        // Not registered as a read: last run's outputs are meant to be read
        // here and replaced by this run's (see `safe_path`).
        let resolved = self.safe_path(path)?;
        let model = self.previous_model(path, &resolved)?;
        let ok = self.same_columns(path, &model, features, categories);
        if ok {
            self.same_settings(path, &model.provenance);
        }
        let highest = model.segments.iter().map(|s| s.segment).max().unwrap_or(0);
        let assignments = assignments?;
        ok.then(|| {
            Some(Previous {
                plan: PreviousPlan {
                    path: path.node.clone(),
                    resolved,
                    assignments,
                },
                highest,
            })
        })
    }

    /// Last run's model file, read and parsed, in a format this assort
    /// reads.
    fn previous_model(
        &mut self,
        path: &Spanned<String>,
        resolved: &std::path::Path,
    ) -> Option<ModelView> {
        let unfit = |reason: String, help: &str| CheckError::PreviousMismatch {
            reason,
            span: path.span,
            help: help.to_string(),
        };
        let bytes = match std::fs::read(resolved) {
            Ok(b) => b,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                self.file_problem(path, &probe::ProbeError::NotFound);
                return None;
            }
            Err(e) => {
                self.file_problem(path, &probe::ProbeError::Unreadable(e.to_string()));
                return None;
            }
        };
        let model: ModelView = match serde_json::from_slice(&bytes) {
            Ok(m) => m,
            Err(e) => {
                self.err(unfit(
                    format!("it is not a segment model ({e})"),
                    "name a file written by `save model`",
                ));
                return None;
            }
        };
        if !FORMATS.contains(&model.format.as_str()) {
            self.err(unfit(
                format!("its format is `{}`", model.format),
                &format!(
                    "this assort reads {}",
                    crate::text::and_list(&FORMATS.map(String::from))
                ),
            ));
            return None;
        }
        Some(model)
    }

    /// Warns when last run's model was made with other settings than this
    /// recipe's (another scaling, transform, method, k range, seed...),
    /// listing the statements on each side: its segment names would be
    /// carried to segments made differently.
    fn same_settings(&mut self, path: &Spanned<String>, made: &ProvenanceView) {
        if made.settings.is_empty() {
            return;
        }
        let missing_from = |a: &[String], b: &[String]| -> Vec<String> {
            a.iter()
                .filter(|s| !b.contains(s))
                .map(|s| format!("`{s}`"))
                .collect()
        };
        let then = missing_from(&made.settings, &self.settings);
        let now = missing_from(&self.settings, &made.settings);
        if then.is_empty() && now.is_empty() {
            return;
        }
        let list = |v: Vec<String>| {
            if v.is_empty() {
                "nothing else".to_string()
            } else {
                v.join(", ")
            }
        };
        self.err(CheckError::PreviousOtherSettings {
            recipe: made.recipe.clone(),
            then: list(then),
            now: list(now),
            span: path.span,
        });
    }

    /// Whether the model clustered on this recipe's columns, reporting
    /// each side's extra columns when not.
    fn same_columns(
        &mut self,
        path: &Spanned<String>,
        model: &ModelView,
        features: Option<&[String]>,
        categories: Option<&[String]>,
    ) -> bool {
        let unfit = |reason: String, help: &str| CheckError::PreviousMismatch {
            reason,
            span: path.span,
            help: help.to_string(),
        };
        let mut ok = true;
        for (what, theirs, ours) in [
            ("numeric features", &model.features, features),
            ("categories", &model.categories, categories),
        ] {
            let Some(ours) = ours else { continue };
            let theirs: Vec<&str> = theirs.iter().map(|n| n.column.as_str()).collect();
            let missing: Vec<&str> = theirs
                .iter()
                .filter(|c| !ours.iter().any(|o| o == *c))
                .copied()
                .collect();
            let added: Vec<&str> = ours
                .iter()
                .map(String::as_str)
                .filter(|o| !theirs.contains(o))
                .collect();
            if !missing.is_empty() || !added.is_empty() {
                let mut parts = Vec::new();
                if !missing.is_empty() {
                    parts.push(format!("it clustered on {} too", listed(&missing)));
                }
                if !added.is_empty() {
                    parts.push(format!("it never saw {}", listed(&added)));
                }
                self.err(unfit(
                    format!("its {what} differ from this recipe's: {}", parts.join("; ")),
                    "segments carry their numbers from a model of the same columns; to change the columns, start afresh without `previous` and compare with last quarter's assignments instead",
                ));
                ok = false;
            }
        }
        ok
    }

    /// The previous assignments file: readable, with the key and a
    /// `segment` column.
    fn previous_assignments(
        &mut self,
        file: &Spanned<String>,
        key: Option<&str>,
    ) -> Option<ComparePlan> {
        let resolved = self.safe_path(file)?;
        match probe::probe(&resolved, b',', crate::check::probe::DecimalMark::Point) {
            Ok(p) => {
                let lacks: Vec<String> = ["segment"]
                    .into_iter()
                    .chain(key)
                    .filter(|c| p.column(c).is_none())
                    .map(|c| format!("`{c}`"))
                    .collect();
                if lacks.is_empty() {
                    return Some(ComparePlan {
                        path: file.node.clone(),
                        resolved,
                    });
                }
                self.err(CheckError::FileUnreadable {
                    path: file.node.clone(),
                    reason: format!("it has no {} column", lacks.join(" or ")),
                    span: file.span,
                    help: "name the assignments file the previous run wrote (`save assignments`)"
                        .into(),
                });
                None
            }
            Err(e) => {
                self.file_problem(file, &e);
                None
            }
        }
    }
}

fn listed(columns: &[&str]) -> String {
    columns
        .iter()
        .map(|c| format!("`{c}`"))
        .collect::<Vec<_>>()
        .join(", ")
}
