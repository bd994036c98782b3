//! Quick fixes: the edit each suggestion in a diagnostic stands for, so an
//! editor can apply it. A misspelt statement word, option, value, column,
//! output kind or file gets its "did you mean" as a replacement; a column
//! with gaps and no rule gets the two `missing` rules its help names; a
//! tree over too many records gets `micro 500`.

use super::diagnostic::{CheckError, Problem, DID_YOU_MEAN};
use super::Span;
use miette::Diagnostic;

/// One edit: replace `span` of the recipe with `new_text` (an empty span
/// inserts).
#[derive(Debug, Clone, PartialEq)]
pub struct Fix {
    /// What the editor's menu shows.
    pub title: String,
    pub span: Span,
    pub new_text: String,
}

/// The fixes a problem suggests, in the order its help gives them; the
/// first is the one to prefer.
pub fn fixes(problem: &Problem, text: &str) -> Vec<Fix> {
    match problem {
        Problem::Check(CheckError::GapsWithoutRule { column, span, .. }) => {
            let at = after_statement(text, span.start);
            let column = super::complete::written_column(column);
            ["fill median", "drop"]
                .iter()
                .map(|rule| {
                    let line = format!("missing {rule} for {column}");
                    Fix {
                        title: format!("add `{line}`"),
                        span: Span::new(at, at),
                        new_text: if at == text.len() && !text.ends_with('\n') && !text.is_empty() {
                            format!("\n{line}\n")
                        } else {
                            format!("{line}\n")
                        },
                    }
                })
                .collect()
        }
        Problem::Check(CheckError::LargeTree { span, .. }) => {
            let end = statement_end(text, span.start);
            vec![Fix {
                title: "add `micro 500` to `tree` (a tree over k-means micro-segments)".into(),
                span: Span::new(end, end),
                new_text: " micro 500".into(),
            }]
        }
        _ => replacement(problem, text).into_iter().collect(),
    }
}

/// A "did you mean" in the help, as a replacement of the problem's first
/// labelled span.
fn replacement(problem: &Problem, text: &str) -> Option<Fix> {
    let help = problem.help()?.to_string();
    let suggested = suggestion_in(&help)?;
    let label = problem.labels()?.next()?;
    let span = Span::new(label.offset(), label.offset() + label.len());
    let old = text.get(span.start..span.end)?;
    // A quoted original (a path, a quoted column) stays quoted.
    let new_text = if old.starts_with('"') && !suggested.starts_with('"') {
        format!("\"{suggested}\"")
    } else {
        suggested.to_string()
    };
    if new_text == old {
        return None;
    }
    Some(Fix {
        title: format!("replace `{}` with `{suggested}`", old.trim_matches('"')),
        span,
        new_text,
    })
}

/// The word a help line suggests, as [`super::diagnostic::did_you_mean`]
/// writes it.
pub fn suggestion_in(help: &str) -> Option<&str> {
    let (before, after) = DID_YOU_MEAN;
    let start = help.find(before)? + before.len();
    let len = help[start..].find(after)?;
    Some(&help[start..start + len])
}

/// Where the statement holding `offset` ends (before a trailing comment).
fn statement_end(text: &str, offset: usize) -> usize {
    super::outline(text)
        .statements
        .iter()
        .find(|(_, s)| s.start <= offset && offset <= s.end)
        .map_or(offset, |(_, s)| s.end)
}

/// The start of the line after the statement holding `offset`.
fn after_statement(text: &str, offset: usize) -> usize {
    let end = statement_end(text, offset);
    text[end..].find('\n').map_or(text.len(), |i| end + i + 1)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::diagnostic::did_you_mean;

    #[test]
    fn the_suggestion_is_read_back_as_it_was_written() {
        let help = did_you_mean(&Some("calinski-harabasz".into()), "");
        assert_eq!(suggestion_in(&help), Some("calinski-harabasz"));
        assert_eq!(suggestion_in("criteria are a, b"), None);
    }
}
