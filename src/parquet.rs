//! Parquet input: a table's schema and its columns as assort reads them,
//! through the arrow-rs `parquet` crate (its Arrow reader, which decodes
//! whole column chunks, reading only the columns asked for).
//!
//! A Parquet column is read the way the same table written as CSV would
//! be read, so that both give the same segments:
//! - numbers: integers (8 to 64 bits, signed or not), floats (32 and 64
//!   bits) and decimals (their value, `1234` at scale 2 is `12.34`, as
//!   the CSV text `12.34` parses); a boolean is a flag, `false` 0 and
//!   `true` 1; a text column whose values are numbers is read as numbers;
//! - text (categories and keys): strings, dictionary-encoded strings, and
//!   numbers written as text as Rust writes them (`17`, `2.5`);
//! - nulls and empty strings are gaps, as blank fields are in a CSV;
//! - dates, times, timestamps, durations, binary and nested columns
//!   (lists, structs, maps) are refused, with advice, when the recipe uses
//!   them.
//!
//! A record's "line" in messages is where it would be in that CSV: the
//! first record is line 2.

use arrow_array::cast::AsArray;
use arrow_array::types::*;
use arrow_array::{Array, ArrayRef};
use arrow_schema::DataType;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use parquet::arrow::ProjectionMask;
use std::fs::File;
use std::path::Path;

/// Records decoded at a time.
const BATCH: usize = 65_536;

/// Whether `path` names a Parquet input: a file whose name ends in
/// `.parquet`, or a folder (of part files, as Spark, DuckDB and pyarrow
/// write a partitioned extract).
pub fn is_parquet(path: &Path) -> bool {
    path.is_dir()
        || path
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| e.eq_ignore_ascii_case("parquet"))
}

/// The files a Parquet input reads: the file itself, or a folder's files
/// ending in `.parquet`, in name order (markers such as `_SUCCESS` and
/// hidden files left aside; sub-folders are not entered).
pub fn parts(path: &Path) -> Result<Vec<std::path::PathBuf>, ReadError> {
    if !path.is_dir() {
        return Ok(vec![path.to_path_buf()]);
    }
    let entries = std::fs::read_dir(path).map_err(|e| ReadError::Open(e.to_string()))?;
    let mut parts: Vec<std::path::PathBuf> = entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
            p.is_file() && !name.starts_with(['.', '_']) && is_parquet(p)
        })
        .collect();
    parts.sort();
    if parts.is_empty() {
        return Err(ReadError::Open(
            "the folder holds no file ending in `.parquet`".into(),
        ));
    }
    Ok(parts)
}

/// What a Parquet column holds, as assort reads it.
#[derive(Debug, Clone, PartialEq)]
pub enum Kind {
    /// Integers, floats, decimals, booleans (0 and 1).
    Number,
    /// Strings, plain or dictionary-encoded.
    Text,
    /// A type assort does not read, in words (`a timestamp`).
    Other(String),
}

/// A Parquet file's columns (top-level fields) and record count.
#[derive(Debug, Clone)]
pub struct Schema {
    pub names: Vec<String>,
    pub kinds: Vec<Kind>,
    pub records: usize,
}

/// A column read in full.
#[derive(Debug, Clone, PartialEq)]
pub enum Column {
    Numbers(Vec<Option<f64>>),
    Texts(Vec<Option<String>>),
}

/// How a column is wanted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum As {
    Numbers,
    Texts,
}

/// Why a Parquet file could not be read, in words for a message.
#[derive(Debug, Clone, PartialEq)]
pub enum ReadError {
    Open(String),
    /// A value that is not a number in a column read as numbers: its
    /// 0-based record and the text.
    NotANumber {
        column: usize,
        record: usize,
        found: String,
    },
    /// A column of a type assort does not read.
    Unsupported {
        column: usize,
        kind: String,
    },
}

/// A read error in words, for messages.
pub fn words(e: &ReadError) -> String {
    match e {
        ReadError::Open(why) => format!("it is not a Parquet file assort can read ({why})"),
        ReadError::NotANumber { found, .. } => format!("`{found}` is not a number"),
        ReadError::Unsupported { kind, .. } => format!("a column holds {kind}"),
    }
}

