//! CSV syntax in parallel: a file's records after its header, read in
//! blocks of a few MiB and, where a block holds no quote character, split
//! at line ends into pieces that are parsed side by side.
//!
//! Without quotes a record cannot span a line end, so a piece that starts
//! after a line end starts a record, and parsing pieces apart gives the
//! records, fields and line numbers one sequential reader gives (each
//! piece's lines are counted from the file's lines before it). The first
//! block holding a `"` ends the parallel reading: from the start of that
//! block to the end of the file, one sequential reader takes over, as for
//! any quoted file. Time O(bytes / threads) for the syntax; memory one
//! block and its records.
//!
//! Records are handed on in file order, whatever the number of threads,
//! so the table read and the first problem reported never depend on it.
//!
//! Lines are counted from the bytes, as an editor shows them
//! ([`crate::csv_lines`]).

use super::error::RunError;
use crate::csv_lines::{line_ends, LineReader, Lines};
use csv::ByteRecord;
use rayon::prelude::*;
use std::io::Read;

/// Bytes read at a time.
const BLOCK: usize = 8 << 20;

/// What a piece's records become, decoded on the thread that parsed
/// them (so nothing a record allocates crosses threads but its result).
pub(super) trait Decode: Sync {
    /// The decoded records of one piece.
    type Out: Send;
    fn start(&self) -> Self::Out;
    /// Adds `record`, which starts on line `line` (1-based), to `out`; on
    /// a problem `out` is left as it was.
    fn record(&self, out: &mut Self::Out, record: &ByteRecord, line: u64) -> Result<(), RunError>;
}

/// One piece's decoded records, and the problem that ended it early,
/// after its last good record.
pub(super) struct Piece<T> {
    pub out: T,
    /// The bytes of the file it covers (0 when read one after another).
    pub bytes: usize,
    pub fault: Option<RunError>,
}

/// How records are read: the separator, the header's field count every
/// record must have, and the file as shown in messages.
pub(super) struct Syntax<'a> {
    pub separator: u8,
    pub fields: usize,
    pub shown: &'a str,
}

/// Reads every record of `file` from its current offset, which follows
/// the file's `head` (its header's bytes), handing them to `take` in file
/// order, a block's pieces at a time; stops at the first problem `take`
/// returns or a piece reports.
pub(super) fn read<D: Decode>(
    file: impl Read,
    head: &[u8],
    syntax: &Syntax<'_>,
    decode: &D,
    take: &mut dyn FnMut(Vec<Piece<D::Out>>) -> Result<(), RunError>,
) -> Result<(), RunError> {
    read_by(BLOCK, file, head, syntax, decode, take)
}

/// [`read`] with blocks of `block` bytes.
fn read_by<D: Decode>(
    block: usize,
    mut file: impl Read,
    head: &[u8],
    syntax: &Syntax<'_>,
    decode: &D,
    take: &mut dyn FnMut(Vec<Piece<D::Out>>) -> Result<(), RunError>,
) -> Result<(), RunError> {
    let mut pending: Vec<u8> = Vec::with_capacity(2 * block);
    let mut eof = top_up(&mut file, &mut pending, block, syntax.shown)?;
    // The head's line ends, its last `\r` told by the byte after it.
    let mut lines_before = crate::csv_lines::lines_before(head, pending.first().copied());
    loop {
        if memchr::memchr(b'"', &pending).is_some() {
            let rest = std::io::Cursor::new(pending).chain(file);
            return sequential(rest, lines_before, syntax, decode, take);
        }
        let end = match (eof, memchr::memrchr(b'\n', &pending)) {
            (true, _) => pending.len(),
            (false, Some(last)) => last + 1,
            // A block without a line end: records too long to split here.
            (false, None) => {
                let rest = std::io::Cursor::new(pending).chain(file);
                return sequential(rest, lines_before, syntax, decode, take);
            }
        };
        // Each piece with the line ends before it (pieces end after a
        // `\n`, so their counts add up).
        let mut pieces: Vec<(usize, usize, u64)> = Vec::new();
        for w in piece_starts(&pending[..end]).windows(2) {
            pieces.push((w[0], w[1], lines_before));
            lines_before += line_ends(&pending[w[0]..w[1]]);
        }
        let parsed: Vec<Piece<D::Out>> = pieces
            .par_iter()
            .map(|&(from, to, before)| parse(&pending[from..to], before, syntax, decode))
            .collect();
        take(parsed)?;
        pending.drain(..end);
        if eof {
            return Ok(());
        }
        eof = top_up(&mut file, &mut pending, block, syntax.shown)?;
    }
}

/// Reads a block more into `pending`, or to the end of the file (then
/// true).
fn top_up(
    file: &mut impl Read,
    pending: &mut Vec<u8>,
    block: usize,
    shown: &str,
) -> Result<bool, RunError> {
    let got = (file.take(block as u64).read_to_end(pending)).map_err(|e| RunError::Unreadable {
        file: shown.to_string(),
        reason: e.to_string(),
    })?;
    Ok(got < block)
}

