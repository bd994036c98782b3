//! Quick fixes: the edits each suggestion in a diagnostic stands for, so
//! an editor can apply them. A misspelt statement word, option, value,
//! column, output kind or file gets its "did you mean" as a replacement; a
//! column with gaps and no rule gets the two `missing` rules its help
//! names; a tree over too many records gets `micro 500`; a file read with
//! the wrong separator or decimal mark gets the `input` option its help
//! names; a text column among the features moves to `categories`; a rule
//! for a column that is not a feature adds it to `features`; a linkage
//! that needs Euclidean distances gets `distance euclidean`; an absolute
//! path inside the recipe's folder gets its relative form.

use super::diagnostic::{CheckError, Problem, DID_YOU_MEAN};
use super::Span;
use miette::Diagnostic;

/// One fix: edits to the recipe, each replacing a span (an empty span
/// inserts), applied together.
#[derive(Debug, Clone, PartialEq)]
pub struct Fix {
    /// What the editor's menu shows.
    pub title: String,
    pub edits: Vec<(Span, String)>,
}

impl Fix {
    fn one(title: String, span: Span, new_text: impl Into<String>) -> Fix {
        Fix {
            title,
            edits: vec![(span, new_text.into())],
        }
    }
}

/// The fixes a problem suggests, in the order its help gives them; the
/// first is the one to prefer.
pub fn fixes(problem: &Problem, text: &str) -> Vec<Fix> {
    let Problem::Check(e) = problem else {
        return replacement(problem, text).into_iter().collect();
    };
    match e {
        CheckError::GapsWithoutRule { column, span, .. } => {
            missing_rules(text, column, *span, &["fill median", "drop"])
        }
        CheckError::CategoryGapsWithoutRule { column, span, .. } => {
            missing_rules(text, column, *span, &["keep", "drop"])
        }
        CheckError::LargeTree { span, .. } => {
            let end = statement_end(text, span.start);
            vec![Fix::one(
                "add `micro 500` to `tree` (a tree over k-means micro-segments)".into(),
                Span::new(end, end),
                " micro 500",
            )]
        }
        CheckError::NeedsEuclidean { span, .. } => vec![Fix::one(
            "use `distance euclidean`".into(),
            *span,
            "euclidean",
        )],
        CheckError::TextFeature { column, span, .. } => move_to_categories(text, column, *span),
        CheckError::AbsolutePath { relative, span, .. } => vec![Fix::one(
            format!("write `{relative}`, relative to the recipe's folder"),
            *span,
            super::complete::quoted(relative),
        )],
        CheckError::NotAFeature { column, help, .. } if help.contains("add `") => {
            add_feature(text, column)
        }
        _ => input_option(problem, text)
            .or_else(|| replacement(problem, text))
            .into_iter()
            .collect(),
    }
}

/// A `missing RULE for COLUMN` line for each rule, the first preferred.
fn missing_rules(text: &str, column: &str, span: Span, rules: &[&str]) -> Vec<Fix> {
    let column = super::complete::written_column(column);
    rules
        .iter()
        .map(|rule| add_line(text, span.start, &format!("missing {rule} for {column}")))
        .collect()
}

/// A "did you mean" in the help, as a replacement of the problem's first
/// labelled span.
fn replacement(problem: &Problem, text: &str) -> Option<Fix> {
    let help = problem.help()?.to_string();
    let suggested = suggestion_in(&help)?;
    let span = first_label(problem)?;
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
    Some(Fix::one(
        format!("replace `{}` with `{suggested}`", old.trim_matches('"')),
        span,
        new_text,
    ))
}

fn first_label(problem: &Problem) -> Option<Span> {
    let label = problem.labels()?.next()?;
    Some(Span::new(label.offset(), label.offset() + label.len()))
}

/// The word a help line suggests, as [`super::diagnostic::did_you_mean`]
/// writes it.
pub fn suggestion_in(help: &str) -> Option<&str> {
    let (before, after) = DID_YOU_MEAN;
    let start = help.find(before)? + before.len();
    let len = help[start..].find(after)?;
    Some(&help[start..start + len])
}

/// A help that names an `input` option to add (`separator ";"`,
/// `decimal ","`): the option, added at the end of the `input` statement.
fn input_option(problem: &Problem, text: &str) -> Option<Fix> {
    let help = problem.help()?.to_string();
    let option = ["separator \"", "decimal \""].iter().find_map(|name| {
        let start = help.find(&format!("`{name}"))? + 1;
        let len = help[start..].find('`')?;
        Some(help[start..start + len].to_string())
    })?;
    let input = super::outline(text)
        .statements
        .into_iter()
        .find(|(word, _)| word == "input")?
        .1;
    Some(Fix::one(
        format!("add `{option}` to `input`"),
        Span::new(input.end, input.end),
        format!(" {option}"),
    ))
}

