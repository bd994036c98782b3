//! Syntax: recipe text to a syntax tree with spans.
//!
//! The pest grammar in `grammar/recipe.pest` is the single source of the
//! syntax. pest's own types never leave this module: pairs become
//! [`ast`] nodes at once. A recipe is cut into logical lines first and each
//! line is parsed on its own, so one bad statement yields one
//! [`SyntaxError`] and the other statements still reach the checker.

pub mod ast;
pub mod format;

use ast::*;
use miette::Diagnostic;
use pest::iterators::Pair;
use pest::Parser;
use thiserror::Error;

#[derive(pest_derive::Parser)]
#[grammar = "../grammar/recipe.pest"]
struct RecipeParser;

/// A statement that does not fit the grammar, in plain words.
#[derive(Debug, Clone, Error, Diagnostic, PartialEq)]
#[error("this statement does not read right: found {found}, expected {expected}")]
#[diagnostic(code(assort::syntax), help("{help}"))]
pub struct SyntaxError {
    pub found: String,
    pub expected: String,
    #[label("here")]
    pub span: Span,
    pub help: String,
    /// The first word of the statement, so the checker can show how that
    /// statement is written.
    pub statement_word: Option<String>,
}

/// Parses a whole recipe. Never fails: statements that do not parse become
/// entries in [`Recipe::errors`].
pub fn parse(src: &str) -> Recipe {
    let mut recipe = Recipe::default();
    let lines = match logical_lines(src) {
        Ok(lines) => lines,
        Err(e) => {
            recipe.errors.push(e);
            Vec::new()
        }
    };
    for (offset, text) in lines {
        if is_blank(text) {
            continue;
        }
        match RecipeParser::parse(Rule::statement, text) {
            Ok(mut pairs) => {
                let Some(stmt) = pairs.next().and_then(|p| p.into_inner().next()) else {
                    continue;
                };
                recipe.statements.push(build_statement(stmt, offset));
            }
            Err(err) => recipe.errors.push(syntax_error(text, offset, &err)),
        }
    }
    recipe
}

/// The recipe cut into logical lines (a statement, possibly continued
/// after commas, or a blank or comment line), each with its byte offset.
pub fn logical_lines(src: &str) -> Result<Vec<(usize, &str)>, SyntaxError> {
    match RecipeParser::parse(Rule::recipe_lines, src) {
        Ok(mut pairs) => Ok(pairs
            .next()
            .map(|p| {
                p.into_inner()
                    .filter(|l| l.as_rule() == Rule::logical_line)
                    .map(|l| (l.as_span().start(), l.as_str()))
                    .collect()
            })
            .unwrap_or_default()),
        // The line splitter accepts any text; failing is a grammar bug, and
        // it is still reported rather than panicking.
        Err(err) => Err(syntax_error(src, 0, &err)),
    }
}

/// A line holding only blanks and a comment.
fn is_blank(text: &str) -> bool {
    let t = text.trim_start();
    t.is_empty() || t.starts_with('#')
}

fn span_of(pair: &Pair<'_, Rule>, offset: usize) -> Span {
    let s = pair.as_span();
    Span::new(s.start() + offset, s.end() + offset)
}

