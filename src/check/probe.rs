//! A look at the data before the run: the header and a sample of rows.
//!
//! The checker never reads a whole data file. It reads the header and the
//! first [`SAMPLE_ROWS`] records to learn each column's kind; when the file
//! ends within the sample, it also knows the record count.

use crate::csv_lines::LineReader;
use std::fs::File;
use std::path::Path;
use std::sync::Arc;

pub mod database;

/// Records read to judge column kinds.
pub const SAMPLE_ROWS: usize = 1000;

/// Different values kept per column from the sample.
pub const VALUES_KEPT: usize = 32;

/// What a column looked like in the sample.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColumnKind {
    /// Every non-blank sampled value is a finite number.
    Numeric,
    /// Some sampled value is not a number.
    Text,
    /// Every sampled value is blank.
    Blank,
}

pub use crate::plan::DecimalMark;
// How a data field is read (blank, a number) is shared with the loader
// and the Parquet reader, below the checker.
pub use crate::text::{is_blank, parse_number, parse_number_in};

#[derive(Debug, Clone)]
pub struct ColumnInfo {
    pub name: String,
    pub kind: ColumnKind,
    /// A sampled value that is not a number, for messages.
    pub text_example: Option<String>,
    /// The 1-based line of that value.
    pub text_line: Option<u64>,
    /// Sampled values that are numbers, and that are not.
    pub numbers: usize,
    pub texts: usize,
    /// Blank values in the sample, and the 1-based line of the first.
    pub blanks: usize,
    pub blank_line: Option<u64>,
    /// Sampled text values that are numbers written with a decimal comma
    /// (`1,5`), when the file is read with a decimal point.
    pub comma_numbers: usize,
    /// Smallest, largest and sum of the sampled numbers.
    pub min: f64,
    pub max: f64,
    pub sum: f64,
    /// Sampled numbers that are whole.
    pub wholes: usize,
    /// Every sampled number so far differs from the others, and each is
    /// larger than the one before (in file order).
    pub distinct: bool,
    pub increasing: bool,
    /// A Parquet column of a type assort does not read, in words (`a
    /// timestamp`): the checker refuses it wherever the recipe uses it.
    pub unsupported: Option<String>,
    /// The first [`VALUES_KEPT`] different values in the sample (spaces
    /// trimmed), each with its first line: what an ordered category's or
    /// a flag's levels are checked against.
    pub values: Vec<(String, u64)>,
    /// The sampled numbers seen, by their bits (to tell `distinct`).
    seen: std::collections::HashSet<u64>,
    last: Option<f64>,
}

impl ColumnInfo {
    /// A column named `header`, before any value is seen.
    pub(crate) fn new(header: &str) -> ColumnInfo {
        ColumnInfo {
            name: header.trim().to_string(),
            kind: ColumnKind::Blank,
            text_example: None,
            text_line: None,
            numbers: 0,
            texts: 0,
            blanks: 0,
            blank_line: None,
            comma_numbers: 0,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            sum: 0.0,
            wholes: 0,
            distinct: true,
            increasing: true,
            values: Vec::new(),
            unsupported: None,
            seen: std::collections::HashSet::new(),
            last: None,
        }
    }

    /// Counts one sampled field, on 1-based `line`, read with `decimal`.
    pub(crate) fn observe(&mut self, field: &str, line: u64, decimal: DecimalMark) {
        if is_blank(field) {
            self.blanks += 1;
            self.blank_line.get_or_insert(line);
            return;
        }
        let trimmed = field.trim();
        if self.values.len() < VALUES_KEPT && !self.values.iter().any(|(v, _)| v == trimmed) {
            self.values.push((trimmed.to_string(), line));
        }
        if let Some(v) = parse_number_in(field, decimal) {
            self.numbers += 1;
            self.min = self.min.min(v);
            self.max = self.max.max(v);
            self.sum += v;
            if v.fract() == 0.0 {
                self.wholes += 1;
            }
            self.distinct &= self.seen.insert(v.to_bits());
            self.increasing &= self.last.is_none_or(|l| v > l);
            self.last = Some(v);
            if self.kind == ColumnKind::Blank {
                self.kind = ColumnKind::Numeric;
            }
        } else {
            self.texts += 1;
            self.kind = ColumnKind::Text;
            if decimal.is_point() && parse_number_in(field, DecimalMark::Comma).is_some() {
                self.comma_numbers += 1;
            }
            if self.text_example.is_none() {
                self.text_example = Some(field.trim().to_string());
                self.text_line = Some(line);
            }
        }
    }

