//! What statements set and read, for the front ends: which earlier
//! statement a new one replaces in the session, and which data files a
//! recipe reads (so the language server can notice them change). The front
//! ends reach the syntax tree only through here and the rest of `check`.

use super::single_statement;
use std::path::{Path, PathBuf};

/// What a statement sets, for replacing it by entering another: the
/// statement word (with the segment number for `label` and `brief`, `for` for a
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
        K::Brief { segment, .. } => (format!("brief {}", segment.node.value), Vec::new()),
        K::Weight { columns, .. } => (word, names(columns)),
        K::Call { column, .. } => (word, vec![column.node.clone()]),
        // Entering a column's levels again reorders them.
        K::Ordered { column, .. } => (word, vec![column.node.clone()]),
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

/// The statements of a recipe's text, one string each (continued lists
/// kept whole), each with the comment lines and the blank line before it;
/// comments after the last statement make a last entry of their own.
pub fn statements_of(text: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut prefix: Vec<String> = Vec::new();
    for (_, line) in crate::syntax::logical_lines(text).unwrap_or_default() {
        let t = line.trim();
        if t.is_empty() {
            if !prefix.last().is_some_and(String::is_empty) {
                prefix.push(String::new());
            }
            continue;
        }
        if t.starts_with('#') {
            prefix.push(t.to_string());
            continue;
        }
        prefix.push(t.to_string());
        let entry = prefix.join("\n");
        // The author's blank line before a statement stays with it; only
        // blank lines at the very top of the recipe go.
        out.push(if out.is_empty() {
            entry.trim_start_matches('\n').to_string()
        } else {
            entry
        });
        prefix.clear();
    }
    let rest = prefix.join("\n");
    if !rest.trim().is_empty() {
        out.push(if out.is_empty() {
            rest.trim_start_matches('\n').to_string()
        } else {
            rest
        });
    }
    out
}
