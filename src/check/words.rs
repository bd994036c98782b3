//! The words people see: `tally` (columns profiled per segment without
//! clustering on them: value, revenue, a consent flag) and `call` (the
//! name and number format a column is shown with).

use super::*;
use crate::plan::{Display, NumberFormat};

impl Checker {
    /// The recipe's name (its file's stem unless given), and the report's
    /// title and period.
    pub(super) fn recipe_names(
        &mut self,
        stmt: Option<&Statement>,
    ) -> (String, Option<String>, Option<String>, Option<String>) {
        let Some(Statement {
            kind: StatementKind::Recipe { name, options },
            ..
        }) = stmt
        else {
            return (self.recipe_stem.clone(), None, None, None);
        };
        let opts = self.options("recipe", options, vocab::RECIPE_OPTIONS);
        let mut text = |o: &str| match opts.get(o).map(|p| &p.value) {
            Some(Spanned {
                node: Value::Text(t),
                ..
            }) => Some(t.clone()),
            Some(v) => {
                self.bad_value(
                    o,
                    &v.node,
                    "a quoted text",
                    v.span,
                    r#"write it in quotes: `period "July to September 2026"`"#,
                );
                None
            }
            None => None,
        };
        let title = text("title");
        let period = text("period");
        let noun = text("records");
        (name.node.clone(), title, period, noun)
    }

    /// The `tally` columns: in the header, numeric in the sample, not
    /// the key, not clustered already, each named once.
    pub(super) fn tallied(
        &mut self,
        stmts: &[Statement],
        key: Option<&str>,
        clustered: &[(String, Span)],
    ) -> Option<Vec<String>> {
        let mut out: Vec<(String, Span)> = Vec::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Tally { columns } = &s.kind else {
                continue;
            };
            for col in columns {
                let again = out.iter().find(|(n, _)| *n == col.node).map(|(_, s)| *s);
                let is_clustered = clustered.iter().any(|(n, _)| *n == col.node)
                    || self.category_spans.contains_key(&col.node);
                if let Some(first) = again {
                    self.err(CheckError::DuplicateColumn {
                        column: col.node.clone(),
                        span: col.span,
                        first,
                        help: "each column is tallied once: name it in one `tally` statement",
                    });
                    ok = false;
                } else if is_clustered {
                    self.not_tallied(col, "it is clustered on already", "its profile is in the segment profiles already; `tally` is for columns the segments were not made from");
                    ok = false;
                } else if key == Some(col.node.as_str()) {
                    self.not_tallied(
                        col,
                        "it is the key",
                        "the key names each record; tally the columns that hold values",
                    );
                    ok = false;
                } else if self.probe.is_some() {
                    match self.known_column(col) {
                        None => ok = false,
                        Some(info) if info.kind == ColumnKind::Text => {
                            let why = format!(
                                "it holds text (such as `{}`)",
                                clipped(&info.text_example.unwrap_or_default(), 40)
                            );
                            self.not_tallied(col, &why, "`tally` sums and averages numbers; write a flag as 0 and 1, or cluster on the text with `categories`");
                            ok = false;
                        }
                        Some(_) => out.push((col.node.clone(), col.span)),
                    }
                } else {
                    out.push((col.node.clone(), col.span));
                }
            }
        }
        ok.then(|| out.into_iter().map(|(c, _)| c).collect())
    }

    /// The `represents` column: in the header, numeric in the sample with
    /// every sampled value above 0, neither the key nor a clustered column.
    pub(super) fn record_weights(
        &mut self,
        stmt: Option<&Statement>,
        key: Option<&str>,
        clustered: &[(String, Span)],
    ) -> Option<Option<String>> {
        let Some(Statement {
            kind: StatementKind::Represents { column: col },
            ..
        }) = stmt
        else {
            return Some(None);
        };
        let is_clustered = clustered.iter().any(|(n, _)| *n == col.node)
            || self.category_spans.contains_key(&col.node)
            || self.kinds.contains_key(&col.node);
        let refusal = if is_clustered {
            Some((
                "it is clustered on".to_string(),
                "a column either shapes the segments or says how much each record counts, not both; `tally` it to see its total per segment".to_string(),
            ))
        } else if key == Some(col.node.as_str()) {
            Some((
                "it is the key".to_string(),
                "name the column that says how many members each record stands for".to_string(),
            ))
        } else if self.probe.is_some() {
            let info = self.known_column(col)?;
            weight_sample_refusal(&info)
        } else {
            None
        };
        match refusal {
            Some((why, help)) => {
                self.err(CheckError::NotAWeight {
                    column: col.node.clone(),
                    why,
                    span: col.span,
                    help,
                });
                None
            }
            None => Some(Some(col.node.clone())),
        }
    }

    fn not_tallied(&mut self, col: &Column, why: &str, help: &str) {
        self.err(CheckError::NotTallied {
            column: col.node.clone(),
            why: why.to_string(),
            span: col.span,
            help: help.to_string(),
        });
    }

    /// The `call` statements: one per column of the header, a known format,
    /// a quoted unit.
    pub(super) fn display(&mut self, stmts: &[Statement]) -> Option<BTreeMap<String, Display>> {
        let mut out = BTreeMap::new();
        let mut spans: HashMap<String, Span> = HashMap::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Call {
                column,
                name,
                options,
            } = &s.kind
            else {
                continue;
            };
            let opts = self.options("call", options, vocab::CALL_OPTIONS);
            let format = match opts.get("as").map(|o| &o.value) {
                None => Some(NumberFormat::Number),
                Some(Spanned {
                    node: Value::Word(w),
                    span,
                }) => self.word_choice(
                    "number format",
                    &Spanned::new(w.clone(), *span),
                    &NumberFormat::NAMES,
                    NumberFormat::parse,
                ),
                Some(v) => {
                    self.bad_value(
                        "as",
                        &v.node,
                        "a word",
                        v.span,
                        "write `as percent`, `as money`, `as count` or `as number`",
                    );
                    None
                }
            };
            let unit = self.call_unit(opts.get("unit").map(|o| &o.value));
            if let Some(first) = spans.get(&column.node) {
                self.err(CheckError::Conflict {
                    what: format!("a name for `{}`", column.node),
                    span: column.span,
                    first: *first,
                });
                ok = false;
                continue;
            }
            spans.insert(column.node.clone(), column.span);
            let known = self.probe.is_none() || self.known_column(column).is_some();
            match (format, unit, known, name.node.trim().is_empty()) {
                (_, _, _, true) => {
                    self.err(CheckError::EmptyName { span: name.span });
                    ok = false;
                }
                (Some(format), Some(unit), true, false) => {
                    out.insert(
                        column.node.clone(),
                        Display {
                            name: name.node.clone(),
                            format,
                            unit,
                        },
                    );
                }
                _ => ok = false,
            }
        }
        ok.then_some(out)
    }

    /// A `call` statement's unit: none, or a quoted text.
    fn call_unit(&mut self, value: Option<&Spanned<Value>>) -> Option<Option<String>> {
        match value {
            None => Some(None),
            Some(Spanned {
                node: Value::Text(t),
                ..
            }) => Some(Some(t.clone())),
            Some(v) => {
                self.bad_value(
                    "unit",
                    &v.node,
                    "a quoted text",
                    v.span,
                    r#"write it in quotes: `unit "visits"`"#,
                );
                None
            }
        }
    }
}