/// Where the pieces of `text` (whole lines) start, and its end: about
/// four pieces per thread, each starting after a line end.
fn piece_starts(text: &[u8]) -> Vec<usize> {
    let count = 4 * rayon::current_num_threads().max(1);
    let step = text.len() / count + 1;
    let mut starts = vec![0];
    let mut at = step;
    while at < text.len() {
        match memchr::memchr(b'\n', &text[at..]) {
            Some(i) if at + i + 1 < text.len() => {
                starts.push(at + i + 1);
                at += i + 1 + step;
            }
            _ => break,
        }
    }
    starts.push(text.len());
    starts
}

/// The records of one piece of whole lines, decoded.
fn parse<D: Decode>(
    text: &[u8],
    lines_before: u64,
    syntax: &Syntax<'_>,
    decode: &D,
) -> Piece<D::Out> {
    let mut reader = builder(syntax).from_reader(text);
    let mut out = decode.start();
    let mut record = ByteRecord::new();
    let mut lines = Lines::default();
    let fault = loop {
        match reader.read_byte_record(&mut record) {
            Ok(false) => break None,
            Ok(true) => {
                let start = record.position().map_or(0, |p| p.byte() as usize);
                let line = lines_before + lines.of(text, start);
                if let Err(e) = fields_as_header(&record, line, syntax)
                    .and_then(|()| decode.record(&mut out, &record, line))
                {
                    break Some(e);
                }
            }
            Err(e) => {
                let start = e.position().map_or(0, |p| p.byte() as usize);
                let line = lines_before + lines.of(text, start);
                break Some(super::load::malformed(syntax.shown, &e, line));
            }
        }
    };
    Piece {
        out,
        bytes: text.len(),
        fault,
    }
}

/// Reads the rest of the records one after another (a quoted file, or a
/// block without a line end), a batch at a time, each batch decoded in
/// parallel; `input` starts after `lines_before` line ends.
fn sequential<R: Read, D: Decode>(
    input: R,
    lines_before: u64,
    syntax: &Syntax<'_>,
    decode: &D,
    take: &mut dyn FnMut(Vec<Piece<D::Out>>) -> Result<(), RunError>,
) -> Result<(), RunError> {
    let mut reader = LineReader::after(&builder(syntax), input, lines_before);
    let mut batch: Vec<(ByteRecord, u64)> = Vec::new();
    loop {
        let mut filled = 0;
        let mut fault = None;
        while filled < BATCH {
            if batch.len() == filled {
                batch.push((ByteRecord::new(), 0));
            }
            let (record, line) = &mut batch[filled];
            match reader.read_byte_record(record) {
                Ok(Some(at)) => {
                    *line = at;
                    if let Err(e) = fields_as_header(record, at, syntax) {
                        fault = Some(e);
                        break;
                    }
                    filled += 1;
                }
                Ok(None) => break,
                Err(e) => {
                    fault = Some(super::load::malformed(syntax.shown, &e, reader.line_of(&e)));
                    break;
                }
            }
        }
        let last = filled < BATCH;
        let mut pieces: Vec<Piece<D::Out>> = batch[..filled]
            .par_chunks(BATCH / 16)
            .map(|records| {
                let mut out = decode.start();
                let fault = records
                    .iter()
                    .find_map(|(r, line)| decode.record(&mut out, r, *line).err());
                Piece {
                    out,
                    bytes: 0,
                    fault,
                }
            })
            .collect();
        if let Some(e) = fault {
            pieces.push(Piece {
                out: decode.start(),
                bytes: 0,
                fault: Some(e),
            });
        }
        take(pieces)?;
        if last {
            return Ok(());
        }
    }
}

/// Records per batch when reading one after another.
const BATCH: usize = 8_192;

fn builder(syntax: &Syntax<'_>) -> csv::ReaderBuilder {
    let mut builder = csv::ReaderBuilder::new();
    builder
        .has_headers(false)
        .flexible(true)
        .delimiter(syntax.separator);
    builder
}

/// Refuses a record, at its line, whose field count is not the header's.
fn fields_as_header(record: &ByteRecord, line: u64, syntax: &Syntax<'_>) -> Result<(), RunError> {
    if record.len() == syntax.fields {
        return Ok(());
    }
    Err(RunError::Malformed {
        file: syntax.shown.to_string(),
        line,
        reason: format!(
            "found {} fields, expected {} as in the header",
            record.len(),
            syntax.fields
        ),
    })
}

#[cfg(test)]
mod tests {
    //! The block reader on seeded texts whose records, lines and first
    //! problem are known as they are written, for every block size.
    use super::{read_by, Decode, Piece, Syntax};
    use crate::run::error::RunError;
    use csv::ByteRecord;

    /// Records as (line, fields); a field `BAD` is refused, as a value
    /// that does not decode.
    struct Collect;

    type Seen = Vec<(u64, Vec<String>)>;