fn build_statement(pair: Pair<'_, Rule>, off: usize) -> Statement {
    let span = span_of(&pair, off);
    let rule = pair.as_rule();
    let mut inner = pair.into_inner();
    // Every statement rule starts with its statement word (or, for an unknown
    // statement, with the word that stands in its place).
    let kw_pair = inner.next();
    let keyword = match &kw_pair {
        Some(p) => Spanned::new(p.as_str().to_string(), span_of(p, off)),
        None => Spanned::new(String::new(), span),
    };
    let rest: Vec<Pair<'_, Rule>> = inner.collect();
    let kind = match rule {
        Rule::recipe_stmt => StatementKind::Recipe {
            name: text_of(&rest[0], off),
            options: options_of(&rest[1..], off),
        },
        Rule::seed_stmt => StatementKind::Seed {
            value: number_of(&rest[0], off),
        },
        Rule::input_stmt => StatementKind::Input {
            path: text_of(&rest[0], off),
            options: options_of(&rest[1..], off),
        },
        Rule::features_stmt => {
            let first = &rest[0];
            if first.as_rule() == Rule::all_columns {
                let except = first
                    .clone()
                    .into_inner()
                    .find(|p| p.as_rule() == Rule::column_list)
                    .map(|p| columns_of(&p, off))
                    .unwrap_or_default();
                StatementKind::Features(FeatureChoice::AllNumeric { except })
            } else {
                StatementKind::Features(FeatureChoice::Listed(columns_of(first, off)))
            }
        }
        Rule::categories_stmt => StatementKind::Categories {
            columns: columns_of(&rest[0], off),
            options: options_of(&rest[1..], off),
        },
        Rule::ordered_stmt => StatementKind::Ordered {
            column: column_of(&rest[0], off),
            levels: rest[1..]
                .iter()
                .filter(|p| p.as_rule() == Rule::level)
                .map(|p| level_of(p, off))
                .collect(),
        },
        Rule::flags_stmt => StatementKind::Flags {
            columns: columns_of(&rest[0], off),
        },
        Rule::missing_stmt => {
            let act = &rest[0];
            let action = if act.as_rule() == Rule::drop_rows {
                MissingAction::DropRows
            } else if act.as_rule() == Rule::keep_gaps {
                MissingAction::Keep
            } else {
                let value = act.clone().into_inner().nth(1).map(|v| value_of(&v, off));
                match value {
                    Some(v) => MissingAction::Fill(v),
                    None => MissingAction::DropRows,
                }
            };
            let columns = rest
                .iter()
                .find(|p| p.as_rule() == Rule::column_list)
                .map(|p| columns_of(p, off));
            StatementKind::Missing {
                action: Spanned::new(action, span_of(act, off)),
                columns,
            }
        }
        Rule::transform_stmt => {
            let action = &rest[1];
            let action = if action.as_rule() == Rule::clip_range {
                let range = action
                    .clone()
                    .into_inner()
                    .find(|p| p.as_rule() == Rule::range);
                match range.map(|r| value_of(&r, off)) {
                    Some(Spanned {
                        node: Value::Range(lo, hi),
                        span,
                    }) => TransformAction::Clip(Spanned::new((lo, hi), span)),
                    _ => TransformAction::Named(Spanned::new(
                        "clip".to_string(),
                        span_of(action, off),
                    )),
                }
            } else {
                TransformAction::Named(Spanned::new(
                    action.as_str().to_string(),
                    span_of(action, off),
                ))
            };
            StatementKind::Transform {
                columns: columns_of(&rest[0], off),
                action,
            }
        }
        Rule::scale_stmt => StatementKind::Scale {
            method: Spanned::new(rest[0].as_str().to_string(), span_of(&rest[0], off)),
        },
        Rule::weight_stmt => StatementKind::Weight {
            columns: columns_of(&rest[0], off),
            value: number_of(&rest[1], off),
        },
        Rule::kmeans_stmt => StatementKind::KMeans {
            options: options_of(&rest, off),
        },
        Rule::kmedoids_stmt => StatementKind::KMedoids {
            options: options_of(&rest, off),
        },
        Rule::kprototypes_stmt => StatementKind::KPrototypes {
            options: options_of(&rest, off),
        },
        Rule::tree_stmt => StatementKind::Tree {
            options: options_of(&rest, off),
        },
        Rule::evidence_stmt => StatementKind::Evidence {
            options: options_of(&rest, off),
        },
        Rule::choose_stmt => {
            // rest[0] is the fixed word `k`.
            let rule = &rest[1];
            let options = options_of(&rest[2..], off);
            if rule.as_rule() == Rule::by_criterion {
                let word = rule.clone().into_inner().nth(1);
                let crit = match word {
                    Some(w) => Spanned::new(w.as_str().to_string(), span_of(&w, off)),
                    None => Spanned::new(String::new(), span_of(rule, off)),
                };
                StatementKind::Choose {
                    rule: ChooseRule::By(crit),
                    options,
                }
            } else {
                StatementKind::Choose {
                    rule: ChooseRule::Fixed(number_of(rule, off)),
                    options,
                }
            }
        }
        Rule::label_stmt => StatementKind::Label {
            segment: number_of(&rest[0], off),
            text: text_of(&rest[1], off),
        },
        Rule::brief_stmt => StatementKind::Brief {
            segment: number_of(&rest[0], off),
            text: text_of(&rest[1], off),
            options: options_of(&rest[2..], off),
        },
        Rule::save_stmt => StatementKind::Save {
            what: Spanned::new(rest[0].as_str().to_string(), span_of(&rest[0], off)),
            path: text_of(&rest[1], off),
        },
        Rule::validate_stmt => StatementKind::Validate {
            // rest[0] is the fixed word `against`.
            path: text_of(&rest[1], off),
            options: options_of(&rest[2..], off),
        },
        Rule::tally_stmt => StatementKind::Tally {
            columns: columns_of(&rest[0], off),
        },
        Rule::represents_stmt => StatementKind::Represents {
            column: column_of(&rest[0], off),
        },
        Rule::call_stmt => StatementKind::Call {
            column: column_of(&rest[0], off),
            name: text_of(&rest[1], off),
            options: options_of(&rest[2..], off),
        },
        Rule::acknowledge_stmt => StatementKind::Acknowledge {
            columns: columns_of(&rest[0], off),
            reason: text_of(&rest[1], off),
        },
        Rule::compare_stmt => StatementKind::Compare {
            // rest[0] is the fixed word `with`.
            path: text_of(&rest[1], off),
        },
        Rule::previous_stmt => StatementKind::Previous {
            path: text_of(&rest[0], off),
            options: options_of(&rest[1..], off),
        },
        _ => StatementKind::Unknown {
            word: keyword.clone(),
        },
    };
    Statement {
        kind,
        keyword,
        span,
    }
}