/// Why the sampled values of a `represents` column cannot be weights, if
/// they cannot: text, blanks, or a value of 0 or below (with its line when
/// the sample kept it).
fn weight_sample_refusal(info: &probe::ColumnInfo) -> Option<(String, String)> {
    const HELP: &str = "every record needs a weight above 0 (how many members it stands for); mend or leave out the records without one when making the extract";
    if info.kind == ColumnKind::Text {
        let line = info
            .text_line
            .map(|l| format!(" on line {l}"))
            .unwrap_or_default();
        let why = format!(
            "it holds text (such as `{}`{line})",
            clipped(info.text_example.as_deref().unwrap_or_default(), 40)
        );
        return Some((why, HELP.to_string()));
    }
    if info.blanks > 0 {
        let line = info
            .blank_line
            .map(|l| format!(" on line {l}"))
            .unwrap_or_default();
        return Some((format!("it is blank{line}"), HELP.to_string()));
    }
    if info.numbers > 0 && info.min <= 0.0 {
        let why = match (info.values.iter()).find(|(v, _)| v.parse::<f64>().is_ok_and(|x| x <= 0.0))
        {
            Some((v, line)) => format!("it holds `{v}` on line {line}"),
            None => format!("it holds {}", crate::text::short(info.min)),
        };
        return Some((why, HELP.to_string()));
    }
    None
}
