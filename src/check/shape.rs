//! What statements set and read, for the front ends: which earlier
//! statement a new one replaces in the session, and which data files a
//! recipe reads (so the language server can notice them change). The front
//! ends reach the syntax tree only through here and the rest of `check`.

use super::single_statement;
use std::path::{Path, PathBuf};

/// What a statement sets, for replacing it by entering another: the
/// statement word (with the segment number for `label`, `for` for a
/// per-column `missing`) and the columns it names, if any. `None` for
/// statements a recipe may hold many of (`save`, `categories`...).
#[derive(Debug, PartialEq)]
pub struct Slot {
    what: String,
    columns: Vec<String>,
}

impl Slot {
    /// Whether `new` takes this statement's place: the same kind, and
    /// every column this one names is named again (a statement naming
    /// other columns as well stays, and the check reports the overlap).
    pub fn taken_by(&self, new: &Slot) -> bool {
        self.what == new.what && self.columns.iter().all(|c| new.columns.contains(c))
    }
}

pub fn slot(entry: &str) -> Option<Slot> {
    use crate::syntax::ast::{StatementKind as K, TransformAction};
    let parsed = crate::syntax::parse(entry);
    let [statement] = &parsed.statements[..] else {
        return None;
    };
    let word = statement.keyword.node.clone();
    let names = |cols: &[crate::syntax::ast::Column]| cols.iter().map(|c| c.node.clone()).collect();
    let (what, columns) = match &statement.kind {
        K::Label { segment, .. } => (format!("label {}", segment.node.value), Vec::new()),
        K::Weight { columns, .. } => (word, names(columns)),
        // A column may have one clip and one other transform.
        K::Transform {
            columns,
            action: TransformAction::Clip(_),
        } => ("transform clip".to_string(), names(columns)),
        K::Transform { columns, .. } => (word, names(columns)),
        K::Missing {
            columns: Some(columns),
            ..
        } => ("missing for".to_string(), names(columns)),
        K::Missing { columns: None, .. } => (word, Vec::new()),
        _ if single_statement(&word) => (word, Vec::new()),
        _ => return None,
    };
    Some(Slot { what, columns })
}

/// The data files a recipe reads (input, validation, comparison and the
/// previous run's files), resolved against its folder.
pub fn data_files(text: &str, recipe: &Path) -> Vec<PathBuf> {
    use crate::syntax::ast::{StatementKind as K, Value as V};
    let folder = recipe.parent().unwrap_or(Path::new("."));
    let mut out = Vec::new();
    for s in crate::syntax::parse(text).statements {
        match s.kind {
            K::Input { path, .. } | K::Validate { path, .. } | K::Compare { path } => {
                out.push(folder.join(path.node));
            }
            K::Previous { path, options } => {
                out.push(folder.join(path.node));
                for o in options {
                    if let V::Text(p) = o.value.node {
                        out.push(folder.join(p));
                    }
                }
            }
            _ => {}
        }
    }
    out
}