fn builder(path: &Path) -> Result<ParquetRecordBatchReaderBuilder<File>, ReadError> {
    let file = File::open(path).map_err(|e| ReadError::Open(e.to_string()))?;
    ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| ReadError::Open(e.to_string()))
}

/// The input's schema and record count, from the footers alone. The
/// parts of a folder must agree on their columns' names and kinds.
pub fn schema(path: &Path) -> Result<Schema, ReadError> {
    let mut out: Option<Schema> = None;
    for part in parts(path)? {
        let b = builder(&part)?;
        let fields = b.schema().fields();
        let this = Schema {
            names: fields.iter().map(|f| f.name().clone()).collect(),
            kinds: fields.iter().map(|f| kind(f.data_type())).collect(),
            records: usize::try_from(b.metadata().file_metadata().num_rows()).unwrap_or(0),
        };
        match &mut out {
            None => out = Some(this),
            Some(first) if first.names == this.names && first.kinds == this.kinds => {
                first.records += this.records;
            }
            Some(_) => {
                return Err(ReadError::Open(format!(
                    "part `{}` has other columns than the first part",
                    part.file_name().unwrap_or_default().to_string_lossy()
                )))
            }
        }
    }
    out.ok_or_else(|| ReadError::Open("no part to read".into()))
}

/// How assort reads a column of type `t`.
pub fn kind(t: &DataType) -> Kind {
    use DataType as T;
    match t {
        T::Int8 | T::Int16 | T::Int32 | T::Int64 => Kind::Number,
        T::UInt8 | T::UInt16 | T::UInt32 | T::UInt64 => Kind::Number,
        T::Float32 | T::Float64 | T::Decimal128(..) | T::Boolean => Kind::Number,
        T::Utf8 | T::LargeUtf8 | T::Utf8View => Kind::Text,
        T::Dictionary(_, v) if matches!(kind(v), Kind::Text) => Kind::Text,
        T::Date32 | T::Date64 => Kind::Other("a date".into()),
        T::Timestamp(..) => Kind::Other("a timestamp".into()),
        T::Time32(_) | T::Time64(_) => Kind::Other("a time of day".into()),
        T::Duration(_) | T::Interval(_) => Kind::Other("a duration".into()),
        T::Binary | T::LargeBinary | T::BinaryView | T::FixedSizeBinary(_) => {
            Kind::Other("binary data".into())
        }
        T::List(_) | T::LargeList(_) | T::FixedSizeList(..) | T::ListView(_) => {
            Kind::Other("a list".into())
        }
        T::Struct(_) | T::Map(..) | T::Union(..) => Kind::Other("a nested record".into()),
        other => Kind::Other(format!("the type {other}")),
    }
}

/// Reads the columns `wanted` (by position in the schema, each as numbers
/// or texts) in full, or their first `limit` records, part after part.
/// Only those columns are decoded.
pub fn read(
    path: &Path,
    wanted: &[(usize, As)],
    limit: Option<usize>,
) -> Result<Vec<Column>, ReadError> {
    let mut out: Vec<Column> = wanted
        .iter()
        .map(|w| match w.1 {
            As::Numbers => Column::Numbers(Vec::new()),
            As::Texts => Column::Texts(Vec::new()),
        })
        .collect();
    let mut done = 0;
    for part in parts(path)? {
        let left = limit.map(|l| l.saturating_sub(done));
        if left == Some(0) {
            break;
        }
        done += read_part(&part, wanted, left, done, &mut out)?;
    }
    Ok(out)
}

/// Appends one file's records (at most `limit`) to `out`; `before` records
/// came before it, for the place of a bad value. Returns its records.
fn read_part(
    path: &Path,
    wanted: &[(usize, As)],
    limit: Option<usize>,
    before: usize,
    out: &mut [Column],
) -> Result<usize, ReadError> {
    let (b, roots) = projected(builder(path)?, wanted)?;
    let mut b = b.with_batch_size(BATCH);
    if let Some(n) = limit {
        b = b.with_limit(n);
    }
    let reader = b.build().map_err(|e| ReadError::Open(e.to_string()))?;
    let mut done = 0;
    for batch in reader {
        let batch = batch.map_err(|e| ReadError::Open(e.to_string()))?;
        append(&batch, wanted, &roots, before + done, out)?;
        done += batch.num_rows();
    }
    Ok(done)
}

