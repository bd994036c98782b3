//! The `save` statements: what is written where.

use super::*;

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
            let Some(resolved) = self.safe_path(path) else {
                ok = false;
                continue;
            };
            let ext = Path::new(&path.node)
                .extension()
                .and_then(|e| e.to_str())
                .unwrap_or("")
                .to_ascii_lowercase();
            let kind = match (what.node.as_str(), ext.as_str()) {
                ("assignments", "csv") => Some(OutputKind::Assignments),
                ("centroids", "csv") => Some(OutputKind::Centroids),
                ("profiles", "csv") => Some(OutputKind::ProfilesCsv),
                ("profiles", "json") => Some(OutputKind::ProfilesJson),
                ("model", "json") => Some(OutputKind::Model),
                ("report", "html") => Some(OutputKind::Report),
                ("report", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save report`".into(),
                        expected: "`.html`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("model", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save model`".into(),
                        expected: "`.json`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("merges" | "tree", _) if !is_tree => {
                    self.err(CheckError::NeedsTree {
                        what: what.node.clone(),
                        span: what.span,
                    });
                    None
                }
                ("merges", "csv") => Some(OutputKind::Merges),
                ("tree", "nwk" | "newick") => Some(OutputKind::Newick),
                ("tree", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save tree`".into(),
                        expected: "`.nwk` or `.newick`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("assignments" | "centroids" | "merges", _) => {
                    self.err(CheckError::OutputFormat {
                        what: format!("`save {}`", what.node),
                        expected: "`.csv`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("profiles", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save profiles`".into(),
                        expected: "`.csv` or `.json`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                (other, _) => {
                    let suggestion = suggest::nearest(other, vocab::SAVE_WHAT);
                    self.err(CheckError::UnknownWord {
                        what: "output",
                        found: other.to_string(),
                        span: what.span,
                        choices:
                            "`assignments`, `profiles`, `centroids`, `model`, `report`, `merges` or `tree`"
                                .into(),
                        help: did_you_mean(
                            &suggestion,
                            "save assignments, profiles, centroids, or a tree's merges and tree",
                        ),
                    });
                    None
                }
            };
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

    // ---------------------------------------------------------- helpers --
}
