//! The `save` statements: what is written where.

use super::*;

/// What each `save` word writes, by file ending, and the endings in words.
type Endings = &'static [(&'static str, OutputKind)];
const FORMATS: [(&str, Endings, &str); 10] = [
    ("assignments", &[("csv", OutputKind::Assignments)], "`.csv`"),
    ("centroids", &[("csv", OutputKind::Centroids)], "`.csv`"),
    (
        "profiles",
        &[
            ("csv", OutputKind::ProfilesCsv),
            ("json", OutputKind::ProfilesJson),
        ],
        "`.csv` or `.json`",
    ),
    ("model", &[("json", OutputKind::Model)], "`.json`"),
    ("scoring", &[("sql", OutputKind::Scoring)], "`.sql`"),
    ("rules", &[("sql", OutputKind::Rules)], "`.sql`"),
    ("handoff", &[("csv", OutputKind::Handoff)], "`.csv`"),
    ("report", &[("html", OutputKind::Report)], "`.html`"),
    ("merges", &[("csv", OutputKind::Merges)], "`.csv`"),
    (
        "tree",
        &[("nwk", OutputKind::Newick), ("newick", OutputKind::Newick)],
        "`.nwk` or `.newick`",
    ),
];

impl Checker {
    pub(super) fn outputs(
        &mut self,
        stmts: &[Statement],
        is_tree: bool,
    ) -> Option<Vec<OutputPlan>> {
        let mut out: Vec<OutputPlan> = Vec::new();
        let mut spans: Vec<Span> = Vec::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Save { what, path } = &s.kind else {
                continue;
            };
            if what.node == TABLE {
                continue;
            }
            let Some(resolved) = self.safe_path(path) else {
                ok = false;
                continue;
            };
            let kind = self.output_kind(what, path, is_tree);
            let Some(kind) = kind else {
                ok = false;
                continue;
            };
            let real = paths::Sandbox::real_path(&resolved);
            if let Some(&(_, input)) = self.reads.iter().find(|(r, _)| *r == real) {
                self.err(CheckError::OutputIsInput {
                    path: path.node.clone(),
                    span: path.span,
                    input,
                });
                ok = false;
                continue;
            }
            if let Some(j) = out.iter().position(|o| same_file(&o.resolved, &resolved)) {
                self.err(CheckError::OutputTwice {
                    path: path.node.clone(),
                    span: path.span,
                    first: spans[j],
                });
                ok = false;
                continue;
            }
            spans.push(path.span);
            out.push(OutputPlan {
                kind,
                path: path.node.clone(),
                resolved,
            });
        }
        ok.then_some(out)
    }

    /// What a `save` statement writes, from its word and its file's
    /// ending; merges and the tree only from the `tree` method.
    fn output_kind(
        &mut self,
        what: &Spanned<String>,
        path: &Spanned<String>,
        is_tree: bool,
    ) -> Option<OutputKind> {
        let ext = Path::new(&path.node)
            .extension()
            .and_then(|e| e.to_str())
            .unwrap_or("")
            .to_ascii_lowercase();
        let Some((_, endings, expected)) = FORMATS.iter().find(|(w, _, _)| *w == what.node) else {
            let suggestion = suggest::nearest(&what.node, vocab::SAVE_WHAT);
            self.err(CheckError::UnknownWord {
                what: "output",
                found: what.node.clone(),
                span: what.span,
                choices:
                    "`assignments`, `profiles`, `centroids`, `model`, `report`, `merges` or `tree`"
                        .into(),
                help: did_you_mean(
                    &suggestion,
                    "save assignments, profiles, centroids, or a tree's merges and tree",
                ),
            });
            return None;
        };
        if matches!(what.node.as_str(), "merges" | "tree") && !is_tree {
            self.err(CheckError::NeedsTree {
                what: what.node.clone(),
                span: what.span,
            });
            return None;
        }
        match endings.iter().find(|(e, _)| *e == ext) {
            Some((_, kind)) => Some(*kind),
            None => {
                self.err(CheckError::OutputFormat {
                    what: format!("`save {}`", what.node),
                    expected,
                    path: path.node.clone(),
                    span: path.span,
                });
                None
            }
        }
    }

    /// `save table "NAME"`: a table on the input's connection, named as
    /// SQL names a table, not the input itself, allowed by the person
    /// running the recipe (`--allow-table NAME`). At most one.
    pub(super) fn table_output(
        &mut self,
        stmts: &[Statement],
        input: Option<&InputPlan>,
    ) -> Option<Option<TablePlan>> {
        let mut found: Option<(TablePlan, Span)> = None;
        let mut ok = true;
        for s in stmts {
            let StatementKind::Save { what, path: name } = &s.kind else {
                continue;
            };
            if what.node != TABLE {
                continue;
            }
            if let Some((_, first)) = &found {
                self.err(CheckError::OutputTwice {
                    path: "a table".into(),
                    span: name.span,
                    first: *first,
                });
                ok = false;
                continue;
            }
            let Some(input) = input else {
                ok = false;
                continue;
            };
            let Some(connection) = input.database.clone() else {
                self.err(CheckError::TableNeedsDatabase { span: what.span });
                ok = false;
                continue;
            };
            let problem = if !crate::scale::source::is_table_name(&name.node) {
                Some(CheckError::TableName {
                    name: name.node.clone(),
                    span: name.span,
                })
            } else if name.node == input.path {
                let read = stmts.iter().find_map(|s| match &s.kind {
                    StatementKind::Input { path, .. } => Some(path.span),
                    _ => None,
                });
                Some(CheckError::TableIsInput {
                    name: name.node.clone(),
                    span: name.span,
                    input: read.unwrap_or(name.span),
                })
            } else if !self.allow_tables.contains(&name.node) {
                Some(CheckError::TableNotAllowed {
                    name: name.node.clone(),
                    connection: connection.clone(),
                    span: name.span,
                })
            } else {
                None
            };
            if let Some(problem) = problem {
                self.err(problem);
                ok = false;
                continue;
            }
            let table = TablePlan {
                connection,
                name: name.node.clone(),
            };
            found = Some((table, name.span));
        }
        ok.then(|| found.map(|(t, _)| t))
    }
}

/// The `save` word that writes into a table instead of a file.
const TABLE: &str = "table";