/// A level of an ordered category: quoted text unescaped, a number or a
/// word as written.
fn level_of(pair: &Pair<'_, Rule>, off: usize) -> Spanned<String> {
    match pair.clone().into_inner().next() {
        Some(inner) if inner.as_rule() == Rule::text => text_of(&inner, off),
        _ => Spanned::new(pair.as_str().to_string(), span_of(pair, off)),
    }
}

fn text_of(pair: &Pair<'_, Rule>, off: usize) -> Spanned<String> {
    let inner = pair.clone().into_inner().next();
    let raw = inner.map(|p| p.as_str()).unwrap_or("");
    Spanned::new(unescape(raw), span_of(pair, off))
}

/// Resolves `\"` and `\\`; any other escaped character stands for itself.
fn unescape(raw: &str) -> String {
    let mut out = String::with_capacity(raw.len());
    let mut chars = raw.chars();
    while let Some(c) = chars.next() {
        if c == '\\' {
            if let Some(next) = chars.next() {
                out.push(next);
            }
        } else {
            out.push(c);
        }
    }
    out
}

fn number(raw: &str) -> Number {
    Number {
        raw: raw.to_string(),
        // The grammar admits only decimal numbers, which always parse; an
        // out-of-range exponent parses to infinity, which the checker refuses.
        value: raw.parse().unwrap_or(f64::NAN),
    }
}

fn number_of(pair: &Pair<'_, Rule>, off: usize) -> Spanned<Number> {
    Spanned::new(number(pair.as_str()), span_of(pair, off))
}

fn value_of(pair: &Pair<'_, Rule>, off: usize) -> Spanned<Value> {
    let span = span_of(pair, off);
    let value = match pair.as_rule() {
        Rule::number => Value::Number(number(pair.as_str())),
        Rule::range => {
            let mut ends = pair.clone().into_inner();
            let lo = ends.next().map(|p| number(p.as_str()));
            let hi = ends.next().map(|p| number(p.as_str()));
            match (lo, hi) {
                (Some(lo), Some(hi)) => Value::Range(lo, hi),
                _ => Value::Word(pair.as_str().to_string()),
            }
        }
        Rule::text => Value::Text(text_of(pair, off).node),
        _ => Value::Word(pair.as_str().to_string()),
    };
    Spanned::new(value, span)
}

