//! Reading the data: the key, the feature and category columns, with the
//! line of every record, rejecting what is not data at its location.
//!
//! Storage is columnar and compact, because customer files run to millions
//! of records: each numeric column is plain `f64` values with a separate
//! missing mask, keys are kept once in one text buffer, and records are
//! read as raw bytes, only the fields the recipe uses being decoded. A
//! million records of 16 features take 16 bytes per value less than half
//! of what one boxed optional value per field would.

use super::blocks;
use super::error::{Place, RunError};
use crate::check::probe::{is_blank, number_help, parse_number_in, DecimalMark};
use crate::csv_lines::LineReader;
use crate::plan::{Coder, FeatureKind};
use crate::scale::postgres::{DbError, Target};
use crate::scale::source::{Class, Source};
use rayon::prelude::*;
use std::path::Path;

/// The columns a plan uses, read from the file.
#[derive(Debug, Clone)]
pub struct Table {
    pub keys: Keys,
    /// 1-based line where each record starts.
    pub lines: Vec<u64>,
    /// One column per numeric column asked for.
    pub numeric: Vec<NumericColumn>,
    /// The 1-based field number of each numeric column, for messages.
    pub fields: Vec<usize>,
    /// The 1-based field number of each text column, for messages.
    pub text_fields: Vec<usize>,
    /// One vector per text column asked for, spaces trimmed
    /// ([`crate::text::trim_spaces`]).
    pub text: Vec<Vec<String>>,
    /// For a table or a query on a connection, which has no file to hash:
    /// the SHA-256 of the values read, in key order (each value's text
    /// then the byte 0x1F, NULL as the byte 0x1E alone, each row ended by
    /// a line feed), so that a rerun can tell whether the data changed.
    pub digest: Option<String>,
    /// For a table or a query on a connection: where the connection led,
    /// in words, without its password (for the run record).
    pub target: Option<String>,
}

/// Every record's key, in one buffer.
#[derive(Debug, Clone, Default)]
pub struct Keys {
    text: String,
    /// End of each key in `text`; key `i` starts where key `i - 1` ends.
    ends: Vec<usize>,
}

impl Keys {
    pub fn push(&mut self, key: &str) {
        self.text.push_str(key);
        self.ends.push(self.text.len());
    }

    pub fn get(&self, i: usize) -> &str {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.text[start..self.ends[i]]
    }

    pub fn len(&self) -> usize {
        self.ends.len()
    }

    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }

    pub fn iter(&self) -> impl Iterator<Item = &str> + '_ {
        (0..self.len()).map(|i| self.get(i))
    }

    /// The first key, in record order, that an earlier record already has:
    /// (its record, the earlier record). Sorts record numbers by key
    /// (O(n log n), 4 bytes a record) rather than holding a hash set of
    /// every key.
    fn first_repeat(&self) -> Option<(usize, usize)> {
        let mut order: Vec<u32> = (0..self.len() as u32).collect();
        order.par_sort_unstable_by(|&a, &b| {
            self.get(a as usize)
                .cmp(self.get(b as usize))
                .then(a.cmp(&b))
        });
        order
            .windows(2)
            .filter(|w| self.get(w[0] as usize) == self.get(w[1] as usize))
            // Within a run of equal keys the pairs come in record order, so
            // the run's first pair names its first two records.
            .map(|w| (w[1] as usize, w[0] as usize))
            .fold(
                None,
                |best: Option<(usize, usize)>, (later, first)| match best {
                    Some((b, _)) if b <= later => best,
                    _ => Some((later, first)),
                },
            )
    }
}

/// A numeric column: values, and which are missing (their value is 0).
#[derive(Debug, Clone, Default)]
pub struct NumericColumn {
    values: Vec<f64>,
    missing: Vec<bool>,
}

impl NumericColumn {
    pub fn push(&mut self, v: Option<f64>) {
        self.values.push(v.unwrap_or(0.0));
        self.missing.push(v.is_none());
    }

    pub fn get(&self, i: usize) -> Option<f64> {
        (!self.missing[i]).then(|| self.values[i])
    }

    pub fn len(&self) -> usize {
        self.values.len()
    }

    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    pub fn iter(&self) -> impl Iterator<Item = Option<f64>> + '_ {
        (0..self.len()).map(|i| self.get(i))
    }
}