/// `b` reading only the `wanted` columns, after checking that assort
/// reads their kinds; with where each wanted column lands in a batch's
/// roots (the projection keeps schema order).
fn projected(
    b: ParquetRecordBatchReaderBuilder<File>,
    wanted: &[(usize, As)],
) -> Result<(ParquetRecordBatchReaderBuilder<File>, Vec<usize>), ReadError> {
    let kinds: Vec<Kind> = b
        .schema()
        .fields()
        .iter()
        .map(|f| kind(f.data_type()))
        .collect();
    for &(at, _) in wanted {
        if let Some(Kind::Other(k)) = kinds.get(at) {
            return Err(ReadError::Unsupported {
                column: at,
                kind: k.clone(),
            });
        }
    }
    let mut roots: Vec<usize> = wanted.iter().map(|w| w.0).collect();
    roots.sort_unstable();
    roots.dedup();
    let mask = ProjectionMask::roots(b.parquet_schema(), roots.iter().copied());
    Ok((b.with_projection(mask), roots))
}

/// Appends one batch's `wanted` columns to `out`; the batch's first
/// record is record `first` (0-based) of the input.
fn append(
    batch: &arrow_array::RecordBatch,
    wanted: &[(usize, As)],
    roots: &[usize],
    first: usize,
    out: &mut [Column],
) -> Result<(), ReadError> {
    for (w, col) in wanted.iter().zip(out.iter_mut()) {
        let at = roots.iter().position(|&r| r == w.0).unwrap_or(0);
        let array = batch.column(at);
        match col {
            Column::Numbers(v) => {
                numbers(array, v).map_err(|(i, found)| ReadError::NotANumber {
                    column: w.0,
                    record: first + i,
                    found,
                })?
            }
            Column::Texts(v) => texts(array, v),
        }
    }
    Ok(())
}

/// One row group of one part of an input: the unit a streamed pass hands
/// to a thread ([`crate::scale::stream`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Group {
    pub part: std::path::PathBuf,
    /// The row group's number in its part.
    pub group: usize,
    /// Records before it in the input (parts in name order).
    pub first: usize,
    pub rows: usize,
}

/// Every row group of an input, part after part, from the footers alone.
pub fn groups(path: &Path) -> Result<Vec<Group>, ReadError> {
    let mut out = Vec::new();
    let mut first = 0;
    for part in parts(path)? {
        let b = builder(&part)?;
        for (group, meta) in b.metadata().row_groups().iter().enumerate() {
            let rows = usize::try_from(meta.num_rows()).unwrap_or(0);
            out.push(Group {
                part: part.clone(),
                group,
                first,
                rows,
            });
            first += rows;
        }
    }
    Ok(out)
}

/// Reads one row group's `wanted` columns a batch of at most `batch`
/// records at a time, handing each batch's first record (0-based, in the
/// input) and columns to `each`: memory holds one batch, not the group.
pub fn each_batch<E: From<ReadError>>(
    g: &Group,
    wanted: &[(usize, As)],
    batch: usize,
    mut each: impl FnMut(usize, &[Column]) -> Result<(), E>,
) -> Result<(), E> {
    let (b, roots) = projected(builder(&g.part)?, wanted)?;
    let reader = (b
        .with_row_groups(vec![g.group])
        .with_batch_size(batch.max(1)))
    .build()
    .map_err(|e| ReadError::Open(e.to_string()))?;
    let mut first = g.first;
    for read in reader {
        let read = read.map_err(|e| ReadError::Open(e.to_string()))?;
        let mut columns: Vec<Column> = wanted
            .iter()
            .map(|w| match w.1 {
                As::Numbers => Column::Numbers(Vec::with_capacity(read.num_rows())),
                As::Texts => Column::Texts(Vec::with_capacity(read.num_rows())),
            })
            .collect();
        append(&read, wanted, &roots, first, &mut columns)?;
        each(first, &columns)?;
        first += read.num_rows();
    }
    Ok(())
}