fn options_of(pairs: &[Pair<'_, Rule>], off: usize) -> Vec<OptionPair> {
    pairs
        .iter()
        .filter(|p| p.as_rule() == Rule::option)
        .filter_map(|p| {
            let mut inner = p.clone().into_inner();
            let name = inner.next()?;
            let value = inner.next()?;
            Some(OptionPair {
                name: Spanned::new(name.as_str().to_string(), span_of(&name, off)),
                value: value_of(&value, off),
            })
        })
        .collect()
}

fn columns_of(list: &Pair<'_, Rule>, off: usize) -> Vec<Column> {
    list.clone()
        .into_inner()
        .filter(|p| p.as_rule() == Rule::column)
        .map(|col| column_of(&col, off))
        .collect()
}

/// A column, bare or quoted.
fn column_of(col: &Pair<'_, Rule>, off: usize) -> Column {
    match col.clone().into_inner().next() {
        Some(inner) if inner.as_rule() == Rule::text => text_of(&inner, off),
        Some(inner) => Spanned::new(inner.as_str().to_string(), span_of(&inner, off)),
        None => Spanned::new(col.as_str().to_string(), span_of(col, off)),
    }
}

// ------------------------------------------------------------------ errors --

fn syntax_error(text: &str, offset: usize, err: &pest::error::Error<Rule>) -> SyntaxError {
    let pos = match err.location {
        pest::error::InputLocation::Pos(p) => p,
        pest::error::InputLocation::Span((s, _)) => s,
    };
    let pos = pos.min(text.len());
    let found_text = token_at(&text[pos..]);
    let (found, span) = if found_text.is_empty() {
        // Point at the last character rather than past the end.
        let at = text[..pos].trim_end().len();
        let back = text[..at].chars().last().map(char::len_utf8).unwrap_or(0);
        (
            "the end of the statement".to_string(),
            Span::new(offset + at - back, offset + at),
        )
    } else {
        (
            format!("`{found_text}`"),
            Span::new(offset + pos, offset + pos + found_text.len()),
        )
    };
    let mut expected: Vec<&'static str> = match &err.variant {
        pest::error::ErrorVariant::ParsingError { positives, .. } => {
            positives.iter().map(|r| describe(*r)).collect()
        }
        pest::error::ErrorVariant::CustomError { .. } => vec![],
    };
    expected.sort_unstable();
    expected.dedup();
    let expected = match expected.len() {
        0 => "something else".to_string(),
        1 => expected[0].to_string(),
        _ => {
            let (last, rest) = expected.split_last().unwrap_or((&"", &[]));
            format!("one of {} or {}", rest.join(", "), last)
        }
    };
    SyntaxError {
        found,
        expected,
        span,
        help: "each statement starts with a statement word; `docs/language.md` shows every statement with an example".to_string(),
        statement_word: text
            .split(|c: char| c.is_whitespace() || c == '#')
            .find(|w| !w.is_empty())
            .map(str::to_string),
    }
}

/// The word, number or single character at the start of `rest`.
fn token_at(rest: &str) -> &str {
    let rest_trim = rest.trim_start_matches([' ', '\t']);
    if rest_trim.starts_with(['\n', '\r']) || rest_trim.is_empty() {
        return "";
    }
    let end = rest
        .char_indices()
        .find(|(_, c)| c.is_whitespace() || matches!(c, ',' | '"' | '#'))
        .map(|(i, _)| i)
        .unwrap_or(rest.len());
    if end == 0 {
        let first = rest.chars().next().map(char::len_utf8).unwrap_or(0);
        &rest[..first]
    } else {
        &rest[..end]
    }
}

/// Grammar rules in plain words, for messages.
fn describe(rule: Rule) -> &'static str {
    match rule {
        Rule::number => "a number",
        Rule::range => "a range such as `2..9`",
        Rule::text | Rule::text_inner => "a quoted text",
        Rule::word => "a word",
        Rule::column | Rule::column_list => "a column name",
        Rule::option => "an option",
        Rule::level => "a level (a quoted text, a word or a number)",
        Rule::EOI => "the end of the statement",
        Rule::all_columns | Rule::kw_all => "`all`",
        Rule::kw_except => "`except`",
        Rule::kw_for => "`for`",
        Rule::drop_rows | Rule::kw_drop => "`drop`",
        Rule::keep_gaps | Rule::kw_keep => "`keep`",
        Rule::fill_values | Rule::kw_fill => "`fill`",
        Rule::clip_range | Rule::kw_clip => "`clip`",
        Rule::by_criterion | Rule::kw_by => "`by`",
        Rule::kw_k => "`k`",
        Rule::kw_against => "`against`",
        Rule::kw_with => "`with`",
        _ => "a statement word",
    }
}

