//! How a diagnostic is shown without echoing what it quotes at length.
//!
//! A recipe line or a data field can hold megabytes (a pasted column list,
//! a corrupt export). Messages quote names in backticks and the renderer
//! shows the recipe lines a problem points at; both are clipped here, in
//! one place, for the terminal, `--json` and the language server alike:
//! a backticked fragment keeps its first [`QUOTE_CHARS`] characters, and a
//! recipe line longer than [`LINE_BYTES`] is cut to a window around what
//! the problem points at. Cost: O(length of the recipe) per diagnostic
//! shown, and only when some line is long.

use miette::{
    Diagnostic, LabeledSpan, MietteError, MietteSpanContents, NamedSource, SourceCode, SourceSpan,
    SpanContents,
};
use std::fmt;

/// The most characters of a backticked fragment shown in a message.
pub const QUOTE_CHARS: usize = 60;
/// Recipe lines longer than this are shown as a window.
pub const LINE_BYTES: usize = 160;
/// Bytes kept either side of what a problem points at in a long line.
const MARGIN: usize = 40;

/// `text` with every backticked fragment longer than [`QUOTE_CHARS`]
/// characters clipped, marked by `…`.
pub fn clip_quotes(text: &str) -> String {
    let mut out = String::with_capacity(text.len().min(4096));
    let mut parts = text.split('`');
    if let Some(first) = parts.next() {
        out.push_str(first);
    }
    // Every odd part is inside backticks (when the backticks pair up).
    for (i, part) in parts.enumerate() {
        out.push('`');
        if i % 2 == 0 {
            out.push_str(&clipped(part, QUOTE_CHARS));
        } else {
            out.push_str(part);
        }
    }
    out
}

/// The most problems a check reports; a pasted list of thousands of
/// unknown columns would otherwise print thousands of messages.
pub const MOST_PROBLEMS: usize = 100;

/// Keeps the first [`MOST_PROBLEMS`] problems and counts the rest in one
/// last problem, an error when any of the rest is one.
pub(super) fn limit_problems(problems: &mut Vec<super::diagnostic::Problem>, end: super::Span) {
    if problems.len() <= MOST_PROBLEMS {
        return;
    }
    let rest = problems.split_off(MOST_PROBLEMS);
    let errors = rest.iter().filter(|p| p.is_error()).count();
    let count = crate::text::thousands(rest.len());
    problems.push(super::diagnostic::Problem::Check(if errors > 0 {
        super::diagnostic::CheckError::MoreProblems {
            count,
            errors: crate::text::thousands(errors),
            hidden_errors: errors,
            span: end,
        }
    } else {
        super::diagnostic::CheckError::MoreWarnings { count, span: end }
    }));
}

/// `text` cut to at most `max` characters, with `…` when cut: data can put
/// megabytes in one field, and a message should not repeat them.
pub fn clipped(text: &str, max: usize) -> String {
    match text.char_indices().nth(max) {
        Some((at, _)) => format!("{}…", &text[..at]),
        None => text.to_string(),
    }
}

/// A diagnostic ready to render: its message and help clipped, and, when
/// a recipe line is long, its source cut to a window with labels moved.
pub struct Shown<'a> {
    inner: &'a dyn Diagnostic,
    message: String,
    help: Option<String>,
    source: CharColumns,
    labels: Vec<LabeledSpan>,
}

impl<'a> Shown<'a> {
    pub fn new(inner: &'a dyn Diagnostic, name: &str, text: &str) -> Shown<'a> {
        let labels: Vec<LabeledSpan> = inner.labels().map(|l| l.collect()).unwrap_or_default();
        let (source, labels) = if text.lines().any(|l| l.len() > LINE_BYTES) {
            let spans: Vec<(usize, usize)> = labels
                .iter()
                .map(|l| (l.offset(), l.offset() + l.len()))
                .collect();
            let window = Window::of(text, &spans);
            let moved = labels
                .iter()
                .map(|l| {
                    let start = window.map(l.offset());
                    let end = window
                        .map(l.offset() + l.len())
                        .clamp(start, window.piece_end(start));
                    LabeledSpan::new(l.label().map(clip_quotes), start, end - start)
                })
                .collect();
            (window.text, moved)
        } else {
            (text.to_string(), labels)
        };
        Shown {
            inner,
            message: clip_quotes(&inner.to_string()),
            help: inner.help().map(|h| clip_quotes(&h.to_string())),
            source: CharColumns(NamedSource::new(name, source)),
            labels,
        }
    }
}

impl fmt::Debug for Shown<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl fmt::Display for Shown<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Shown<'_> {}

impl Diagnostic for Shown<'_> {
    fn code<'b>(&'b self) -> Option<Box<dyn fmt::Display + 'b>> {
        self.inner.code()
    }

    fn severity(&self) -> Option<miette::Severity> {
        self.inner.severity()
    }

    fn help<'b>(&'b self) -> Option<Box<dyn fmt::Display + 'b>> {
        self.help
            .as_ref()
            .map(|h| Box::new(h) as Box<dyn fmt::Display>)
    }

    fn source_code(&self) -> Option<&dyn SourceCode> {
        Some(&self.source)
    }

    fn labels(&self) -> Option<Box<dyn Iterator<Item = LabeledSpan> + '_>> {
        Some(Box::new(self.labels.iter().cloned()))
    }
}