    /// Why a numeric column looks like a code rather than a measure, if it
    /// does: whole numbers between 1900 and 2100 (a year), whole numbers
    /// of eight digits between 19000101 and 21001231 (a date written as a
    /// number), or whole numbers all different that grow line by line or
    /// sit under a name like `..._id`, `..._no` or `..._code` (an
    /// identifier). A rule of thumb, not a published test: the warning
    /// asks the analyst to look.
    pub fn looks_like_code(&self) -> Option<&'static str> {
        let whole =
            self.kind == ColumnKind::Numeric && self.numbers >= 5 && self.wholes == self.numbers;
        if !whole {
            return None;
        }
        if self.min >= 1900.0 && self.max <= 2100.0 {
            return Some("a year");
        }
        if self.min >= 19_000_101.0 && self.max <= 21_001_231.0 {
            return Some("a date written as a number");
        }
        let name = self.name.to_ascii_lowercase();
        let named = ["id", "_no", "number", "code", "nr"]
            .iter()
            .any(|end| name.ends_with(end));
        (self.distinct && (self.increasing || named)).then_some("an identifier")
    }

    /// A column of numbers with a few stray values: more numbers than text
    /// in the sample. Such a column is meant to be numeric, and the stray
    /// values are data errors rather than a sign of a text column.
    pub fn mostly_numeric(&self) -> bool {
        self.kind == ColumnKind::Text && self.numbers > self.texts
    }
}

#[derive(Debug, Clone)]
pub struct Probe {
    pub columns: Vec<ColumnInfo>,
    /// Records seen in the sample.
    pub sampled: usize,
    /// The record count: every record of the file, counted.
    pub rows: Option<usize>,
    /// When the count stopped at a malformed record past the sample, an
    /// estimate: the file's size over the sample's bytes per record.
    pub estimated_rows: Option<usize>,
}

impl Probe {
    pub fn column(&self, name: &str) -> Option<&ColumnInfo> {
        self.columns.iter().find(|c| c.name == name)
    }

    /// The first header name given to two columns: the name and the two
    /// 1-based field numbers.
    pub fn repeated_name(&self) -> Option<(&str, usize, usize)> {
        self.columns.iter().enumerate().find_map(|(j, c)| {
            let first = self.columns[..j]
                .iter()
                .position(|e| !c.name.is_empty() && e.name == c.name)?;
            Some((c.name.as_str(), first + 1, j + 1))
        })
    }

    /// When the header is one column whose name holds another common
    /// separator, that separator: the file is likely separated by it.
    pub fn likely_separator(&self) -> Option<char> {
        match self.columns.as_slice() {
            [only] => [';', '\t', '|']
                .into_iter()
                .find(|&c| only.name.contains(c)),
            _ => None,
        }
    }

    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.columns.iter().map(|c| c.name.as_str())
    }
}

/// Why a data file could not be probed.
#[derive(Debug, Clone, PartialEq)]
pub enum ProbeError {
    NotFound,
    Unreadable(String),
    /// Malformed CSV at a 1-based line.
    Malformed {
        line: u64,
        reason: String,
    },
    NoHeader,
    /// Bytes that are not UTF-8 text at a 1-based line.
    NotUtf8 {
        line: u64,
    },
}

/// When the file's first line does not hold `separator` but does hold
/// another common one (`;`, tab, `|`), that one.
pub fn header_separator(path: &Path, separator: char) -> Option<char> {
    use std::io::{BufRead, Read};
    let file = File::open(path).ok()?;
    let mut line = String::new();
    // The first 64 KiB are enough for any header.
    std::io::BufReader::new(file.take(64 * 1024))
        .read_line(&mut line)
        .ok()?;
    if line.contains(separator) {
        return None;
    }
    [';', '\t', '|'].into_iter().find(|&c| line.contains(c))
}

