//! How a diagnostic is shown without echoing what it quotes at length.
//!
//! A recipe line or a data field can hold megabytes (a pasted column list,
//! a corrupt export). Messages quote names in backticks and the renderer
//! shows the recipe lines a problem points at; both are clipped here, in
//! one place, for the terminal, `--json` and the language server alike:
//! a backticked fragment keeps its first [`QUOTE_CHARS`] characters, and a
//! recipe line longer than [`LINE_CHARS`] (or than a narrow terminal) is
//! cut to a window around what the problem points at, so that the
//! underline stays under its word. Cost: O(length of the recipe) per
//! diagnostic shown, and only when some line is long.

use miette::{
    Diagnostic, LabeledSpan, MietteError, MietteSpanContents, NamedSource, SourceCode, SourceSpan,
    SpanContents,
};
use std::fmt;

/// The most characters of a backticked fragment shown in a message.
pub const QUOTE_CHARS: usize = 60;
/// Recipe lines longer than this are shown as a window when no terminal
/// says how wide it is.
pub const LINE_CHARS: usize = 160;

/// The fewest characters of a label's line on a terminal (a third of its
/// width when that is less).
const LABEL_LINE: usize = 24;

/// What a problem points at, in bytes of the recipe, and the columns its
/// label needs right of the middle.
struct Pointed {
    start: usize,
    end: usize,
    room: usize,
}

/// How recipe lines are fitted: lines longer than `limit` characters are
/// cut to a window of at most `widest` characters that starts `left`
/// characters before the first thing the problem points at and ends
/// `right` characters after the last (or at `widest`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Fit {
    limit: usize,
    left: usize,
    right: usize,
    widest: usize,
    /// Labels are wrapped to the columns left beside their underline (on
    /// a terminal; elsewhere they stay on one line).
    wrap_labels: bool,
    /// The fewest characters of a wrapped label's line.
    label_line: usize,
}

impl Fit {
    /// Without a terminal: only lines over [`LINE_CHARS`], with 40
    /// characters either side of what is pointed at.
    pub const LONG_LINES: Fit = Fit {
        limit: LINE_CHARS,
        left: 40,
        right: 40,
        widest: 2 * LINE_CHARS,
        wrap_labels: false,
        label_line: 0,
    };

    /// On a terminal with `columns` left for the recipe's text: every
    /// longer line cut, the window filling the columns (less its two `…`
    /// marks), what is pointed at a quarter of the way in so that its
    /// label fits beside it.
    pub fn terminal(columns: usize) -> Fit {
        let widest = columns.saturating_sub(2).max(8);
        Fit {
            limit: columns,
            left: widest / 4,
            right: widest,
            widest,
            wrap_labels: true,
            label_line: (columns / 3).min(LABEL_LINE),
        }
    }

    /// The columns a label needs right of its underline's middle: on a
    /// terminal its bar and up to [`LABEL_LINE`] characters of it (longer
    /// labels wrap); elsewhere none, as labels are not wrapped there.
    fn label_room(self, label: &str) -> usize {
        if self.wrap_labels {
            4 + label.chars().count().min(self.label_line)
        } else {
            0
        }
    }