/// Appends an array's values as numbers; a text that is not a number is
/// returned with its index in the array.
fn numbers(a: &ArrayRef, out: &mut Vec<Option<f64>>) -> Result<(), (usize, String)> {
    use DataType as T;
    let start = out.len();
    // Without nulls the values are one slice, copied without a look at
    // each value's validity (the common case, and a fifth of a streamed
    // round when done value by value).
    macro_rules! primitive {
        ($t:ty) => {{
            let p = a.as_primitive::<$t>();
            match p.null_count() {
                0 => out.extend(p.values().iter().map(|&v| Some(v as f64))),
                _ => out.extend(p.iter().map(|v| v.map(|v| v as f64))),
            }
        }};
    }
    match a.data_type() {
        T::Int8 => primitive!(Int8Type),
        T::Int16 => primitive!(Int16Type),
        T::Int32 => primitive!(Int32Type),
        T::Int64 => primitive!(Int64Type),
        T::UInt8 => primitive!(UInt8Type),
        T::UInt16 => primitive!(UInt16Type),
        T::UInt32 => primitive!(UInt32Type),
        T::UInt64 => primitive!(UInt64Type),
        T::Float32 => out.extend(
            a.as_primitive::<Float32Type>()
                .iter()
                .map(|v| v.map(single)),
        ),
        T::Float64 => primitive!(Float64Type),
        T::Decimal128(_, scale) => {
            let scale = *scale;
            out.extend(
                a.as_primitive::<Decimal128Type>()
                    .iter()
                    .map(|v| v.map(|v| decimal(v, scale))),
            )
        }
        T::Boolean => out.extend(a.as_boolean().iter().map(|v| v.map(f64::from))),
        _ => {
            // Text: numbers written as text, blanks as gaps.
            let mut texts = Vec::new();
            self::texts(a, &mut texts);
            for (i, t) in texts.into_iter().enumerate() {
                match t {
                    None => out.push(None),
                    Some(t) => match crate::text::parse_number(&t) {
                        Some(v) => out.push(Some(v)),
                        None => return Err((i, t)),
                    },
                }
            }
        }
    }
    // Floats that are not finite are gaps no more: they are refused as
    // text would be. Only this array's values are looked at (a whole
    // column's, batch after batch, would cost the square of its length).
    if let Some(i) = out[start..]
        .iter()
        .position(|v| v.is_some_and(|v| !v.is_finite()))
    {
        return Err((i, format!("{}", out[start + i].unwrap_or(f64::NAN))));
    }
    Ok(())
}

/// A single-precision value as the double its shortest text reads as
/// (`0.09`, not the single's own 0.09000000357627869): what the same
/// column written as CSV gives, and what a `real` column of PostgreSQL
/// gives (read through its text), so the routes agree. The text is Ryū's
/// (the `ryu` crate), the algorithm PostgreSQL 12 and later write a
/// `real` with: where two shortest texts are equally near (134.828125),
/// both pick the even one (134.82812; Rust's `Display` writes 134.82813).
/// About 40 ns a value here, against 1 for a cast: a single-precision
/// column costs that on every pass.
fn single(v: f32) -> f64 {
    if !v.is_finite() {
        return f64::from(v);
    }
    ryu::Buffer::new()
        .format_finite(v)
        .parse()
        .unwrap_or(f64::from(v))
}

/// A decimal's value: the integer over 10^scale, one correctly rounded
/// division, so `1234` at scale 2 is the double nearest 12.34, as the
/// CSV text `12.34` parses.
fn decimal(v: i128, scale: i8) -> f64 {
    if scale >= 0 {
        v as f64 / 10f64.powi(i32::from(scale))
    } else {
        v as f64 * 10f64.powi(-i32::from(scale))
    }
}

