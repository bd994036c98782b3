//! Lines as a person sees them in an editor, for every message that names
//! a line of a CSV file and for keyless records, whose key is their line.
//!
//! A line ends at `\n`, at `\r\n` or at a `\r` alone. The `csv` crate's
//! record positions count only `\n`, and are taken before the blank lines
//! and the `\n` of a `\r\n` it skips: in a file saved with Windows line
//! ends every record would be named a line early, and after a blank line
//! too early by one per blank line. Here lines are counted from the bytes
//! themselves: [`LineReader`] keeps the bytes the `csv` reader has read
//! since the last record, so each record's first byte can be found.

use csv::{ByteRecord, StringRecord};
use std::cell::RefCell;
use std::io::Read;
use std::rc::Rc;

/// How many lines `text` ends: its `\n`s, and its `\r`s followed by
/// anything but `\n` (a `\r` at its end is left to what follows).
pub fn line_ends(text: &[u8]) -> u64 {
    memchr::memchr2_iter(b'\n', b'\r', text)
        .filter(|&i| text[i] == b'\n' || text.get(i + 1).is_some_and(|&b| b != b'\n'))
        .count() as u64
}

/// The line ends in `head` (the start of a file) when `next` is the byte
/// after it.
pub fn lines_before(head: &[u8], next: Option<u8>) -> u64 {
    line_ends(head) + u64::from(head.last() == Some(&b'\r') && next != Some(b'\n'))
}

/// Lines counted through a text as its records are met, in order.
#[derive(Debug, Default)]
pub struct Lines {
    /// Where counting stopped, and the line ends before it.
    pub at: usize,
    ends: u64,
}

impl Lines {
    /// The 1-based line of the record the `csv` reader placed at `start`
    /// in `text`: the line of its first byte that ends no line.
    pub fn of(&mut self, text: &[u8], start: usize) -> u64 {
        let first = (start..text.len())
            .find(|&i| !matches!(text[i], b'\n' | b'\r'))
            .unwrap_or(text.len());
        if first > self.at {
            self.ends += line_ends(&text[self.at..first]);
            // A `\r` just before `first` ends a line (what follows is no
            // `\n`), though `line_ends` could not see past it.
            if first < text.len() && text[first - 1] == b'\r' {
                self.ends += 1;
            }
            self.at = first;
        }
        self.ends + 1
    }

    /// Forgets the first `n` bytes of the text (they are counted).
    fn shift(&mut self, n: usize) {
        self.at -= n;
    }
}

/// Input that keeps a copy of the bytes read, while `keeping`.
struct Tape<R> {
    input: R,
    kept: Rc<RefCell<Vec<u8>>>,
    keeping: Rc<std::cell::Cell<bool>>,
}

impl<R: Read> Read for Tape<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.input.read(buf)?;
        if self.keeping.get() {
            self.kept.borrow_mut().extend_from_slice(&buf[..n]);
        }
        Ok(n)
    }
}

/// A `csv` reader that tells each record's line as an editor shows it.
/// Memory: the `csv` reader's buffer and the bytes of the records since
/// the last trim, at most [`KEEP`] more.
pub struct LineReader<R> {
    reader: csv::Reader<Tape<R>>,
    kept: Rc<RefCell<Vec<u8>>>,
    keeping: Rc<std::cell::Cell<bool>>,
    /// The offset in the input of the first byte kept.
    base: u64,
    lines: Lines,
}

/// Bytes counted past before they are let go.
const KEEP: usize = 1 << 16;

impl<R: Read> LineReader<R> {
    /// Reads `input` as `builder` says, the lines counted from the start.
    pub fn new(builder: &csv::ReaderBuilder, input: R) -> LineReader<R> {
        LineReader::after(builder, input, 0)
    }

    /// Reads `input`, which starts after `lines_before` line ends of its
    /// file (see [`lines_before`]).
    pub fn after(builder: &csv::ReaderBuilder, input: R, lines_before: u64) -> LineReader<R> {
        let kept = Rc::new(RefCell::new(Vec::new()));
        let keeping = Rc::new(std::cell::Cell::new(true));
        let tape = Tape {
            input,
            kept: kept.clone(),
            keeping: keeping.clone(),
        };
        LineReader {
            reader: builder.from_reader(tape),
            kept,
            keeping,
            base: 0,
            lines: Lines {
                at: 0,
                ends: lines_before,
            },
        }
    }