/// A key problem the sample shows.
#[derive(Debug, Clone, PartialEq)]
pub enum KeyProblem {
    /// A key given again: (the key, the line it first appeared on, the
    /// line it appears again).
    Repeated(String, u64, u64),
    /// A record with a blank key, at this line.
    Blank(u64),
}

/// The first key problem within the sample: a blank or repeated key.
/// Reads the first [`SAMPLE_ROWS`] records again, only the key column,
/// once until the file changes.
pub fn key_problem(path: &Path, separator: u8, key: &str) -> Option<KeyProblem> {
    let stamp = |len, modified| ProbeKey {
        path: path.to_path_buf(),
        separator,
        decimal: DecimalMark::Point,
        column: key.to_string(),
        len,
        modified,
    };
    cached(&KEYS, path, stamp, || {
        Ok::<_, ()>(read_key_problem(path, separator, key))
    })
    .unwrap_or(None)
}

fn read_key_problem(path: &Path, separator: u8, key: &str) -> Option<KeyProblem> {
    if crate::parquet::is_parquet(path) {
        return parquet_key_problem(path, key);
    }
    let mut builder = csv::ReaderBuilder::new();
    builder.delimiter(separator);
    let mut reader = LineReader::new(&builder, File::open(path).ok()?);
    let at = reader
        .headers()
        .ok()?
        .iter()
        .position(|h| h.trim() == key)?;
    let mut seen: std::collections::HashMap<String, u64> = std::collections::HashMap::new();
    let mut record = csv::StringRecord::new();
    for _ in 0..SAMPLE_ROWS {
        let Some(line) = reader.read_record(&mut record).ok()? else {
            break;
        };
        // Keys exactly as written, as the run reads them.
        let k = record.get(at).unwrap_or("");
        if is_blank(k) {
            return Some(KeyProblem::Blank(line));
        }
        if let Some(&first) = seen.get(k) {
            return Some(KeyProblem::Repeated(k.to_string(), first, line));
        }
        seen.insert(k.to_string(), line);
    }
    None
}

/// [`key_problem`] in a Parquet file: its first [`SAMPLE_ROWS`] keys, a
/// record's line being its place in the same table as CSV.
fn parquet_key_problem(path: &Path, key: &str) -> Option<KeyProblem> {
    use crate::parquet::{self as pq, As, Column};
    let at = pq::schema(path).ok()?.names.iter().position(|n| n == key)?;
    let Column::Texts(keys) = pq::read(path, &[(at, As::Texts)], Some(SAMPLE_ROWS))
        .ok()?
        .pop()?
    else {
        return None;
    };
    let mut seen: std::collections::HashMap<&str, u64> = std::collections::HashMap::new();
    for (i, k) in keys.iter().enumerate() {
        let line = i as u64 + 2;
        let Some(k) = k.as_deref().filter(|k| !is_blank(k)) else {
            return Some(KeyProblem::Blank(line));
        };
        if let Some(&first) = seen.get(k) {
            return Some(KeyProblem::Repeated(k.to_string(), first, line));
        }
        seen.insert(k, line);
    }
    None
}

/// What to do about a field that is not a number, read with `decimal`.
pub fn number_help(field: &str, decimal: DecimalMark) -> String {
    let t = field.trim().to_ascii_lowercase();
    let other = match decimal {
        DecimalMark::Point => DecimalMark::Comma,
        DecimalMark::Comma => DecimalMark::Point,
    };
    if matches!(
        t.as_str(),
        "nan" | "inf" | "-inf" | "infinity" | "-infinity" | "+inf"
    ) {
        "values must be finite; leave the field blank to mark a missing value".into()
    } else if parse_number_in(&t, other).is_some() {
        format!(
            "the value is written with a decimal `{}` while the file is read with `{}`: give `input` the option `decimal \"{}\"` if the whole file writes numbers so, else mend this value",
            other.char(),
            decimal.char(),
            other.char()
        )
    } else {
        format!(
            "write numbers with digits and a `{}` for decimals; leave the field blank to mark a missing value",
            decimal.char()
        )
    }
}