/// What to read from a file.
pub struct Columns<'a> {
    /// The key column; `None` keys each record by its line in the file
    /// (`input ... no key`).
    pub key: Option<&'a str>,
    pub numeric: &'a [String],
    /// How the first numeric columns are coded (an ordered category or
    /// a flag read through its levels); the rest are numbers.
    pub kinds: &'a [FeatureKind],
    pub text: &'a [String],
    /// How the numeric columns write their decimals.
    pub decimal: DecimalMark,
}

/// A CSV file opened for reading, with its header.
pub(crate) struct Opened<R = std::fs::File> {
    pub reader: LineReader<std::io::BufReader<R>>,
    pub header: csv::StringRecord,
}

impl Opened {
    /// Opens `path` (shown as `shown` in messages) and reads its header.
    pub fn new(path: &Path, shown: &str, separator: char) -> Result<Opened, RunError> {
        let file = std::fs::File::open(path).map_err(|e| RunError::Unreadable {
            file: shown.to_string(),
            reason: e.to_string(),
        })?;
        Opened::from_reader(file, shown, separator)
    }
}

impl<R: std::io::Read> Opened<R> {
    /// Reads the header of CSV text from `input`, shown as `shown`.
    pub fn from_reader(input: R, shown: &str, separator: char) -> Result<Opened<R>, RunError> {
        let mut builder = csv::ReaderBuilder::new();
        builder.delimiter(separator as u8);
        let mut reader = LineReader::new(&builder, std::io::BufReader::new(input));
        let header = match reader.headers() {
            Ok(header) => header.clone(),
            Err(e) => {
                let line = reader.line_of(&e);
                return Err(malformed(shown, &e, line));
            }
        };
        // A name given twice would silently mean its first column.
        for (j, h) in header.iter().enumerate() {
            let h = h.trim();
            if let Some(first) = header
                .iter()
                .take(j)
                .position(|e| !h.is_empty() && e.trim() == h)
            {
                return Err(RunError::Malformed {
                    file: shown.to_string(),
                    line: 1,
                    reason: format!(
                        "the header names `{}` twice (fields {} and {}); rename one of them",
                        crate::check::clipped(h, 60),
                        first + 1,
                        j + 1
                    ),
                });
            }
        }
        Ok(Opened { reader, header })
    }

    /// The 0-based field of a column, by its trimmed header name.
    pub fn position(&self, name: &str) -> Option<usize> {
        self.header.iter().position(|h| h.trim() == name)
    }
}

/// Reads `path` (shown as `shown` in messages). Keys must be present and
/// unique; numeric fields must be blank or finite numbers.
pub fn load(
    path: &Path,
    shown: &str,
    separator: char,
    cols: &Columns<'_>,
) -> Result<Table, RunError> {
    if crate::parquet::is_parquet(path) {
        return load_parquet(path, shown, cols);
    }
    read_table(path, shown, separator, cols)
}