    impl Decode for Collect {
        type Out = Seen;
        fn start(&self) -> Seen {
            Vec::new()
        }
        fn record(&self, out: &mut Seen, r: &ByteRecord, line: u64) -> Result<(), RunError> {
            let fields: Vec<String> = r
                .iter()
                .map(|f| String::from_utf8_lossy(f).into())
                .collect();
            if fields.iter().any(|f| f == "BAD") {
                return Err(RunError::Malformed {
                    file: "t.csv".into(),
                    line,
                    reason: "bad".into(),
                });
            }
            out.push((line, fields));
            Ok(())
        }
    }

    fn block_reading(text: &str, block: usize) -> (Seen, Option<String>) {
        let mut reader = csv::ReaderBuilder::new().from_reader(text.as_bytes());
        let fields = reader.byte_headers().map_or(0, |h| h.len());
        let at = reader.position().byte() as usize;
        let syntax = Syntax {
            separator: b',',
            fields,
            shown: "t.csv",
        };
        let mut seen = Vec::new();
        let bytes = text.as_bytes();
        let mut take = |pieces: Vec<Piece<Seen>>| {
            for p in pieces {
                seen.extend(p.out);
                if let Some(e) = p.fault {
                    return Err(e);
                }
            }
            Ok(())
        };
        let fault = read_by(
            block,
            &bytes[at..],
            &bytes[..at],
            &syntax,
            &Collect,
            &mut take,
        )
        .err();
        (seen, fault.map(|e| e.to_string()))
    }

    /// A seeded text of `lines` records of three fields with the odd
    /// blank line, `\r\n` and lone `\r` ends, short records, a refused
    /// value, and (when `quotes`) a quoted field spanning lines; with what
    /// a reader must find: the records and lines (counted as an editor
    /// shows them) up to the first problem, and that problem.
    fn text(seed: u64, lines: usize, quotes: bool) -> (String, (Seen, Option<String>)) {
        let mut state = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let mut next = move |m: u64| {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state % m
        };
        let header_end = ["\n", "\r\n", "\r"][next(3) as usize];
        let mut t = format!("key,x,y{header_end}");
        let (mut line, mut seen, mut fault) = (2u64, Vec::new(), None);
        let expect = |seen: &mut Seen, fault: &mut Option<String>, line, fields: &[&str]| {
            if fault.is_some() {
                return;
            }
            let problem = |reason: String| Some(format!("`t.csv` line {line}: {reason}"));
            if fields.len() != 3 {
                *fault = problem(format!(
                    "found {} fields, expected 3 as in the header",
                    fields.len()
                ));
            } else if fields.contains(&"BAD") {
                *fault = problem("bad".into());
            } else {
                seen.push((line, fields.iter().map(|f| f.to_string()).collect()));
            }
        };
        let mut last_end = header_end;
        for i in 0..lines {
            let end = ["\n", "\n", "\n", "\r\n", "\r"][next(5) as usize];
            let key = format!("k{i}");
            match next(60) {
                // After a `\r`, a `\n` would join it into one line end.
                0 if last_end == "\r" => t.push_str("\r\n"),
                0 => t.push_str(end),
                1 => {
                    t.push_str(&format!("{key},1{end}"));
                    expect(&mut seen, &mut fault, line, &[&key, "1"]);
                }
                2 => {
                    t.push_str(&format!("{key},BAD,2{end}"));
                    expect(&mut seen, &mut fault, line, &[&key, "BAD", "2"]);
                }
                3 if quotes => {
                    t.push_str(&format!("{key},\"a\nb\",3{end}"));
                    expect(&mut seen, &mut fault, line, &[&key, "a\nb", "3"]);
                    line += 1;
                }
                _ => {
                    let (x, y) = (next(1000).to_string(), next(7).to_string());
                    t.push_str(&format!("{key},{x},{y}{end}"));
                    expect(&mut seen, &mut fault, line, &[&key, &x, &y]);
                }
            }
            line += 1;
            last_end = end;
        }
        (t, (seen, fault))
    }

    #[test]
    fn blocks_read_what_one_reader_reads() {
        for seed in 0..40 {
            for quotes in [false, true] {
                let (t, expected) = text(seed, 300, quotes);
                for block in [8, 16, 37, 64, 200, 1 << 20] {
                    assert_eq!(
                        block_reading(&t, block),
                        expected,
                        "seed {seed}, block {block}"
                    );
                }
            }
        }
    }

    #[test]
    fn clean_files_are_read_to_the_end_in_many_blocks() {
        let mut t = String::from("key,x,y\n");
        for i in 0..5000 {
            t.push_str(&format!("k{i},{i},{}\n", i % 7));
        }
        let (seen, fault) = block_reading(&t, 256);
        assert_eq!(fault, None);
        assert_eq!(seen.len(), 5000);
        assert_eq!(
            seen[4999],
            (5001, vec!["k4999".into(), "4999".into(), "1".into()])
        );
    }
}