/// Probes already made, by file, separator, size and modification time:
/// an editor re-checking a recipe at every keystroke reads each data file
/// once until it changes, and shares the probe instead of copying its
/// sample.
static CACHE: Cache<Arc<Probe>> = std::sync::Mutex::new(Vec::new());
/// Key problems already looked for, by file and key column.
static KEYS: Cache<Option<KeyProblem>> = std::sync::Mutex::new(Vec::new());

type Cache<T> = std::sync::Mutex<Vec<(ProbeKey, T)>>;

#[derive(Clone, PartialEq)]
struct ProbeKey {
    path: std::path::PathBuf,
    separator: u8,
    decimal: DecimalMark,
    /// The key column, for [`KEYS`].
    column: String,
    len: u64,
    modified: Option<std::time::SystemTime>,
}

/// The most entries each cache keeps.
const CACHE_SIZE: usize = 16;

/// The value for `path` read as `key` says from `cache`, or `fresh()`
/// kept there, when the file's size and modification time are as they
/// were (a file that cannot be stamped is read every time).
fn cached<T: Clone, E>(
    cache: &Cache<T>,
    path: &Path,
    key: impl FnOnce(u64, Option<std::time::SystemTime>) -> ProbeKey,
    fresh: impl FnOnce() -> Result<T, E>,
) -> Result<T, E> {
    let key = std::fs::metadata(path)
        .ok()
        .map(|m| key(m.len(), m.modified().ok()));
    if let Some(k) = &key {
        // A poisoned lock only means another thread panicked mid-update;
        // the cache is then skipped, not trusted.
        if let Ok(cache) = cache.lock() {
            if let Some((_, v)) = cache.iter().find(|(c, _)| c == k) {
                return Ok(v.clone());
            }
        }
    }
    let value = fresh()?;
    if let (Some(k), Ok(mut cache)) = (key, cache.lock()) {
        if cache.len() >= CACHE_SIZE {
            cache.remove(0);
        }
        cache.push((k, value.clone()));
    }
    Ok(value)
}

/// Reads the header and a sample of `path`, or takes them from the cache
/// when the file has not changed.
pub fn probe(path: &Path, separator: u8, decimal: DecimalMark) -> Result<Arc<Probe>, ProbeError> {
    let key = |len, modified| ProbeKey {
        path: path.to_path_buf(),
        separator,
        decimal,
        column: String::new(),
        len,
        modified,
    };
    cached(&CACHE, path, key, || {
        probe_file(path, separator, decimal).map(Arc::new)
    })
}

fn probe_file(path: &Path, separator: u8, decimal: DecimalMark) -> Result<Probe, ProbeError> {
    if crate::parquet::is_parquet(path) {
        return probe_parquet(path);
    }
    let file = File::open(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => ProbeError::NotFound,
        _ => ProbeError::Unreadable(e.to_string()),
    })?;
    let size = file.metadata().ok().map(|m| m.len());
    probe_reader(file, size, separator, decimal)
}

/// Probes CSV text in memory: what the checker makes of a data file, for
/// the fuzz target and tests.
pub fn probe_bytes(data: &[u8], separator: u8, decimal: DecimalMark) -> Result<Probe, ProbeError> {
    probe_reader(data, Some(data.len() as u64), separator, decimal)
}