/// A text column listed among the features, moved to a `categories`
/// statement of its own; the only feature, the `features` statement
/// becomes `features all` and that `categories` statement.
fn move_to_categories(text: &str, column: &str, span: Span) -> Vec<Fix> {
    let line = format!("categories {}", super::complete::written_column(column));
    let title = format!("move `{column}` to `categories`");
    let outline = super::outline(text);
    let Some(statement) = (outline.statements.iter())
        .find(|(word, s)| word == "features" && s.start <= span.start && span.end <= s.end)
        .map(|(_, s)| *s)
    else {
        return Vec::new();
    };
    let items: Vec<Span> = (outline.columns.iter())
        .map(|(_, s)| *s)
        .filter(|s| statement.start <= s.start && s.end <= statement.end)
        .collect();
    // The only feature: a recipe needs one, so the numbers come in with
    // `features all` (the title says so).
    if items.len() == 1 {
        return vec![Fix::one(
            format!("{title}, clustering on every numeric column (`features all`)"),
            statement,
            format!("features all\n{line}"),
        )];
    }
    let mut fix = add_line(text, span.start, &line);
    fix.title = title;
    let mut edits = list_item(text, &items, span);
    edits.append(&mut fix.edits);
    fix.edits = edits;
    vec![fix]
}

/// A column added at the end of the `features` list.
fn add_feature(text: &str, column: &str) -> Vec<Fix> {
    let Some((_, features)) = super::outline(text)
        .statements
        .into_iter()
        .find(|(word, _)| word == "features")
    else {
        return Vec::new();
    };
    vec![Fix::one(
        format!("add `{column}` to `features`"),
        Span::new(features.end, features.end),
        format!(", {}", super::complete::written_column(column)),
    )]
}

/// The deletions that take `item` out of a list of two or more `items`
/// (in order) and leave a well-formed list, however it is laid out: an
/// item before another goes with everything up to the next (its comma, a
/// comment after it, the line break and indent); the last goes with the
/// comma before it, and with its line when it starts one, a comment
/// between them staying on the line above.
fn list_item(text: &str, items: &[Span], item: Span) -> Vec<(Span, String)> {
    let Some(at) = items.iter().position(|s| *s == item) else {
        return vec![(item, String::new())];
    };
    if let Some(next) = items.get(at + 1) {
        return vec![(Span::new(item.start, next.start), String::new())];
    }
    let Some(previous) = at.checked_sub(1).map(|p| items[p]) else {
        return vec![(item, String::new())];
    };
    // The comma after the previous item: the first `,` outside a comment.
    let between = &text[previous.end..item.start];
    let mut comma = None;
    let mut in_comment = false;
    for (i, c) in between.char_indices() {
        match c {
            '#' => in_comment = true,
            '\n' => in_comment = false,
            ',' if !in_comment => {
                comma = Some(previous.end + i);
                break;
            }
            _ => {}
        }
    }
    let Some(comma) = comma else {
        return vec![(Span::new(previous.end, item.end), String::new())];
    };
    match text[comma..item.start].rfind('\n') {
        Some(nl) => vec![
            (Span::new(comma, comma + 1), String::new()),
            (Span::new(comma + nl, item.end), String::new()),
        ],
        None => vec![(Span::new(comma, item.end), String::new())],
    }
}

/// A new line after the statement holding `offset`.
fn add_line(text: &str, offset: usize, line: &str) -> Fix {
    let at = after_statement(text, offset);
    let new_text = if at == text.len() && !text.is_empty() && !text.ends_with('\n') {
        format!("\n{line}\n")
    } else {
        format!("{line}\n")
    };
    Fix::one(format!("add `{line}`"), Span::new(at, at), new_text)
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

    /// `text` with `word` (a whole list item) taken out of its list.
    fn cut(text: &str, word: &str) -> String {
        let items: Vec<Span> = (crate::check::outline(text).columns.iter())
            .map(|(_, s)| *s)
            .collect();
        let item = *items
            .iter()
            .find(|s| &text[s.start..s.end] == word)
            .unwrap();
        let mut edits = list_item(text, &items, item);
        edits.sort_by_key(|(s, _)| std::cmp::Reverse(s.start));
        let mut out = text.to_string();
        for (s, new) in edits {
            out.replace_range(s.start..s.end, &new);
        }
        out
    }

    #[test]
    fn a_list_item_goes_with_the_comma_that_ties_it() {
        let text = "features a, b, c\n";
        assert_eq!(cut(text, "a"), "features b, c\n");
        assert_eq!(cut(text, "b"), "features a, c\n");
        assert_eq!(cut(text, "c"), "features a, b\n");
    }

    #[test]
    fn a_list_item_leaves_a_list_laid_out_over_lines_well_formed() {
        let text = "features a,\n         b,  # the middle one\n         c\nscale none\n";
        assert_eq!(
            cut(text, "a"),
            "features b,  # the middle one\n         c\nscale none\n"
        );
        assert_eq!(cut(text, "b"), "features a,\n         c\nscale none\n");
        assert_eq!(
            cut(text, "c"),
            "features a,\n         b  # the middle one\nscale none\n"
        );
    }
}