/// Reads the columns a recipe uses from a table or a query on a
/// connection, in key order ([`crate::scale::source`]), streamed row by
/// row in one read-only transaction. Each row is decoded as the same
/// record in CSV would be (every value arrives as text, NULL blank), so a
/// table and a file of the same records, in the same order, load the
/// same; a record's line is its place in key order, as in that CSV.
/// `env` reads a variable (the process's own in a run).
pub fn load_source(
    source: &Source,
    cols: &Columns<'_>,
    env: &dyn Fn(&str) -> Option<String>,
) -> Result<Table, RunError> {
    use sha2::Digest;
    let shown = source.describe();
    let failed = |e: DbError| RunError::Database {
        reason: e.to_string(),
    };
    let target = Target::resolve(&source.connection, env).map_err(failed)?;
    let mut db = target.connect().map_err(failed)?;
    let typed = db.columns(source).map_err(failed)?;
    let mut names: Vec<&str> = Vec::new();
    for name in (cols.key.iter().copied())
        .chain(cols.numeric.iter().map(String::as_str))
        .chain(cols.text.iter().map(String::as_str))
    {
        match typed.iter().find(|(n, _)| n == name) {
            None => {
                return Err(RunError::ColumnGone {
                    file: shown,
                    column: name.to_string(),
                })
            }
            Some((_, Class::Other(what))) => {
                return Err(RunError::Database {
                    reason: format!(
                        "column `{name}` of {shown} holds {what}, which assort does not read"
                    ),
                })
            }
            Some(_) if names.contains(&name) => {}
            Some(_) => names.push(name),
        }
    }
    let header = csv::StringRecord::from(names.clone());
    let located = locate(&header, &shown, cols)?;
    let decoder = Decoder::new(&shown, &header, &located, cols);
    let key = cols.key.and_then(|k| typed.iter().find(|(n, _)| n == k));
    let sql = source.select_text(&names, key.map(|(k, c)| (k.as_str(), c)), None);
    let mut rows = blocks::Decode::start(&decoder);
    let mut record = csv::ByteRecord::new();
    let mut line = 1;
    let mut hasher = sha2::Sha256::new();
    db.each_row(&sql, &format!("reading {shown}"), |row| {
        line += 1;
        record.clear();
        for v in row {
            record.push_field(v.unwrap_or("").as_bytes());
            match v {
                Some(v) => {
                    hasher.update(v.as_bytes());
                    hasher.update(b"\x1f");
                }
                None => hasher.update(b"\x1e"),
            }
        }
        hasher.update(b"\n");
        blocks::Decode::record(&decoder, &mut rows, &record, line)
    })
    .map_err(failed)??;
    let mut table = Table::for_columns(&located);
    table.digest = Some(crate::text::hex(&hasher.finalize()));
    table.target = Some(target.describe());
    table.append(
        vec![blocks::Piece {
            out: rows,
            bytes: 0,
            fault: None,
        }],
        0,
    )?;
    no_repeated_key(&table, &header, located.0, &shown)?;
    Ok(table)
}

/// Reads the columns a recipe uses from a Parquet file, each column on
/// its own thread, into the table the same data in CSV would give (see
/// [`crate::parquet`]): a record's line is its place in that CSV.
fn load_parquet(path: &Path, shown: &str, cols: &Columns<'_>) -> Result<Table, RunError> {
    use crate::parquet::{self as pq, As, Column, ReadError};
    let unreadable = |reason: String| RunError::Unreadable {
        file: shown.to_string(),
        reason,
    };
    let schema = pq::schema(path).map_err(|e| unreadable(pq::words(&e)))?;
    let header = csv::StringRecord::from(schema.names.clone());
    let (key_at, num_at, text_at) = locate(&header, shown, cols)?;
    let coded = |f: usize| cols.kinds.get(f).filter(|k| !k.is_number());
    // Ordered categories and flags are read as text, then coded.
    let as_read = |f: usize| coded(f).map_or(As::Numbers, |_| As::Texts);
    let wanted: Vec<(usize, As)> = (key_at.iter().map(|&k| (k, As::Texts)))
        .chain(num_at.iter().enumerate().map(|(f, &a)| (a, as_read(f))))
        .chain(text_at.iter().map(|&a| (a, As::Texts)))
        .collect();
    let place = |at: usize, record: usize| Place::of_record(shown, &schema.names, at, record);
    let mut read: Vec<Column> = wanted
        .par_iter()
        .map(|w| pq::read(path, std::slice::from_ref(w), None).map(|mut c| c.remove(0)))
        .collect::<Result<Vec<Column>, ReadError>>()
        .map_err(|e| read_error(e, &place, shown))?;
    let n = schema.records;
    let texts = |c: Column| match c {
        Column::Texts(t) => t,
        Column::Numbers(_) => Vec::new(),
    };
    let keys: Option<Vec<Option<String>>> = key_at.map(|_| texts(read.remove(0)));
    let mut table = Table {
        fields: num_at.iter().map(|i| i + 1).collect(),
        text_fields: text_at.iter().map(|i| i + 1).collect(),
        keys: Keys::default(),
        lines: (0..n as u64).map(|r| r + 2).collect(),
        numeric: Vec::new(),
        text: Vec::new(),
        digest: None,
        target: None,
    };
    for (i, line) in table.lines.iter().enumerate() {
        match (&keys, key_at) {
            (Some(k), Some(at)) => match k.get(i).cloned().flatten() {
                Some(key) if !is_blank(&key) => table.keys.push(&key),
                _ => {
                    return Err(RunError::BlankKey {
                        place: place(at, i),
                    })
                }
            },
            _ => table.keys.push(&line.to_string()),
        }
    }
    for (f, c) in read.drain(..num_at.len()).enumerate() {
        let at = num_at[f];
        table
            .numeric
            .push(numeric_column(c, coded(f), |i| place(at, i))?);
    }
    for c in read {
        let values = texts(c).into_iter();
        table.text.push(
            values
                .map(|t| crate::text::trim_spaces(t.as_deref().unwrap_or("")).to_string())
                .collect(),
        );
    }
    no_repeated_key(&table, &header, key_at, shown)?;
    Ok(table)
}