/// Reads the header and a sample from `input`, whose size in bytes (when
/// known) scales the record estimate of a file too long to count.
fn probe_reader<R: std::io::Read>(
    input: R,
    size: Option<u64>,
    separator: u8,
    decimal: DecimalMark,
) -> Result<Probe, ProbeError> {
    let mut builder = csv::ReaderBuilder::new();
    builder.delimiter(separator).has_headers(true);
    let mut reader = LineReader::new(&builder, input);
    let header = match reader.headers() {
        Ok(header) => header.clone(),
        Err(e) => return Err(csv_problem(&e, reader.line_of(&e))),
    };
    if header.is_empty() || header.iter().all(is_blank) {
        return Err(ProbeError::NoHeader);
    }
    let mut columns: Vec<ColumnInfo> = header.iter().map(ColumnInfo::new).collect();
    let mut sampled = 0;
    let mut record = csv::StringRecord::new();
    let mut complete = false;
    while sampled < SAMPLE_ROWS {
        let line = match reader.read_record(&mut record) {
            Ok(Some(line)) => line,
            Ok(None) => {
                complete = true;
                break;
            }
            Err(e) => return Err(csv_problem(&e, reader.line_of(&e))),
        };
        sampled += 1;
        for (col, field) in columns.iter_mut().zip(record.iter()) {
            col.observe(field, line, decimal);
        }
    }
    // The records past the sample are counted, not estimated: limits that
    // depend on the count (a tree over every record) must hold at exactly
    // the limit. Counting parses the CSV (quoted line breaks are not
    // records) without looking at the fields: about a second per gigabyte.
    let mut rows = complete.then_some(sampled);
    if !complete {
        // A fault past the sample is the run's to report, at its line;
        // the count falls back to an estimate.
        rows = reader.count_rest().ok().map(|rest| sampled + rest as usize);
    }
    let estimated_rows = if rows.is_some() || sampled == 0 {
        None
    } else {
        let read = reader.position().byte().max(1) as f64;
        let size = size.map_or(read, |s| s as f64);
        Some((size / read * sampled as f64).round() as usize)
    };
    Ok(Probe {
        columns,
        sampled,
        rows,
        estimated_rows,
    })
}

/// Probes a Parquet file: its schema is the header, its record count
/// exact (from the footer), and its first [`SAMPLE_ROWS`] records the
/// sample, each value observed as the same table in CSV would show it.
fn probe_parquet(path: &Path) -> Result<Probe, ProbeError> {
    use crate::parquet::{self as pq, As, Column, Kind};
    let problem = |e: pq::ReadError| match e {
        pq::ReadError::Open(_) if !path.exists() => ProbeError::NotFound,
        other => ProbeError::Unreadable(pq::words(&other)),
    };
    let schema = pq::schema(path).map_err(problem)?;
    if schema.names.is_empty() {
        return Err(ProbeError::NoHeader);
    }
    let wanted: Vec<(usize, As)> = schema
        .kinds
        .iter()
        .enumerate()
        .filter_map(|(i, k)| match k {
            Kind::Number => Some((i, As::Numbers)),
            Kind::Text => Some((i, As::Texts)),
            Kind::Other(_) => None,
        })
        .collect();
    let sample = pq::read(path, &wanted, Some(SAMPLE_ROWS)).map_err(problem)?;
    let mut columns: Vec<ColumnInfo> = schema.names.iter().map(|n| ColumnInfo::new(n)).collect();
    for (&(at, _), values) in wanted.iter().zip(&sample) {
        let texts: Vec<Option<String>> = match values {
            Column::Numbers(v) => v.iter().map(|v| v.map(|v| format!("{v}"))).collect(),
            Column::Texts(v) => v.clone(),
        };
        for (i, t) in texts.iter().enumerate() {
            columns[at].observe(t.as_deref().unwrap_or(""), i as u64 + 2, DecimalMark::Point);
        }
    }
    for (c, k) in columns.iter_mut().zip(&schema.kinds) {
        if let Kind::Other(what) = k {
            c.kind = ColumnKind::Text;
            c.unsupported = Some(what.clone());
        }
    }
    Ok(Probe {
        columns,
        sampled: schema.records.min(SAMPLE_ROWS),
        rows: Some(schema.records),
        estimated_rows: None,
    })
}

fn csv_problem(e: &csv::Error, line: u64) -> ProbeError {
    match e.kind() {
        csv::ErrorKind::Io(io) => ProbeError::Unreadable(io.to_string()),
        csv::ErrorKind::Utf8 { .. } => ProbeError::NotUtf8 { line },
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => ProbeError::Malformed {
            line,
            reason: format!("found {len} fields, expected {expected_len} as in the header"),
        },
        _ => ProbeError::Malformed {
            line,
            reason: e.to_string(),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::is_blank;

    #[test]
    fn a_key_is_blank_only_when_nothing_but_white_space() {
        // Keys are otherwise kept exactly as written, leading spaces and
        // formula-like characters included.
        assert!(is_blank("") && is_blank(" \t"));
        assert!(!is_blank(" k1") && !is_blank("=k"));
    }
}
