//! Reading the data: the key, the feature and category columns, with the
//! line of every record, rejecting what is not data at its location.

use super::error::{Place, RunError};
use crate::check::probe::{is_blank, parse_number};
use std::collections::HashMap;
use std::path::Path;

/// The columns a plan uses, read from the file.
#[derive(Debug, Clone)]
pub struct Table {
    pub keys: Vec<String>,
    /// 1-based line where each record starts.
    pub lines: Vec<u64>,
    /// One vector per numeric column asked for; `None` where blank.
    pub numeric: Vec<Vec<Option<f64>>>,
    /// The 1-based field number of each numeric column, for messages.
    pub fields: Vec<usize>,
    /// One vector per text column asked for, trimmed.
    pub text: Vec<Vec<String>>,
}

/// What to read from a file.
pub struct Columns<'a> {
    pub key: &'a str,
    pub numeric: &'a [String],
    pub text: &'a [String],
}

/// A CSV file opened for reading, with its header.
pub(crate) struct Opened {
    pub reader: csv::Reader<std::io::BufReader<std::fs::File>>,
    pub header: csv::StringRecord,
}

impl Opened {
    /// Opens `path` (shown as `shown` in messages) and reads its header.
    pub fn new(path: &Path, shown: &str, separator: char) -> Result<Opened, RunError> {
        let file = std::fs::File::open(path).map_err(|e| RunError::Unreadable {
            file: shown.to_string(),
            reason: e.to_string(),
        })?;
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(separator as u8)
            .from_reader(std::io::BufReader::new(file));
        let header = reader.headers().map_err(|e| malformed(shown, &e))?.clone();
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
    let Opened { mut reader, header } = Opened::new(path, shown, separator)?;
    let index_of = |name: &str| {
        header
            .iter()
            .position(|h| h.trim() == name)
            .ok_or_else(|| RunError::ColumnGone {
                file: shown.to_string(),
                column: name.to_string(),
            })
    };
    let key_at = index_of(cols.key)?;
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

    let mut table = Table {
        fields: num_at.iter().map(|i| i + 1).collect(),
        keys: Vec::new(),
        lines: Vec::new(),
        numeric: vec![Vec::new(); num_at.len()],
        text: vec![Vec::new(); text_at.len()],
    };
    let mut first_line: HashMap<String, u64> = HashMap::new();
    let mut record = csv::StringRecord::new();
    loop {
        match reader.read_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => return Err(malformed(shown, &e)),
        }
        let line = record.position().map(|p| p.line()).unwrap_or(0);
        let place = |at: usize| Place {
            file: shown.to_string(),
            line,
            column: at + 1,
            name: header.get(at).unwrap_or("").trim().to_string(),
        };
        let key = record.get(key_at).unwrap_or("").trim();
        if key.is_empty() {
            return Err(RunError::BlankKey {
                place: place(key_at),
            });
        }
        if let Some(&first) = first_line.get(key) {
            return Err(RunError::DuplicateKey {
                place: place(key_at),
                key: key.to_string(),
                first_line: first,
            });
        }
        first_line.insert(key.to_string(), line);
        for (col, &at) in table.numeric.iter_mut().zip(&num_at) {
            let field = record.get(at).unwrap_or("");
            if is_blank(field) {
                col.push(None);
                continue;
            }
            match parse_number(field) {
                Some(v) => col.push(Some(v)),
                None => {
                    let t = field.trim().to_ascii_lowercase();
                    let help = if matches!(
                        t.as_str(),
                        "nan" | "inf" | "-inf" | "infinity" | "-infinity" | "+inf"
                    ) {
                        "values must be finite; leave the field blank to mark a missing value"
                    } else {
                        "write numbers with digits and a `.` for decimals; leave the field blank to mark a missing value"
                    };
                    return Err(RunError::NotANumber {
                        place: place(at),
                        found: field.trim().to_string(),
                        help: help.to_string(),
                    });
                }
            }
        }
        for (col, &at) in table.text.iter_mut().zip(&text_at) {
            col.push(record.get(at).unwrap_or("").trim().to_string());
        }
        table.keys.push(key.to_string());
        table.lines.push(line);
    }
    Ok(table)
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
        csv::ErrorKind::Utf8 { .. } => "the text is not valid UTF-8".to_string(),
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