/// A Parquet reading problem as a run error: a value that is not a
/// number at its `place`, anything else as the file being unreadable.
pub(crate) fn read_error(
    e: crate::parquet::ReadError,
    place: &impl Fn(usize, usize) -> Place,
    shown: &str,
) -> RunError {
    match e {
        crate::parquet::ReadError::NotANumber {
            column,
            record,
            found,
        } => RunError::NotANumber {
            place: place(column, record),
            help: number_help(&found, DecimalMark::Point),
            found: crate::check::clipped(found.trim(), 60),
        },
        other => RunError::Unreadable {
            file: shown.to_string(),
            reason: crate::parquet::words(&other),
        },
    }
}

/// A Parquet column read for a numeric feature: numbers as they are, or
/// an ordered category's or a flag's texts coded (a value that is no
/// level is an error at `place` of its record).
fn numeric_column(
    column: crate::parquet::Column,
    kind: Option<&FeatureKind>,
    place: impl Fn(usize) -> Place,
) -> Result<NumericColumn, RunError> {
    use crate::parquet::Column;
    let mut col = NumericColumn::default();
    match (column, kind) {
        (Column::Numbers(v), _) => v.into_iter().for_each(|x| col.push(x)),
        (Column::Texts(t), Some(kind)) => {
            let coder = kind.coder();
            for (i, text) in t.iter().enumerate() {
                match text.as_deref().filter(|t| !is_blank(t)) {
                    None => col.push(None),
                    Some(text) => col.push(Some(
                        coder
                            .code(text)
                            .ok_or_else(|| not_a_level(kind, place(i), text))?,
                    )),
                }
            }
        }
        (Column::Texts(_), None) => {}
    }
    Ok(col)
}

/// Reads the CSV file at `path`: its header through the `csv` crate,
/// then the records after it in parallel blocks ([`blocks`]).
fn read_table(
    path: &Path,
    shown: &str,
    separator: char,
    cols: &Columns<'_>,
) -> Result<Table, RunError> {
    let Opened { reader, header } = Opened::new(path, shown, separator)?;
    let located = locate(&header, shown, cols)?;
    let key_at = located.0;
    let mut table = Table::for_columns(&located);
    let decoder = Decoder::new(shown, &header, &located, cols);
    let syntax = blocks::Syntax {
        separator: separator as u8,
        fields: header.len(),
        shown,
    };
    let unreadable = |e: std::io::Error| RunError::Unreadable {
        file: shown.to_string(),
        reason: e.to_string(),
    };
    // The file's size, to make room for its records at once rather than
    // growing (and copying) every column as they come.
    let mut file = std::fs::File::open(path).map_err(unreadable)?;
    let size = file.metadata().map_or(0, |m| m.len());
    let mut take = |pieces: Vec<blocks::Piece<Rows>>| table.append(pieces, size);
    // Read again from the start: the header's own bytes (for the lines
    // they end), then the records.
    let mut head = vec![0; reader.position().byte() as usize];
    std::io::Read::read_exact(&mut file, &mut head).map_err(unreadable)?;
    blocks::read(file, &head, &syntax, &decoder, &mut take)?;
    no_repeated_key(&table, &header, key_at, shown)?;
    Ok(table)
}

/// Records decoded together: their numbers (`missing` marks a blank),
/// keys, lines and text fields by column.
struct Rows {
    values: Vec<f64>,
    missing: Vec<bool>,
    keys: Keys,
    lines: Vec<u64>,
    texts: Vec<Vec<String>>,
}

