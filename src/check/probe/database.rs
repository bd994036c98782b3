//! A look at an input in a database before the run: its columns and
//! their types, the first [`SAMPLE_ROWS`] records in key order, the record
//! count and whether any key is blank, all read in read-only transactions
//! (docs/scale-out.md). A record's "line" is its place in the table read
//! in key order, as in the same table written as CSV.

use super::{ColumnInfo, ColumnKind, DecimalMark, Probe, SAMPLE_ROWS};
use crate::scale::postgres::Target;
use crate::scale::source::{Class, Source};
use crate::sql_words::ident;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// What the checker learns of a database input.
#[derive(Debug, Clone)]
pub struct Looked {
    pub probe: Arc<Probe>,
    /// Each column's class, in the probe's order.
    pub classes: Vec<Class>,
    /// Why the key cannot identify records, in words, if it cannot.
    pub key_problem: Option<String>,
    /// The connection in words, without its password.
    pub target: String,
}

/// How long a look is reused (the language server checks at every
/// keystroke; a table can change under it).
const FRESH_FOR: Duration = Duration::from_secs(60);

type Seen = Mutex<Vec<((Source, String), Instant, Result<Looked, String>)>>;
static SEEN: Seen = Mutex::new(Vec::new());

/// Looks at `source` keyed by `key`, or reuses a look under a minute old.
/// The error names the connection (and the table). A failure is kept as
/// long as a look: an editor checks at every keystroke, and a server that
/// cannot be reached would otherwise hold each check for the connection's
/// whole timeout.
pub fn look(source: &Source, key: &str) -> Result<Looked, String> {
    let id = (source.clone(), key.to_string());
    if let Ok(seen) = SEEN.lock() {
        if let Some((_, _, l)) = seen
            .iter()
            .find(|(k, at, _)| *k == id && at.elapsed() < FRESH_FOR)
        {
            return l.clone();
        }
    }
    let looked = look_now(source, key);
    // A poisoned lock only means another thread panicked mid-update; the
    // look is then not kept.
    if let Ok(mut seen) = SEEN.lock() {
        seen.retain(|(k, at, _)| *k != id && at.elapsed() < FRESH_FOR);
        seen.push((id, Instant::now(), looked.clone()));
    }
    looked
}

fn look_now(source: &Source, key: &str) -> Result<Looked, String> {
    let env = |name: &str| std::env::var(name).ok();
    let target = Target::resolve(&source.connection, &env).map_err(|e| e.to_string())?;
    let mut db = target.connect().map_err(|e| e.to_string())?;
    let typed = db.columns(source).map_err(|e| e.to_string())?;
    if typed.is_empty() {
        return Err(format!("{} has no columns", source.describe()));
    }
    let names: Vec<&str> = typed.iter().map(|(n, _)| n.as_str()).collect();
    let key_class = typed.iter().find(|(n, _)| n == key).map(|(_, c)| c);
    let sql = match key_class {
        Some(class) => source.first_in_key_order(&names, key, class, SAMPLE_ROWS),
        None => source.select_text(&names, None, Some(SAMPLE_ROWS)),
    };
    let mut columns: Vec<ColumnInfo> = names.iter().map(|n| ColumnInfo::new(n)).collect();
    let mut sampled = 0u64;
    let mut keys: Vec<Option<String>> = Vec::new();
    let key_at = names.iter().position(|n| *n == key);
    db.each_row(&sql, &format!("reading {}", source.describe()), |row| {
        sampled += 1;
        for (c, v) in columns.iter_mut().zip(row) {
            c.observe(v.unwrap_or(""), sampled + 1, DecimalMark::Point);
        }
        if let Some(at) = key_at {
            keys.push(row.get(at).copied().flatten().map(str::to_string));
        }
        Ok::<(), ()>(())
    })
    .map_err(|e| e.to_string())?
    .ok();
    for (c, (_, class)) in columns.iter_mut().zip(&typed) {
        if let Class::Other(what) = class {
            c.kind = ColumnKind::Text;
            c.unsupported = Some(what.clone());
        }
    }
    let (rows, blank) = count(&mut db, source, key_class.map(|_| key))?;
    let key_problem = match blank {
        0 => repeated_in_sample(&keys),
        b => Some(format!(
            "{b} of its {rows} records have no key (NULL or blank)"
        )),
    };
    Ok(Looked {
        probe: Arc::new(Probe {
            columns,
            sampled: sampled as usize,
            rows: Some(rows),
            estimated_rows: None,
        }),
        classes: typed.into_iter().map(|(_, c)| c).collect(),
        key_problem,
        target: target.describe(),
    })
}

/// The record count and how many keys are NULL or blank (when the key
/// is a column), in one scan.
fn count(
    db: &mut crate::scale::postgres::Database,
    source: &Source,
    key: Option<&str>,
) -> Result<(usize, usize), String> {
    let blank = match key.map(ident) {
        Some(k) => format!("COUNT(*) FILTER (WHERE {k} IS NULL OR BTRIM(CAST({k} AS TEXT)) = '')"),
        None => "0".into(),
    };
    let sql = format!(
        "SELECT CAST(COUNT(*) AS TEXT), CAST({blank} AS TEXT) FROM {}",
        source.from_sql()
    );
    let rows = db
        .read(&sql, &format!("counting {}", source.describe()))
        .map_err(|e| e.to_string())?;
    let number = |i: usize| -> usize {
        rows.first()
            .and_then(|r| r.get(i).cloned().flatten())
            .and_then(|t| t.parse().ok())
            .unwrap_or(0)
    };
    Ok((number(0), number(1)))
}

/// A key given twice among the sampled keys, which come in key order (so
/// a repeat is next to its first).
fn repeated_in_sample(keys: &[Option<String>]) -> Option<String> {
    keys.windows(2).enumerate().find_map(|(i, w)| {
        (w[0].is_some() && w[0] == w[1]).then(|| {
            format!(
                "key `{}` is given to two records (lines {} and {} in key order)",
                crate::check::clipped(w[0].as_deref().unwrap_or(""), 40),
                i + 2,
                i + 3
            )
        })
    })
}
