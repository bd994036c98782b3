//! One handler per editor feature, each from the document's text to the
//! protocol's answer.

use super::convert::LineIndex;
use crate::check::{self, complete, probe::ColumnKind, vocab, CheckOptions, RecipeSource};
use lsp_types::{
    CodeAction, CodeActionKind, CompletionItem, CompletionItemKind, CompletionTextEdit,
    DocumentSymbol, GotoDefinitionResponse, Hover, HoverContents, Location, MarkupContent,
    MarkupKind, Position, Range, SymbolKind, TextEdit, Uri, WorkspaceEdit,
};
use std::collections::HashMap;

/// What every handler gets.
pub struct Context<'a> {
    pub uri: &'a str,
    pub text: &'a str,
    pub source: RecipeSource,
    /// As the server was started (`--allow-dir`).
    pub options: &'a CheckOptions,
}

fn is_word(c: char) -> bool {
    c.is_alphanumeric() || matches!(c, '_' | '-' | '+')
}

/// The word under a byte offset, with its span.
fn word_at(text: &str, offset: usize) -> Option<(usize, usize, &str)> {
    let offset = offset.min(text.len());
    let start = text[..offset].rfind(|c: char| !is_word(c)).map_or(0, |i| {
        i + text[i..].chars().next().map_or(1, char::len_utf8)
    });
    let end = text[offset..]
        .find(|c: char| !is_word(c))
        .map_or(text.len(), |i| offset + i);
    (start < end).then(|| (start, end, &text[start..end]))
}

/// The statement word of the statement around `offset`, from its start.
fn statement_at(text: &str, offset: usize) -> Option<(usize, String)> {
    check::outline(text)
        .statements
        .into_iter()
        .find(|(_, span)| span.start <= offset && offset <= span.end)
        .map(|(w, span)| (span.start, w))
}

pub fn hover(ctx: &Context<'_>, p: Position) -> Option<Hover> {
    let index = LineIndex::new(ctx.text);
    let offset = index.offset(p);
    let (start, end, word) = word_at(ctx.text, offset)?;
    let range = Some(index.range(start, end));
    let markdown = |value: String| {
        Some(Hover {
            contents: HoverContents::Markup(MarkupContent {
                kind: MarkupKind::Markdown,
                value,
            }),
            range,
        })
    };
    let statement = statement_at(ctx.text, offset);
    let line_start = ctx.text[..start].rfind('\n').map_or(0, |i| i + 1);
    let is_keyword = ctx.text[line_start..start].trim().is_empty()
        || statement.as_ref().is_some_and(|(s, _)| *s == start);
    if is_keyword {
        if let Some(doc) = vocab::statement(word) {
            let mut text = format!("**{}**: {}\n\n`{}`", doc.word, doc.summary, doc.example);
            for o in vocab::options_for(word) {
                text.push_str(&format!("\n- `{}` {}: {}", o.name, o.takes, o.summary));
            }
            return markdown(text);
        }
    }
    if let Some((_, st)) = &statement {
        if let Some(o) = vocab::options_for(st).iter().find(|o| o.name == word) {
            return markdown(format!(
                "**{}** (option of `{st}`), takes {}: {}",
                o.name, o.takes, o.summary
            ));
        }
        if let Some(v) = vocab::value(st, word) {
            let place = match v.option {
                Some(o) => format!("a value of `{o}` in `{st}`"),
                None => format!("in `{st}`"),
            };
            return markdown(format!("**{}** ({place}): {}", v.word, v.summary));
        }
    }
    let checked = check::check_with(&ctx.source, ctx.options);
    let info = checked.column_info.iter().find(|c| c.name == word)?;
    let kind = match info.kind {
        ColumnKind::Numeric => "numeric",
        ColumnKind::Text => "text",
        ColumnKind::Blank => "blank in the sample",
    };
    let mut text = format!(
        "**{}**: {kind} column; in the first {} records: {} blank",
        info.name, checked.sampled, info.blanks
    );
    if info.numbers > 0 {
        let mean = info.sum / info.numbers as f64;
        text.push_str(&format!(
            ", min {}, mean {}, max {}",
            crate::text::short(info.min),
            crate::text::short(mean),
            crate::text::short(info.max)
        ));
    }
    if let Some(example) = &info.text_example {
        text.push_str(&format!(", text such as `{example}`"));
    }
    markdown(text)
}