impl Table {
    /// The same records ordered by their keys, byte by byte (keys are
    /// unique, so the order is total): how `sample ... by key` recipes
    /// read every route, so that nothing in them depends on the order the
    /// records came in. Each record keeps its line. O(n log n).
    pub fn in_key_order(&self) -> Table {
        let mut order: Vec<usize> = (0..self.keys.len()).collect();
        order.par_sort_unstable_by(|&a, &b| self.keys.get(a).cmp(self.keys.get(b)).then(a.cmp(&b)));
        let mut keys = Keys::default();
        order.iter().for_each(|&i| keys.push(self.keys.get(i)));
        Table {
            keys,
            lines: order.iter().map(|&i| self.lines[i]).collect(),
            numeric: (self.numeric.par_iter())
                .map(|c| NumericColumn {
                    values: order.iter().map(|&i| c.values[i]).collect(),
                    missing: order.iter().map(|&i| c.missing[i]).collect(),
                })
                .collect(),
            fields: self.fields.clone(),
            text_fields: self.text_fields.clone(),
            text: (self.text.par_iter())
                .map(|t| order.iter().map(|&i| t[i].clone()).collect())
                .collect(),
            digest: self.digest.clone(),
            target: self.target.clone(),
        }
    }

    /// An empty table of the columns `located` in a header.
    fn for_columns((_, num_at, text_at): &Located) -> Table {
        Table {
            fields: num_at.iter().map(|i| i + 1).collect(),
            text_fields: text_at.iter().map(|i| i + 1).collect(),
            keys: Keys::default(),
            lines: Vec::new(),
            numeric: vec![NumericColumn::default(); num_at.len()],
            text: vec![Vec::new(); text_at.len()],
            digest: None,
            target: None,
        }
    }

    /// Appends the pieces' records in order; the first problem in record
    /// order (a piece's own fault after its records). The first pieces
    /// of a file of `size` bytes make room for as many records as the
    /// file holds at their density.
    fn append(&mut self, pieces: Vec<blocks::Piece<Rows>>, size: u64) -> Result<(), RunError> {
        let width = self.numeric.len();
        if self.lines.is_empty() {
            let records: usize = pieces.iter().map(|p| p.out.lines.len()).sum();
            let bytes: usize = pieces.iter().map(|p| p.bytes).sum();
            if bytes > 0 {
                let room = (records as f64 * size as f64 / bytes as f64 * 1.02) as usize;
                self.reserve(room);
            }
        }
        for piece in pieces {
            let rows = piece.out;
            self.numeric
                .par_iter_mut()
                .enumerate()
                .for_each(|(f, col)| {
                    let values = rows.values.iter().skip(f).step_by(width);
                    let missing = rows.missing.iter().skip(f).step_by(width);
                    col.values.extend(values);
                    col.missing.extend(missing);
                });
            for (col, texts) in self.text.iter_mut().zip(rows.texts) {
                col.extend(texts);
            }
            for key in rows.keys.iter() {
                self.keys.push(key);
            }
            self.lines.extend(rows.lines);
            if let Some(e) = piece.fault {
                return Err(e);
            }
        }
        Ok(())
    }

    fn reserve(&mut self, records: usize) {
        for col in &mut self.numeric {
            col.values.reserve(records);
            col.missing.reserve(records);
        }
        self.text.iter_mut().for_each(|t| t.reserve(records));
        self.lines.reserve(records);
        self.keys.ends.reserve(records);
    }
}

impl blocks::Decode for Decoder<'_> {
    type Out = Rows;

    fn start(&self) -> Rows {
        Rows {
            values: Vec::new(),
            missing: Vec::new(),
            keys: Keys::default(),
            lines: Vec::new(),
            texts: vec![Vec::new(); self.text_at.len()],
        }
    }

    fn record(&self, rows: &mut Rows, record: &csv::ByteRecord, line: u64) -> Result<(), RunError> {
        let at = rows.values.len();
        rows.values.resize(at + self.num_at.len(), 0.0);
        rows.missing.resize(at + self.num_at.len(), false);
        let decoded = self.decode(
            record,
            line,
            &mut rows.values[at..],
            &mut rows.missing[at..],
        );
        let Decoded { key, texts, line } = match decoded {
            Ok(d) => d,
            Err(e) => {
                rows.values.truncate(at);
                rows.missing.truncate(at);
                return Err(e);
            }
        };
        match key {
            Some(key) => rows.keys.push(key),
            None => rows.keys.push(&line.to_string()),
        }
        rows.lines.push(line);
        for (col, t) in rows.texts.iter_mut().zip(texts) {
            col.push(t);
        }
        Ok(())
    }
}

/// Where the key (none with `no key`), the numeric and the text columns
/// are in the header.
type Located = (Option<usize>, Vec<usize>, Vec<usize>);