    /// The header (read first if need be).
    pub fn headers(&mut self) -> csv::Result<&StringRecord> {
        self.reader.headers()
    }

    /// The next record and its line, or `None` at the end.
    pub fn read_record(&mut self, record: &mut StringRecord) -> csv::Result<Option<u64>> {
        match self.reader.read_record(record)? {
            true => Ok(Some(self.line_at(record.position()))),
            false => Ok(None),
        }
    }

    /// [`LineReader::read_record`] without decoding the text.
    pub fn read_byte_record(&mut self, record: &mut ByteRecord) -> csv::Result<Option<u64>> {
        match self.reader.read_byte_record(record)? {
            true => Ok(Some(self.line_at(record.position()))),
            false => Ok(None),
        }
    }

    /// The line a reading problem is at (its record's).
    pub fn line_of(&mut self, e: &csv::Error) -> u64 {
        self.line_at(e.position())
    }

    /// Counts the records left without their lines (nor keeping their
    /// bytes); the reader is at the end after, or at the problem.
    pub fn count_rest(&mut self) -> csv::Result<u64> {
        self.keeping.set(false);
        self.kept.borrow_mut().clear();
        let mut record = ByteRecord::new();
        let mut count = 0;
        while self.reader.read_byte_record(&mut record)? {
            count += 1;
        }
        Ok(count)
    }

    /// The position the `csv` reader has reached (bytes and records).
    pub fn position(&self) -> &csv::Position {
        self.reader.position()
    }

    fn line_at(&mut self, at: Option<&csv::Position>) -> u64 {
        let Some(at) = at else {
            return self.lines.ends + 1;
        };
        let kept = self.kept.borrow();
        let start = at.byte().saturating_sub(self.base) as usize;
        let line = self.lines.of(&kept, start.min(kept.len()));
        drop(kept);
        if self.lines.at > KEEP {
            let done = self.lines.at;
            self.kept.borrow_mut().drain(..done);
            self.base += done as u64;
            self.lines.shift(done);
        }
        line
    }
}

#[cfg(test)]
mod tests {
    use super::LineReader;

    fn lines(text: &str) -> Vec<(u64, String)> {
        let builder = csv::ReaderBuilder::new();
        let mut reader = LineReader::new(&builder, text.as_bytes());
        let _ = reader.headers();
        let mut record = csv::StringRecord::new();
        let mut out = Vec::new();
        while let Ok(Some(line)) = reader.read_record(&mut record) {
            out.push((line, record.get(0).unwrap_or("").to_string()));
        }
        out
    }

    #[test]
    fn lines_are_counted_as_an_editor_shows_them() {
        let expect = |v: &[(u64, &str)]| -> Vec<(u64, String)> {
            v.iter().map(|&(l, k)| (l, k.to_string())).collect()
        };
        // Windows line ends: the `csv` crate alone says 1, 2, 3.
        assert_eq!(
            lines("k,x\r\na,1\r\nb,2\r\nc,3\r\n"),
            expect(&[(2, "a"), (3, "b"), (4, "c")])
        );
        // Blank lines: the `csv` crate alone says 2 and 3.
        assert_eq!(lines("k,x\na,1\n\n\nb,2\n"), expect(&[(2, "a"), (5, "b")]));
        assert_eq!(
            lines("k,x\r\na,1\r\n\r\n\r\nb,2\r\n"),
            expect(&[(2, "a"), (5, "b")])
        );
        // Old Macintosh line ends, and a quoted line break.
        assert_eq!(lines("k,x\ra,1\r\rb,2\r"), expect(&[(2, "a"), (4, "b")]));
        assert_eq!(
            lines("k,x\n\"a\nb\",1\r\nc,3\n"),
            expect(&[(2, "a\nb"), (4, "c")])
        );
    }

    #[test]
    fn long_files_are_counted_to_the_end() {
        let mut text = String::from("k,x\r\n");
        for i in 0..20_000 {
            text.push_str(&format!("r{i},{i}\r\n"));
        }
        let read = lines(&text);
        assert_eq!(read.len(), 20_000);
        assert_eq!(read[19_999], (20_001, "r19999".to_string()));
    }
}
