//! Byte spans to editor positions, and diagnostics to the protocol's: the
//! one place where assort's diagnostics meet the editor's coordinates.

use crate::check::diagnostic::Problem;
use lsp_types::{Diagnostic, DiagnosticSeverity, NumberOrString, Position, Range};
use miette::Diagnostic as _;

/// Line starts of a text, to turn byte offsets into positions with UTF-16
/// columns (the protocol's default) and back.
pub struct LineIndex<'a> {
    text: &'a str,
    starts: Vec<usize>,
}

impl<'a> LineIndex<'a> {
    pub fn new(text: &'a str) -> LineIndex<'a> {
        let mut starts = vec![0];
        starts.extend(text.match_indices('\n').map(|(i, _)| i + 1));
        LineIndex { text, starts }
    }

    pub fn position(&self, offset: usize) -> Position {
        let offset = offset.min(self.text.len());
        let line = self.starts.partition_point(|&s| s <= offset) - 1;
        let start = self.starts[line];
        let col: usize = self
            .text
            .get(start..offset)
            .map_or(0, |s| s.encode_utf16().count());
        Position::new(line as u32, col as u32)
    }

    pub fn range(&self, start: usize, end: usize) -> Range {
        Range::new(self.position(start), self.position(end))
    }

    /// The byte offset of a position (clamped to the text).
    pub fn offset(&self, p: Position) -> usize {
        let Some(&start) = self.starts.get(p.line as usize) else {
            return self.text.len();
        };
        let end = self
            .starts
            .get(p.line as usize + 1)
            .copied()
            .unwrap_or(self.text.len());
        let line = &self.text[start..end];
        let mut units = 0;
        for (i, c) in line.char_indices() {
            if units >= p.character as usize {
                return start + i;
            }
            units += c.len_utf16();
        }
        end
    }
}

/// A problem as the protocol's diagnostic: the first label's span as the
/// range, the message with its help line, the stable code.
pub fn diagnostic(p: &Problem, index: &LineIndex<'_>) -> Diagnostic {
    let (start, end) = p
        .labels()
        .and_then(|mut l| l.next())
        .map_or((0, 0), |l| (l.offset(), l.offset() + l.len()));
    let severity = if p.is_error() {
        DiagnosticSeverity::ERROR
    } else {
        DiagnosticSeverity::WARNING
    };
    use crate::check::shown::clip_quotes;
    let mut message = clip_quotes(&p.to_string());
    if let Some(help) = p.help() {
        message.push_str(&format!("\nhelp: {}", clip_quotes(&help.to_string())));
    }
    Diagnostic {
        range: index.range(start, end),
        severity: Some(severity),
        code: p.code().map(|c| NumberOrString::String(c.to_string())),
        source: Some("assort".into()),
        message,
        ..Default::default()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utf16_columns_count_wide_characters_twice() {
        let text = "a\n€😀x\n";
        let idx = LineIndex::new(text);
        let x = text.find('x').unwrap();
        assert_eq!(idx.position(x), Position::new(1, 3));
        assert_eq!(idx.offset(Position::new(1, 3)), x);
        assert_eq!(idx.position(0), Position::new(0, 0));
    }
}