/// Where the key, the numeric and the text columns are in the header.
fn locate(
    header: &csv::StringRecord,
    shown: &str,
    cols: &Columns<'_>,
) -> Result<Located, RunError> {
    let index_of = |name: &str| {
        header
            .iter()
            .position(|h| h.trim() == name)
            .ok_or_else(|| RunError::ColumnGone {
                file: shown.to_string(),
                column: name.to_string(),
            })
    };
    let key_at = cols.key.map(index_of).transpose()?;
    let num_at = cols
        .numeric
        .iter()
        .map(|c| index_of(c))
        .collect::<Result<Vec<_>, _>>()?;
    let text_at = cols
        .text
        .iter()
        .map(|c| index_of(c))
        .collect::<Result<Vec<_>, _>>()?;
    Ok((key_at, num_at, text_at))
}

/// Refuses a key that comes twice, at the later line, naming the first.
fn no_repeated_key(
    table: &Table,
    header: &csv::StringRecord,
    key_at: Option<usize>,
    shown: &str,
) -> Result<(), RunError> {
    // Line numbers never repeat.
    let Some(key_at) = key_at else {
        return Ok(());
    };
    match table.keys.first_repeat() {
        Some((later, first)) => Err(RunError::DuplicateKey {
            place: Place {
                file: shown.to_string(),
                line: table.lines[later],
                column: key_at + 1,
                name: header.get(key_at).unwrap_or("").trim().to_string(),
            },
            key: table.keys.get(later).to_string(),
            first_line: table.lines[first],
        }),
        None => Ok(()),
    }
}

/// One record's fields, decoded: its key, text fields and line (numbers go
/// to the batch's buffers).
struct Decoded<'r> {
    /// The key as written; none with `no key` (the line is the key).
    key: Option<&'r str>,
    texts: Vec<String>,
    line: u64,
}

/// What decoding a record needs to know about the file.
struct Decoder<'a> {
    shown: &'a str,
    header: &'a csv::StringRecord,
    key_at: Option<usize>,
    num_at: &'a [usize],
    text_at: &'a [usize],
    decimal: DecimalMark,
    kinds: &'a [FeatureKind],
    /// Per numeric column, how its values are coded (laid out once).
    coders: Vec<Coder>,
}

impl<'a> Decoder<'a> {
    /// Decodes the columns `located` in `header` as `cols` asks.
    fn new(
        shown: &'a str,
        header: &'a csv::StringRecord,
        (key_at, num_at, text_at): &'a Located,
        cols: &Columns<'a>,
    ) -> Decoder<'a> {
        Decoder {
            shown,
            header,
            key_at: *key_at,
            num_at,
            text_at,
            decimal: cols.decimal,
            kinds: cols.kinds,
            coders: (0..num_at.len())
                .map(|f| cols.kinds.get(f).map_or(Coder::Number, FeatureKind::coder))
                .collect(),
        }
    }
    /// Decodes the fields the recipe uses, checking them in field order
    /// (key, numbers, texts) so the first problem is the one a person
    /// reading the line would meet first.
    fn decode<'r>(
        &self,
        record: &'r csv::ByteRecord,
        line: u64,
        values: &mut [f64],
        missing: &mut [bool],
    ) -> Result<Decoded<'r>, RunError> {
        let place = |at: usize| Place {
            file: self.shown.to_string(),
            line,
            column: at + 1,
            name: self.header.get(at).unwrap_or("").trim().to_string(),
        };
        let field = |at: usize| -> Result<&str, RunError> {
            std::str::from_utf8(record.get(at).unwrap_or(b"")).map_err(|_| RunError::Malformed {
                file: self.shown.to_string(),
                line,
                reason: format!(
                    "field {} (`{}`) is not UTF-8 text; {}",
                    at + 1,
                    self.header.get(at).unwrap_or("").trim(),
                    crate::check::NOT_UTF8_HELP
                ),
            })
        };
        let key = match self.key_at {
            Some(at) => {
                // Kept exactly as written (nothing trimmed), so every file
                // assort writes gives the input's keys back; only a key of
                // white space alone is refused, as blank.
                let key = field(at)?;
                if is_blank(key) {
                    return Err(RunError::BlankKey { place: place(at) });
                }
                Some(key)
            }
            None => None,
        };
        for (f, &at) in self.num_at.iter().enumerate() {
            let text = field(at)?;
            if is_blank(text) {
                missing[f] = true;
                continue;
            }
            missing[f] = false;
            values[f] = match &self.coders[f] {
                Coder::Number => {
                    parse_number_in(text, self.decimal).ok_or_else(|| RunError::NotANumber {
                        place: place(at),
                        found: crate::check::clipped(text.trim(), 60),
                        help: number_help(text, self.decimal),
                    })?
                }
                // A coder other than a number's comes from `kinds[f]`.
                coder => coder
                    .code(text)
                    .ok_or_else(|| not_a_level(&self.kinds[f], place(at), text))?,
            };
        }
        let texts = self
            .text_at
            .iter()
            .map(|&at| Ok(crate::text::trim_spaces(field(at)?).to_string()))
            .collect::<Result<Vec<_>, RunError>>()?;
        Ok(Decoded { key, texts, line })
    }
}