/// The statements that shape the segments (the seed, which columns, how
/// they are prepared, which method, how k is chosen), each on one line as
/// `assort fmt` writes it, in recipe order. A segment model records them,
/// so a later run's `previous` can say when last run's model came from
/// other settings. A recipe that does not format is taken as written.
pub fn shaping_statements(src: &str) -> Vec<String> {
    let formatted = format::format(src).unwrap_or_else(|_| src.to_string());
    parse(&formatted)
        .statements
        .iter()
        .filter(|s| {
            matches!(
                s.kind,
                StatementKind::Seed { .. }
                    | StatementKind::Features(_)
                    | StatementKind::Categories { .. }
                    | StatementKind::Ordered { .. }
                    | StatementKind::Flags { .. }
                    | StatementKind::Missing { .. }
                    | StatementKind::Transform { .. }
                    | StatementKind::Scale { .. }
                    | StatementKind::Weight { .. }
                    | StatementKind::Represents { .. }
                    | StatementKind::KMeans { .. }
                    | StatementKind::KMedoids { .. }
                    | StatementKind::KPrototypes { .. }
                    | StatementKind::Tree { .. }
                    | StatementKind::Choose { .. }
            )
        })
        .filter_map(|s| formatted.get(s.span.start..s.span.end))
        .map(|text| {
            // Continuation lines joined, comments left out.
            text.lines()
                .map(|l| l.split(" #").next().unwrap_or(l).trim())
                .filter(|l| !l.is_empty() && !l.starts_with('#'))
                .collect::<Vec<_>>()
                .join(" ")
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The line splitter as the grammar read before runs were skipped in
    /// one step: a character at a time, each alternative tried in order.
    fn cut_one_char_at_a_time(src: &str) -> Vec<(usize, &str)> {
        let b = src.as_bytes();
        let newline = |at: usize| match b.get(at) {
            Some(b'\n') => Some(1),
            Some(b'\r') => Some(if b.get(at + 1) == Some(&b'\n') { 2 } else { 1 }),
            _ => None,
        };
        let char_len = |at: usize| src[at..].chars().next().map_or(1, char::len_utf8);
        let comment = |mut at: usize| {
            if b.get(at) != Some(&b'#') {
                return None;
            }
            at += 1;
            while at < b.len() && newline(at).is_none() {
                at += char_len(at);
            }
            Some(at)
        };
        let quoted = |mut at: usize| {
            if b.get(at) != Some(&b'"') {
                return None;
            }
            at += 1;
            loop {
                if b.get(at) == Some(&b'\\') && at + 1 < b.len() && newline(at + 1).is_none() {
                    at += 1 + char_len(at + 1);
                } else if at < b.len() && b[at] != b'"' && newline(at).is_none() {
                    at += char_len(at);
                } else {
                    break;
                }
            }
            (b.get(at) == Some(&b'"')).then_some(at + 1)
        };
        let continuation = |at: usize| {
            if b.get(at) != Some(&b',') {
                return None;
            }
            let mut end = None;
            let mut at = at + 1;
            loop {
                let mut p = at;
                while matches!(b.get(p), Some(b' ' | b'\t')) {
                    p += 1;
                }
                p = comment(p).unwrap_or(p);
                match newline(p) {
                    Some(n) => {
                        at = p + n;
                        end = Some(at);
                    }
                    None => return end,
                }
            }
        };
        let mut lines = Vec::new();
        let mut at = 0;
        loop {
            let start = at;
            loop {
                if let Some(n) = quoted(at)
                    .or_else(|| continuation(at))
                    .or_else(|| comment(at))
                {
                    at = n;
                } else if at < b.len() && newline(at).is_none() {
                    at += char_len(at);
                } else {
                    break;
                }
            }
            lines.push((start, &src[start..at]));
            match newline(at) {
                Some(n) => at += n,
                None => break,
            }
        }
        lines
    }

    proptest::proptest! {
        /// Skipping runs in one step cuts every text into the same logical
        /// lines as going a character at a time.
        #[test]
        fn runs_skipped_in_one_step_cut_the_same_lines(
            parts in proptest::collection::vec(
                proptest::sample::select(vec![
                    "a", "features", " ", "\t", ",", ", ", "\"", "\\", "#", "# note",
                    "\n", "\r\n", "\r", "é", "x, y", "\"a b\"",
                ]),
                0..40,
            )
        ) {
            let text: String = parts.concat();
            let cut = logical_lines(&text).unwrap();
            proptest::prop_assert_eq!(cut, cut_one_char_at_a_time(&text), "{:?}", text);
        }
    }

    #[track_caller]
    fn one(src: &str) -> Statement {
        let r = parse(src);
        assert!(r.errors.is_empty(), "unexpected errors: {:?}", r.errors);
        assert_eq!(r.statements.len(), 1, "{:?}", r.statements);
        r.statements.into_iter().next().unwrap()
    }

    #[test]
    fn a_list_continues_after_a_trailing_comma() {
        let s = one("features a, b,   # first two\n\n    c\n");
        match s.kind {
            StatementKind::Features(FeatureChoice::Listed(cols)) => {
                let names: Vec<_> = cols.iter().map(|c| c.node.as_str()).collect();
                assert_eq!(names, ["a", "b", "c"]);
                assert_eq!(
                    &"features a, b,   # first two\n\n    c\n"
                        [cols[2].span.start..cols[2].span.end],
                    "c"
                );
            }
            other => panic!("wrong kind {other:?}"),
        }
    }

    #[test]
    fn options_keep_their_shapes() {
        let s = one("kmeans k 2..9 restarts 25 seeding kmeans++ tolerance 1e-6");
        let StatementKind::KMeans { options } = s.kind else {
            panic!("wrong kind")
        };
        assert_eq!(options.len(), 4);
        assert!(matches!(options[0].value.node, Value::Range(..)));
        assert_eq!(options[2].value.node, Value::Word("kmeans++".into()));
        assert_eq!(options[3].value.node.kind_name(), "a number");
    }

    #[test]
    fn an_unknown_word_is_kept_for_the_checker() {
        let s = one("sead 12");
        assert_eq!(
            s.kind,
            StatementKind::Unknown {
                word: Spanned::new("sead".into(), Span::new(0, 4))
            }
        );
    }

    #[test]
    fn a_bad_line_does_not_hide_the_next() {
        let r = parse("seed abc\nscale zscore\n");
        assert_eq!(r.errors.len(), 1);
        assert_eq!(r.errors[0].found, "`abc`");
        assert_eq!(r.errors[0].expected, "a number");
        assert_eq!(r.errors[0].span, Span::new(5, 8));
        assert_eq!(r.statements.len(), 1);
    }

    #[test]
    fn quoted_text_keeps_commas_and_escapes() {
        let s = one(r#"label 2 "bulk, \"stock-up\" buyers""#);
        let StatementKind::Label { text, .. } = s.kind else {
            panic!("wrong kind")
        };
        assert_eq!(text.node, r#"bulk, "stock-up" buyers"#);
    }

    #[test]
    fn a_brief_has_its_segment_its_line_and_an_action() {
        let s = one(r#"brief 3 "order online; ready meals" action "bundles in the app""#);
        let StatementKind::Brief {
            segment,
            text,
            options,
        } = s.kind
        else {
            panic!("wrong kind")
        };
        assert_eq!(segment.node.as_whole(), Some(3));
        assert_eq!(text.node, "order online; ready meals");
        assert_eq!(options.len(), 1);
        assert_eq!(options[0].name.node, "action");
        assert_eq!(
            options[0].value.node,
            Value::Text("bundles in the app".into())
        );
    }

    #[test]
    fn a_missing_value_at_the_end_points_at_the_last_character() {
        let r = parse("seed\n");
        assert_eq!(r.errors.len(), 1);
        assert_eq!(r.errors[0].found, "the end of the statement");
        assert_eq!(r.errors[0].span, Span::new(3, 4));
    }
}