/// Appends an array's values as texts; nulls and empty strings are gaps.
fn texts(a: &ArrayRef, out: &mut Vec<Option<String>>) {
    use DataType as T;
    let blank = |s: Option<&str>| s.filter(|s| !s.is_empty()).map(str::to_string);
    macro_rules! integers {
        ($t:ty) => {
            out.extend(
                a.as_primitive::<$t>()
                    .iter()
                    .map(|v| v.map(|v| v.to_string())),
            )
        };
    }
    match a.data_type() {
        T::Utf8 => out.extend(a.as_string::<i32>().iter().map(blank)),
        T::LargeUtf8 => out.extend(a.as_string::<i64>().iter().map(blank)),
        T::Utf8View => out.extend(a.as_string_view().iter().map(blank)),
        T::Dictionary(..) => {
            if let Some(d) = a.as_any_dictionary_opt() {
                if d.values().is_empty() {
                    // No values: every entry is null (and normalized_keys
                    // would panic).
                    out.extend((0..a.len()).map(|_| None));
                    return;
                }
                let mut values = Vec::new();
                texts(d.values(), &mut values);
                let keys = d.normalized_keys();
                out.extend((0..a.len()).map(|i| {
                    if a.is_null(i) {
                        None
                    } else {
                        values.get(keys[i]).cloned().flatten()
                    }
                }));
            }
        }
        T::Boolean => out.extend(a.as_boolean().iter().map(|v| v.map(|b| b.to_string()))),
        // Integers as their digits, exactly (a 64-bit key above 2^53
        // would not survive a float).
        T::Int8 => integers!(Int8Type),
        T::Int16 => integers!(Int16Type),
        T::Int32 => integers!(Int32Type),
        T::Int64 => integers!(Int64Type),
        T::UInt8 => integers!(UInt8Type),
        T::UInt16 => integers!(UInt16Type),
        T::UInt32 => integers!(UInt32Type),
        T::UInt64 => integers!(UInt64Type),
        _ => {
            // Floats and decimals as Rust writes the double (`2.5`).
            let mut numbers = Vec::new();
            let _ = self::numbers(a, &mut numbers);
            out.extend(numbers.into_iter().map(|v| v.map(|v| format!("{v}"))));
        }
    }
}

#[cfg(test)]
mod tests {

    #[test]
    fn a_single_reads_as_its_shortest_text_as_a_csv_would() {
        assert_eq!(single(0.09), 0.09);
        assert_eq!(single(1.5), 1.5);
        assert_eq!(single(-3.4e-7), -3.4e-7);
        assert_eq!(single(16_777_217.0), 16_777_216.0);
        // A tie between two shortest texts, written as PostgreSQL 15
        // writes `CAST(CAST(134.828125 AS real) AS text)` (tried on a
        // server: `134.82812`).
        assert_eq!(single(8629.0 / 64.0), 134.82812, "134.828125 exactly");
        assert_ne!(f64::from(0.09f32), 0.09, "the single's own value differs");
    }

    use super::*;

    #[test]
    fn decimals_read_as_their_text_parses() {
        assert_eq!(decimal(1234, 2), "12.34".parse::<f64>().unwrap());
        assert_eq!(decimal(-5, 1), -0.5);
        assert_eq!(decimal(437, 3), 0.437);
        assert_eq!(decimal(12, -2), 1200.0);
    }

    /// A float that is not finite is refused at its own record, also past
    /// the first batch (where the record was once counted from the
    /// column's start twice over), and in a row group read by itself.
    #[test]
    fn a_value_that_is_not_finite_is_refused_at_its_record() {
        use arrow_array::{Float64Array, RecordBatch};
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("x.parquet");
        let n = BATCH + 5_000;
        let at = BATCH + 1_234;
        let values: Vec<f64> = (0..n)
            .map(|i| if i == at { f64::INFINITY } else { i as f64 })
            .collect();
        let batch = RecordBatch::try_from_iter(vec![(
            "x",
            std::sync::Arc::new(Float64Array::from(values)) as ArrayRef,
        )])
        .unwrap();
        let file = File::create(&path).unwrap();
        let props = parquet::file::properties::WriterProperties::builder()
            .set_max_row_group_row_count(Some(40_000))
            .build();
        let mut w =
            parquet::arrow::ArrowWriter::try_new(file, batch.schema(), Some(props)).unwrap();
        w.write(&batch).unwrap();
        w.close().unwrap();
        let refused = |e: ReadError| match e {
            ReadError::NotANumber { record, found, .. } => (record, found),
            other => panic!("{other:?}"),
        };
        let whole = read(&path, &[(0, As::Numbers)], None).unwrap_err();
        assert_eq!(refused(whole), (at, "inf".to_string()));
        let groups = groups(&path).unwrap();
        assert_eq!(groups.len(), 2);
        assert_eq!((groups[1].first, groups[1].rows), (40_000, n - 40_000));
        let by_group = each_batch(&groups[1], &[(0, As::Numbers)], 1_000, |_, _| {
            Ok::<(), ReadError>(())
        })
        .unwrap_err();
        assert_eq!(refused(by_group), (at, "inf".to_string()));
    }
}