/// A value of an ordered category or a flag that is none of its levels,
/// with the levels and, where one is spelt alike, the nearest.
pub(crate) fn not_a_level(kind: &FeatureKind, place: Place, text: &str) -> RunError {
    let (_, help) = crate::check::kinds::level_words(kind, &place.name, text);
    RunError::NotALevel {
        place,
        found: crate::check::clipped(text.trim(), 60),
        flag: *kind == FeatureKind::Flag,
        help,
    }
}

/// A CSV reading error, at `line`, as a located run error.
pub(crate) fn malformed(file: &str, e: &csv::Error, line: u64) -> RunError {
    let reason = match e.kind() {
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => {
            format!("found {len} fields, expected {expected_len} as in the header")
        }
        csv::ErrorKind::Utf8 { .. } => {
            format!("the text is not UTF-8; {}", crate::check::NOT_UTF8_HELP)
        }
        csv::ErrorKind::Io(io) => {
            return RunError::Unreadable {
                file: file.to_string(),
                reason: io.to_string(),
            }
        }
        _ => e.to_string(),
    };
    RunError::Malformed {
        file: file.to_string(),
        line,
        reason,
    }
}

/// SHA-256 of a file's bytes, or `None` when it cannot be read. Read in
/// blocks, so a large data file is never held whole.
/// (A folder of Parquet parts: the digest of its parts' `name digest`
/// lines, see docs/language.md.)
pub fn file_sha256(path: &std::path::Path) -> Option<String> {
    use sha2::Digest;
    if path.is_dir() {
        // A folder of parts: the digest of its parts' names and digests,
        // one `name digest` line each, in the order they are read.
        let mut hasher = sha2::Sha256::new();
        for part in crate::parquet::parts(path).ok()? {
            let name = part.file_name()?.to_string_lossy().into_owned();
            hasher.update(format!("{name} {}\n", file_sha256(&part)?));
        }
        return Some(crate::text::hex(&hasher.finalize()));
    }
    use std::io::Read;
    let mut file = std::fs::File::open(path).ok()?;
    let mut hasher = sha2::Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let got = file.read(&mut buf).ok()?;
        if got == 0 {
            break;
        }
        hasher.update(&buf[..got]);
    }
    Some(crate::text::hex(&hasher.finalize()))
}

/// A note for each text column (`columns`, as read into `table.text`) with
/// values that keep white space other than a space at an end (see
/// [`crate::text::trim_spaces`]): such a value is a level of its own, in
/// assort and in the database alike, which the analyst should know.
pub fn odd_space_notes(table: &Table, columns: &[String]) -> Vec<String> {
    let mut notes = Vec::new();
    for (values, column) in table.text.iter().zip(columns) {
        let mut odd = values
            .iter()
            .enumerate()
            .filter(|(_, v)| crate::text::odd_space_at_end(v));
        let Some((first, example)) = odd.next() else {
            continue;
        };
        let count = 1 + odd.count();
        notes.push(format!(
            "`{column}`: {} a tab or other white space besides a space at an end (first on line {}: {:?}); assort keeps it as part of the value, as a database's TRIM does, so such a value is a level of its own. Clean the data if it should not be",
            if count == 1 {
                "1 value has".to_string()
            } else {
                format!("{} values have", crate::text::thousands(count))
            },
            table.lines.get(first).copied().unwrap_or(0),
            example,
        ));
    }
    notes
}
