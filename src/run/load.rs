//! Reading the data: the key, the feature and category columns, with the
//! line of every record, rejecting what is not data at its location.
//!
//! Storage is columnar and compact, because customer files run to millions
//! of records: each numeric column is plain `f64` values with a separate
//! missing mask, keys are kept once in one text buffer, and records are
//! read as raw bytes, only the fields the recipe uses being decoded. A
//! million records of 16 features take 16 bytes per value less than half
//! of what one boxed optional value per field would.

use super::error::{Place, RunError};
use crate::check::probe::{is_blank, number_help, parse_number_in, DecimalMark};
use crate::plan::{Coder, FeatureKind};
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
    pub reader: csv::Reader<std::io::BufReader<R>>,
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
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(separator as u8)
            .from_reader(std::io::BufReader::new(input));
        let header = reader.headers().map_err(|e| malformed(shown, &e))?.clone();
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
    read_table(Opened::new(path, shown, separator)?, shown, cols)
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
    let place = |at: usize, record: usize| Place {
        file: shown.to_string(),
        line: record as u64 + 2,
        column: at + 1,
        name: schema.names.get(at).cloned().unwrap_or_default(),
    };
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
fn read_error(
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

/// Reads CSV text from `input` (shown as `shown` in messages), as [`load`]
/// reads a file.
pub fn load_from<R: std::io::Read>(
    input: R,
    shown: &str,
    separator: char,
    cols: &Columns<'_>,
) -> Result<Table, RunError> {
    read_table(Opened::from_reader(input, shown, separator)?, shown, cols)
}

fn read_table<R: std::io::Read>(
    opened: Opened<R>,
    shown: &str,
    cols: &Columns<'_>,
) -> Result<Table, RunError> {
    let Opened { mut reader, header } = opened;
    let (key_at, num_at, text_at) = locate(&header, shown, cols)?;
    let mut table = Table {
        fields: num_at.iter().map(|i| i + 1).collect(),
        text_fields: text_at.iter().map(|i| i + 1).collect(),
        keys: Keys::default(),
        lines: Vec::new(),
        numeric: vec![NumericColumn::default(); num_at.len()],
        text: vec![Vec::new(); text_at.len()],
    };
    // Records are read in batches (the CSV syntax is sequential); each
    // batch's fields are decoded in parallel, then appended in record
    // order, the first problem in record order reported.
    let decoder = Decoder {
        shown,
        header: &header,
        key_at,
        num_at: &num_at,
        text_at: &text_at,
        decimal: cols.decimal,
        kinds: cols.kinds,
        coders: (0..num_at.len())
            .map(|f| cols.kinds.get(f).map_or(Coder::Number, FeatureKind::coder))
            .collect(),
    };
    let width = num_at.len().max(1);
    let mut batch: Vec<csv::ByteRecord> = Vec::new();
    let mut values = vec![0.0; BATCH * width];
    let mut missing = vec![false; BATCH * width];
    loop {
        let mut filled = 0;
        let mut fault = None;
        while filled < BATCH {
            if batch.len() == filled {
                batch.push(csv::ByteRecord::new());
            }
            match reader.read_byte_record(&mut batch[filled]) {
                Ok(true) => filled += 1,
                Ok(false) => break,
                Err(e) => {
                    fault = Some(malformed(shown, &e));
                    break;
                }
            }
        }
        let decoded: Vec<Result<Decoded, RunError>> = batch[..filled]
            .par_iter()
            .zip(values.par_chunks_mut(width))
            .zip(missing.par_chunks_mut(width))
            .map(|((record, v), m)| decoder.decode(record, v, m))
            .collect();
        for (j, row) in decoded.into_iter().enumerate() {
            let row = row?;
            for (f, col) in table.numeric.iter_mut().enumerate() {
                let at = j * width + f;
                col.push((!missing[at]).then_some(values[at]));
            }
            for (col, t) in table.text.iter_mut().zip(row.texts) {
                col.push(t);
            }
            table.keys.push(&row.key);
            table.lines.push(row.line);
        }
        if let Some(e) = fault {
            return Err(e);
        }
        if filled < BATCH {
            break;
        }
    }
    no_repeated_key(&table, &header, key_at, shown)?;
    Ok(table)
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

/// Records per batch of the reader.
const BATCH: usize = 8_192;

/// One record's fields, decoded: its key, text fields and line (numbers go
/// to the batch's buffers).
struct Decoded {
    key: String,
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

impl Decoder<'_> {
    /// Decodes the fields the recipe uses, checking them in field order
    /// (key, numbers, texts) so the first problem is the one a person
    /// reading the line would meet first.
    fn decode(
        &self,
        record: &csv::ByteRecord,
        values: &mut [f64],
        missing: &mut [bool],
    ) -> Result<Decoded, RunError> {
        let line = record.position().map(|p| p.line()).unwrap_or(0);
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
                key.to_string()
            }
            None => line.to_string(),
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

/// A CSV reading error as a located run error.
pub(crate) fn malformed(file: &str, e: &csv::Error) -> RunError {
    let line = e.position().map(|p| p.line()).unwrap_or(1);
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
        return Some(
            hasher
                .finalize()
                .iter()
                .map(|b| format!("{b:02x}"))
                .collect(),
        );
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
    Some(
        hasher
            .finalize()
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect(),
    )
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
