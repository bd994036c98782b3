//! Columns with a kind of their own: `ordered` (a category whose levels
//! have an order, clustered by rank) and `flags` (two values, clustered as
//! 1 and 0). Both become numeric features whose values the loader codes
//! (see [`crate::plan::FeatureKind`]).

use super::*;

impl Checker {
    /// The columns `ordered` and `flags` name, in recipe order, with
    /// their kinds kept in `self.kinds`; `None` when one is wrong.
    pub(super) fn kinds(
        &mut self,
        stmts: &[Statement],
        input: Option<&CheckedInput>,
    ) -> Option<Vec<(String, Span)>> {
        let key = input.map(|i| i.plan.key.clone());
        let mut out = Vec::new();
        let mut ok = true;
        for s in stmts {
            let (columns, kind) = match &s.kind {
                StatementKind::Ordered { column, levels } => {
                    (std::slice::from_ref(column), self.levels(column, levels))
                }
                StatementKind::Flags { columns } => (columns.as_slice(), Some(FeatureKind::Flag)),
                _ => continue,
            };
            let Some(kind) = kind else {
                ok = false;
                continue;
            };
            for col in columns {
                if self.kinded_column(col, &kind, key.as_deref()) {
                    self.kinds
                        .insert(col.node.clone(), (col.span, kind.clone()));
                    out.push((col.node.clone(), col.span));
                } else {
                    ok = false;
                }
            }
        }
        ok.then_some(out)
    }

    /// An ordered category's levels: two or more, none blank, none twice.
    fn levels(&mut self, column: &Column, levels: &[Spanned<String>]) -> Option<FeatureKind> {
        if levels.len() < 2 {
            self.err(CheckError::OneLevel {
                column: column.node.clone(),
                span: levels.first().map_or(column.span, |l| l.span),
            });
            return None;
        }
        let mut ok = true;
        for (i, l) in levels.iter().enumerate() {
            if l.node.trim().is_empty() {
                self.err(CheckError::BlankLevel {
                    column: column.node.clone(),
                    span: l.span,
                });
                ok = false;
            } else if let Some(first) = levels[..i].iter().find(|x| x.node == l.node) {
                self.err(CheckError::LevelTwice {
                    level: l.node.clone(),
                    span: l.span,
                    first: first.span,
                });
                ok = false;
            }
        }
        ok.then(|| FeatureKind::Ordered(levels.iter().map(|l| l.node.clone()).collect()))
    }

    /// A column given a kind: named once among the clustered columns, not
    /// the key, in the header, and every value sampled one of the kind's.
    fn kinded_column(&mut self, col: &Column, kind: &FeatureKind, key: Option<&str>) -> bool {
        let first = self
            .category_spans
            .get(&col.node)
            .or_else(|| self.kinds.get(&col.node).map(|(s, _)| s))
            .copied();
        if !self.clustered_once(col, first, key) {
            return false;
        }
        if self.probe.is_none() {
            return true;
        }
        let Some(info) = self.known_column(col) else {
            return false;
        };
        let Some((found, line)) = info.values.iter().find(|(v, _)| kind.code(v).is_none()) else {
            return true;
        };
        let at = self
            .probe
            .as_ref()
            .and_then(|p| p.columns.iter().position(|c| c.name == info.name))
            .unwrap_or(0);
        let (expected, help) = level_words(kind, &col.node, found);
        self.err(CheckError::ValueNotOfKind {
            file: self.input_file.clone(),
            line: *line,
            column: at + 1,
            name: col.node.clone(),
            found: clipped(found, 60),
            expected,
            span: col.span,
            help,
        });
        false
    }
}

/// What a value of an ordered category or a flag should have been, and
/// the help for one that is not: the levels, and the nearest level when
/// one is spelt alike. Shared by the check (on the sample) and the run
/// (on every record).
pub(crate) fn level_words(kind: &FeatureKind, column: &str, found: &str) -> (String, String) {
    match kind {
        FeatureKind::Ordered(levels) => {
            // Not phrased as "did you mean": the fault is in the data, and
            // the editor's quick fixes turn that phrase into a recipe edit.
            let named = match suggest::nearest(found.trim(), levels.iter().map(String::as_str)) {
                Some(n) => format!("the nearest level is `{n}`; "),
                None => String::new(),
            };
            (
                format!("one of the levels of `{column}`"),
                format!(
                    "{named}the recipe orders `{column}` as {}; levels are matched as written, letter case included: add a missing level in its place in the order, or correct the data",
                    levels
                        .iter()
                        .map(|l| format!("`{l}`"))
                        .collect::<Vec<_>>()
                        .join(" < ")
                ),
            )
        }
        _ => (
            format!("a value of the flag `{column}`"),
            format!(
                "a flag is set by {} and unset by {} (any letter case); a column of other values is an `ordered` or a `categories` column",
                FLAG_SET.join(", "),
                FLAG_UNSET.join(", ")
            ),
        ),
    }
}