pub fn completion(ctx: &Context<'_>, p: Position) -> Vec<CompletionItem> {
    let index = LineIndex::new(ctx.text);
    let offset = index.offset(p);
    // The statement so far: this line, and the lines before it while they
    // end with a comma (a continued list).
    let mut start = ctx.text[..offset].rfind('\n').map_or(0, |i| i + 1);
    while start > 0 {
        let prev_start = ctx.text[..start - 1].rfind('\n').map_or(0, |i| i + 1);
        let prev = ctx.text[prev_start..start - 1]
            .split('#')
            .next()
            .unwrap_or("")
            .trim_end();
        if !prev.ends_with(',') {
            break;
        }
        start = prev_start;
    }
    let before = &ctx.text[start..offset];
    let checked = check::check_with(&ctx.source, ctx.options);
    let facts = complete::Facts::of(ctx.text);
    let folder = ctx
        .source
        .path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(std::path::Path::new("."));
    let data = complete::DataView {
        columns: &checked.column_info,
        sampled: checked.sampled,
        key: facts.key.as_deref(),
        folder,
        elsewhere: &facts.elsewhere,
    };
    let found = complete::complete(before, &data);
    let range = index.range(start + found.start, offset);
    found
        .items
        .into_iter()
        .map(|i| CompletionItem {
            kind: Some(match i.kind {
                complete::ItemKind::Statement => CompletionItemKind::KEYWORD,
                complete::ItemKind::Option => CompletionItemKind::PROPERTY,
                complete::ItemKind::Value => CompletionItemKind::ENUM_MEMBER,
                complete::ItemKind::Column => CompletionItemKind::FIELD,
                complete::ItemKind::Path => CompletionItemKind::FILE,
            }),
            detail: Some(i.detail),
            filter_text: Some(i.insert.clone()),
            text_edit: Some(CompletionTextEdit::Edit(TextEdit {
                range,
                new_text: i.insert,
            })),
            label: i.label,
            ..Default::default()
        })
        .collect()
}

/// Quick fixes for the problems in `range`: each suggestion a diagnostic
/// makes, as an edit (see [`check::fixes`]).
pub fn code_actions(ctx: &Context<'_>, range: Range) -> Vec<CodeAction> {
    let index = LineIndex::new(ctx.text);
    let (from, to) = (index.offset(range.start), index.offset(range.end));
    let Ok(uri) = ctx.uri.parse::<Uri>() else {
        return Vec::new();
    };
    let checked = check::check_with(&ctx.source, ctx.options);
    let mut actions = Vec::new();
    for problem in &checked.problems {
        let diagnostic = super::convert::diagnostic(problem, &index);
        let (start, end) = (
            index.offset(diagnostic.range.start),
            index.offset(diagnostic.range.end),
        );
        if end < from || start > to {
            continue;
        }
        for (i, fix) in check::fixes::fixes(problem, ctx.text)
            .into_iter()
            .enumerate()
        {
            let edits = fix
                .edits
                .into_iter()
                .map(|(span, new_text)| TextEdit {
                    range: index.range(span.start, span.end),
                    new_text,
                })
                .collect();
            actions.push(CodeAction {
                title: fix.title,
                kind: Some(CodeActionKind::QUICKFIX),
                diagnostics: Some(vec![diagnostic.clone()]),
                edit: Some(WorkspaceEdit {
                    changes: Some(HashMap::from([(uri.clone(), edits)])),
                    ..Default::default()
                }),
                is_preferred: Some(i == 0),
                ..Default::default()
            });
        }
    }
    actions
}

pub fn definition(ctx: &Context<'_>, p: Position) -> Option<GotoDefinitionResponse> {
    let index = LineIndex::new(ctx.text);
    let (_, _, word) = word_at(ctx.text, index.offset(p))?;
    let (_, span) = check::outline(ctx.text)
        .columns
        .into_iter()
        .find(|(name, _)| name == word)?;
    let uri: Uri = ctx.uri.parse().ok()?;
    Some(GotoDefinitionResponse::Scalar(Location {
        uri,
        range: index.range(span.start, span.end),
    }))
}

pub fn symbols(ctx: &Context<'_>) -> Vec<DocumentSymbol> {
    let index = LineIndex::new(ctx.text);
    check::outline(ctx.text)
        .statements
        .into_iter()
        .map(|(word, span)| {
            let text = ctx.text[span.start..span.end]
                .lines()
                .next()
                .unwrap_or("")
                .trim();
            let name: String = text.chars().take(60).collect();
            #[allow(deprecated)]
            DocumentSymbol {
                name,
                detail: vocab::statement(&word).map(|d| d.summary.to_string()),
                kind: SymbolKind::KEY,
                tags: None,
                deprecated: None,
                range: index.range(span.start, span.end),
                selection_range: index.range(span.start, span.start + word.len()),
                children: None,
            }
        })
        .collect()
}

pub fn formatting(ctx: &Context<'_>) -> Option<Vec<TextEdit>> {
    let formatted = check::format(ctx.text)?;
    if formatted == ctx.text {
        return Some(Vec::new());
    }
    let index = LineIndex::new(ctx.text);
    Some(vec![TextEdit {
        range: Range::new(Position::new(0, 0), index.position(ctx.text.len())),
        new_text: formatted,
    }])
}