    /// `label` broken into lines that fit beside an underline whose
    /// middle is `column` characters into the recipe's line (a label's
    /// own width is never cut: a word longer than the room keeps its
    /// line). Only on a terminal.
    fn label(self, label: &str, column: usize) -> String {
        // The label starts four columns right of the underline's middle.
        let room = self.limit.saturating_sub(column + 4).max(self.label_line);
        let mut out = String::new();
        let mut width = 0;
        for word in label.split(' ') {
            let n = word.chars().count();
            if width > 0 && width + 1 + n > room {
                out.push('\n');
                width = 0;
            } else if width > 0 {
                out.push(' ');
                width += 1;
            }
            out.push_str(word);
            width += n;
        }
        out
    }
}

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
    /// Shown without a terminal ([`Fit::LONG_LINES`]).
    pub fn new(inner: &'a dyn Diagnostic, name: &str, text: &str) -> Shown<'a> {
        Shown::fitted(inner, name, text, Fit::LONG_LINES)
    }

    /// Shown with the recipe's lines fitted as `fit` says.
    pub fn fitted(inner: &'a dyn Diagnostic, name: &str, text: &str, fit: Fit) -> Shown<'a> {
        let labels: Vec<LabeledSpan> = inner.labels().map(|l| l.collect()).unwrap_or_default();
        // Bytes bound characters from above: a line is measured only when
        // it may be too long.
        let long = |l: &str| l.len() > fit.limit && l.chars().count() > fit.limit;
        let (source, labels, cut) = if fit.wrap_labels || text.lines().any(long) {
            let spans: Vec<Pointed> = labels
                .iter()
                .map(|l| Pointed {
                    start: l.offset(),
                    end: l.offset() + l.len(),
                    room: fit.label_room(l.label().unwrap_or("")),
                })
                .collect();
            let window = Window::of(text, &spans, fit);
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
            // On a terminal every recipe passes here; only a recipe with
            // a line actually cut needs the original kept beside it.
            let cut = (window.text != text).then(|| (text.to_string(), window.kept));
            (window.text, moved, cut)
        } else {
            (text.to_string(), labels, None)
        };
        let labels = if fit.wrap_labels {
            labels
                .into_iter()
                .map(|l| wrapped(l, &source, fit))
                .collect()
        } else {
            labels
        };
        Shown {
            inner,
            message: clip_quotes(&inner.to_string()),
            help: inner.help().map(|h| clip_quotes(&h.to_string())),
            source: CharColumns {
                shown: NamedSource::new(name, source),
                cut,
            },
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
/// counts columns in characters, as editors and the language server do
/// (the renderer's own count is in bytes, which differs after `ö`), and
/// in the recipe as written when its lines are shown cut.
struct CharColumns {
    shown: NamedSource<String>,
    /// The recipe as written and the pieces of it shown, when cut.
    cut: Option<(String, Pieces)>,
}

impl SourceCode for CharColumns {
    fn read_span<'a>(
        &'a self,
        span: &SourceSpan,
        before: usize,
        after: usize,
    ) -> Result<Box<dyn SpanContents<'a> + 'a>, MietteError> {
        let contents = self.shown.read_span(span, before, after)?;
        // The header reads the bare span; snippets read lines around it
        // and keep the renderer's own measure.
        if before != 0 || after != 0 {
            return Ok(contents);
        }
        let (text, offset) = match &self.cut {
            Some((original, kept)) => (original.as_str(), unmap(kept, span.offset())),
            None => (self.shown.inner().as_str(), span.offset()),
        };
        let start = floor_char(text, offset);
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

/// The pieces of a recipe kept when its lines are cut: (start in the
/// original, end in the original, start in the cut text) of each.
type Pieces = Vec<(usize, usize, usize)>;

/// Where an offset of the cut text was in the original (`kept` as in
/// [`Window`]); every line keeps at least its line end, so the line is
/// always the same.
fn unmap(kept: &[(usize, usize, usize)], new: usize) -> usize {
    kept.iter()
        .find(|&&(from, to, at)| at <= new && new <= at + (to - from))
        .map_or(new, |&(from, _, at)| from + (new - at))
}

/// The recipe with long lines cut, and where the kept pieces came from.
struct Window {
    text: String,
    kept: Pieces,
}

impl Window {
    /// Cuts every line longer than `fit`'s limit, or whose label would
    /// not fit beside what it points at: to a window around the spans on
    /// it, or to its start when none falls on it.
    fn of(text: &str, spans: &[Pointed], fit: Fit) -> Window {
        let mut out = Window {
            text: String::new(),
            kept: Vec::new(),
        };
        let mut at = 0;
        for line in text.split_inclusive('\n') {
            let body = line.trim_end_matches(['\n', '\r']);
            let (start, end) = (at, at + body.len());
            at += line.len();
            // Characters before a byte offset of the line.
            let char_of = |b: usize| {
                let b = b.clamp(start, end) - start;
                body[..floor_char(body, b)].chars().count()
            };
            let on_line: Vec<&Pointed> = spans
                .iter()
                .filter(|p| p.start <= end && p.end >= start)
                .collect();
            let chars = body.chars().count();
            let short = chars <= fit.limit;
            let labels_fit = on_line.iter().all(|p| {
                p.room == 0 || (char_of(p.start) + char_of(p.end)) / 2 + p.room <= fit.limit
            });
            if short && labels_fit {
                out.keep(text, start, at);
                continue;
            }
            let pointed: Vec<(usize, usize, usize)> = on_line
                .iter()
                .map(|p| (char_of(p.start), char_of(p.end), p.room))
                .collect();
            // Character positions back to bytes of the text.
            let byte_of = |c: usize| body.char_indices().nth(c).map_or(end, |(b, _)| start + b);
            let mut shown_to = 0;
            for (lo, hi) in pieces(&pointed, chars, fit) {
                if lo > shown_to {
                    out.text.push('…');
                }
                out.keep(text, byte_of(lo), byte_of(hi));
                shown_to = hi;
            }
            if shown_to < chars {
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

/// Characters kept either side of each thing pointed at when a line is
/// shown in pieces.
const CONTEXT: usize = 4;

/// The pieces of a line of `chars` characters kept on screen, in
/// characters, for the spans `(start, end, label room)` on it: one window
/// around all of them; on a terminal where that does not fit with the
/// labels, a piece around each.
fn pieces(pointed: &[(usize, usize, usize)], chars: usize, fit: Fit) -> Vec<(usize, usize)> {
    let Some(first) = pointed.iter().map(|p| p.0).min() else {
        return vec![(0, fit.widest.min(chars))];
    };
    let last = pointed.iter().map(|p| p.1).max().unwrap_or(first);
    let lo = first.saturating_sub(fit.left);
    let hi = (last.saturating_add(fit.right))
        .min(chars)
        .min(lo + fit.widest);
    let one = vec![(lo, hi.max(first.min(chars)))];
    if !fit.wrap_labels || fits(&one, pointed, chars, fit.limit) {
        return one;
    }
    let mut sorted = pointed.to_vec();
    sorted.sort_unstable();
    // Context around each, less when that does not fit.
    let around = |context: usize| {
        let mut cut: Vec<(usize, usize)> = Vec::new();
        for &(s, e, _) in &sorted {
            let (a, b) = (s.saturating_sub(context), (e + context).min(chars));
            match cut.last_mut() {
                Some(prev) if a <= prev.1 + 1 => prev.1 = prev.1.max(b),
                _ => cut.push((a, b)),
            }
        }
        cut
    };
    let wide = around(CONTEXT);
    if fits(&wide, pointed, chars, fit.limit) {
        wide
    } else {
        around(0)
    }
}

/// Whether the line shown as `kept` pieces (with a `…` for each gap) is at
/// most `limit` columns and every label fits right of its underline.
fn fits(
    kept: &[(usize, usize)],
    pointed: &[(usize, usize, usize)],
    chars: usize,
    limit: usize,
) -> bool {
    // The screen column of character `c`, when it is kept.
    let column = |c: usize| {
        let (mut col, mut shown_to) = (0, 0);
        for &(a, b) in kept {
            col += usize::from(a > shown_to);
            if (a..=b).contains(&c) {
                return Some(col + c - a);
            }
            col += b - a;
            shown_to = b;
        }
        None
    };
    let last = kept.last().map_or(0, |k| k.1);
    let width = column(last).unwrap_or(0) + usize::from(last < chars);
    width <= limit
        && pointed
            .iter()
            .all(|&(s, e, room)| match (column(s), column(e)) {
                (Some(a), Some(b)) => (a + b) / 2 + room <= limit,
                _ => false,
            })
}

/// A label broken into lines that fit beside its underline in `source`.
fn wrapped(l: LabeledSpan, source: &str, fit: Fit) -> LabeledSpan {
    match l.label() {
        Some(words) => {
            let column = middle_column(source, l.offset(), l.len());
            LabeledSpan::new(Some(fit.label(words, column)), l.offset(), l.len())
        }
        None => l,
    }
}

/// The column of the middle of a span, in characters from its line's
/// start, as the renderer places the label's bar.
fn middle_column(text: &str, offset: usize, len: usize) -> usize {
    let start = floor_char(text, offset);
    let end = floor_char(text, offset + len);
    let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
    let before = text[line_start..start].chars().count();
    before + text[start..end].chars().count() / 2
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

    fn pointed(start: usize, end: usize) -> Pointed {
        Pointed {
            start,
            end,
            room: 0,
        }
    }

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
        let w = Window::of(&text, &[pointed(at, at + 6)], Fit::LONG_LINES);
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
        let w = Window::of(text, &[pointed(22, 30)], Fit::LONG_LINES);
        assert_eq!(w.text, text);
        assert_eq!(w.map(22), 22);
    }
}