/// The recipe as source code whose location header (`file:line:column`)
/// counts columns in characters, as editors and the language server do;
/// the renderer's own count is in bytes, which differs after `ö`.
struct CharColumns(NamedSource<String>);

impl SourceCode for CharColumns {
    fn read_span<'a>(
        &'a self,
        span: &SourceSpan,
        before: usize,
        after: usize,
    ) -> Result<Box<dyn SpanContents<'a> + 'a>, MietteError> {
        let contents = self.0.read_span(span, before, after)?;
        // The header reads the bare span; snippets read lines around it
        // and keep the renderer's own measure.
        if before != 0 || after != 0 {
            return Ok(contents);
        }
        let text = self.0.inner();
        let start = floor_char(text, span.offset());
        let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
        let column = text[line_start..start].chars().count();
        Ok(Box::new(MietteSpanContents::new_named(
            contents.name().unwrap_or_default().to_string(),
            contents.data(),
            *contents.span(),
            contents.line(),
            column,
            contents.line_count(),
        )))
    }
}

/// The recipe with long lines cut, and where the kept pieces came from.
struct Window {
    text: String,
    /// (start in the original, end in the original, start in `text`).
    kept: Vec<(usize, usize, usize)>,
}

impl Window {
    /// Cuts every line longer than [`LINE_BYTES`]: to a window around the
    /// spans on it, or to its start when none falls on it.
    fn of(text: &str, spans: &[(usize, usize)]) -> Window {
        let mut out = Window {
            text: String::new(),
            kept: Vec::new(),
        };
        let mut at = 0;
        for line in text.split_inclusive('\n') {
            let body = line.trim_end_matches(['\n', '\r']);
            let (start, end) = (at, at + body.len());
            at += line.len();
            if body.len() <= LINE_BYTES {
                out.keep(text, start, at);
                continue;
            }
            let on_line: Vec<&(usize, usize)> = spans
                .iter()
                .filter(|(s, e)| *s <= end && *e >= start)
                .collect();
            let (lo, hi) = match on_line.iter().map(|(s, _)| *s).min() {
                Some(first) => {
                    let last = on_line.iter().map(|(_, e)| *e).max().unwrap_or(first);
                    let lo = first.saturating_sub(MARGIN).max(start);
                    let hi = (last + MARGIN).min(end).min(lo + 2 * LINE_BYTES);
                    (lo, hi.max(first.min(end)))
                }
                None => (start, start + LINE_BYTES),
            };
            let lo = floor_char(text, lo);
            let hi = floor_char(text, hi);
            if lo > start {
                out.text.push('…');
            }
            out.keep(text, lo, hi);
            if hi < end {
                out.text.push('…');
            }
            out.keep(text, end, at);
        }
        out
    }

    fn keep(&mut self, text: &str, from: usize, to: usize) {
        self.kept.push((from, to, self.text.len()));
        self.text.push_str(&text[from..to]);
    }

    /// The end, in the cut text, of the kept piece holding `new`: a label
    /// may not run on into a `…` mark.
    fn piece_end(&self, new: usize) -> usize {
        self.kept
            .iter()
            .map(|&(from, to, at)| (at, at + (to - from)))
            .find(|&(at, end)| at <= new && new <= end)
            .map_or(new, |(_, end)| end)
    }

    /// Where an offset of the original lands; one in a cut piece lands at
    /// the nearest kept edge.
    fn map(&self, offset: usize) -> usize {
        let mut best = 0;
        for &(from, to, new) in &self.kept {
            if offset < from {
                return best.max(new);
            }
            if offset <= to {
                return new + (offset - from);
            }
            best = new + (to - from);
        }
        best
    }
}

/// The largest char boundary at or below `at`.
fn floor_char(text: &str, at: usize) -> usize {
    let mut at = at.min(text.len());
    while !text.is_char_boundary(at) {
        at -= 1;
    }
    at
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn long_backticked_fragments_are_clipped_and_short_ones_kept() {
        let long = "x".repeat(5000);
        let shown = clip_quotes(&format!("unknown column `{long}`; did you mean `a`?"));
        assert!(shown.len() < 100, "{shown}");
        assert!(shown.contains("…`; did you mean `a`?"));
        assert_eq!(clip_quotes("plain `a` and `b`"), "plain `a` and `b`");
    }

    #[test]
    fn a_long_line_is_cut_around_the_span_and_the_span_follows() {
        let line = format!(
            "features {}, target, {}",
            "a, ".repeat(1000),
            "b, ".repeat(1000)
        );
        let text = format!("input \"d.csv\" key id\n{line}\nkmeans k 2\n");
        let at = text.find("target").unwrap();
        let w = Window::of(&text, &[(at, at + 6)]);
        assert!(w.text.len() < 400, "{}", w.text.len());
        let moved = w.map(at);
        assert_eq!(&w.text[moved..moved + 6], "target");
        assert!(w.text.starts_with("input \"d.csv\" key id\n…"));
        assert!(w.text.ends_with("…\nkmeans k 2\n"));
        // A span longer than the window stops at the window's edge.
        let end = w.map(at + 3000).clamp(moved, w.piece_end(moved));
        assert!(w.text[moved..end].starts_with("target"));
        assert!(!w.text[moved..end].contains('…'));
    }

    #[test]
    fn short_recipes_are_shown_as_they_are() {
        let text = "input \"d.csv\" key id\nfeatures a\n";
        let w = Window::of(text, &[(22, 30)]);
        assert_eq!(w.text, text);
        assert_eq!(w.map(22), 22);
    }
}
