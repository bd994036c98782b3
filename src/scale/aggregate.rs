//! The passes of a `read passes` run as aggregate queries, for records
//! that stay where they live (a table or a query on a connection): what a
//! pass over a Parquet input gathers record by record
//! ([`crate::scale::stream`]), the engine gathers here and returns in a
//! few rows.
//!
//! - [`look_query`]: records, gaps, the records kept (no gap where a
//!   `missing drop` rule leaves the record out), each column's values
//!   present among them and their smallest and largest. O(n d), one row.
//! - [`sums_query`]: exact fixed-point sums and counts of expressions over
//!   the kept records ([`crate::engine::exact::Sum`]), one row.
//! - [`ranked_query`]: the value at a rank (0-based, in increasing order)
//!   of an expression over the kept records: an order statistic, exactly.
//!   A sort in the engine: O(n log n).
//! - [`repeated_key_query`]: a key that two records share, if any.
//! - [`segment_sums_query`]: per segment of the nearest centre, records
//!   and the exact sums of carried expressions (original values, `tally`
//!   columns) with their counts, one row per segment that drew records.
//!
//! Every number comes back as text (doubles with every digit, sums as
//! whole numbers), and the same fixed-point integers are formed as here,
//! so a value computed from these rows equals the one a pass computes.

use super::round::{distances, fixed_sum, nearest_case};
use super::sample::Dialect;
use crate::engine::exact::{OutOfRange, Shift, Sum};
use std::fmt::Write as _;

/// An expression read as a double with every digit, as text.
fn as_text(expr: &str) -> String {
    format!("CAST(CAST({expr} AS DOUBLE PRECISION) AS VARCHAR)")
}

/// The predicate of a kept record: none of `dropping` (expressions) is
/// NULL.
pub fn kept_predicate(dropping: &[String]) -> String {
    match dropping.is_empty() {
        true => "1 = 1".to_string(),
        false => dropping
            .iter()
            .map(|e| format!("{e} IS NOT NULL"))
            .collect::<Vec<_>>()
            .join(" AND "),
    }
}

/// The look over `source`: one row of text: the records; each of
/// `columns`' NULLs over every record; the kept records (`kept` a
/// predicate); then for each column among the kept records its values
/// present, smallest and largest.
pub fn look_query(source: &str, columns: &[String], kept: &str) -> String {
    let mut items = vec!["CAST(COUNT(*) AS VARCHAR)".to_string()];
    for c in columns {
        items.push(format!("CAST(COUNT(*) - COUNT({c}) AS VARCHAR)"));
    }
    items.push(format!(
        "CAST(SUM(CASE WHEN {kept} THEN 1 ELSE 0 END) AS VARCHAR)"
    ));
    for c in columns {
        let among = format!("CASE WHEN {kept} THEN {c} END");
        items.push(format!("CAST(COUNT({among}) AS VARCHAR)"));
        items.push(as_text(&format!("MIN({among})")));
        items.push(as_text(&format!("MAX({among})")));
    }
    format!("SELECT {}\nFROM {source}", items.join(",\n       "))
}

/// What [`look_query`] returns, read.
#[derive(Debug, Clone, PartialEq)]
pub struct Looked {
    pub records: u64,
    pub gaps: Vec<u64>,
    pub kept: u64,
    pub present: Vec<u64>,
    /// Each column's smallest value among the kept records (+inf for
    /// none), and largest (-inf for none).
    pub lowest: Vec<f64>,
    pub highest: Vec<f64>,
}

/// Reads [`look_query`]'s row for `d` columns.
pub fn parse_look(row: &[Option<String>], d: usize) -> Result<Looked, String> {
    if row.len() != 2 + 4 * d {
        return Err(format!(
            "the look has {} values, not {}",
            row.len(),
            2 + 4 * d
        ));
    }
    let count = |i: usize| -> Result<u64, String> {
        match row[i].as_deref() {
            // SUM over no record is NULL.
            None => Ok(0),
            Some(t) => t
                .trim()
                .parse()
                .map_err(|_| format!("`{t}` is not a count")),
        }
    };
    let double = |i: usize, empty: f64| -> Result<f64, String> {
        match row[i].as_deref() {
            None => Ok(empty),
            Some(t) => crate::text::parse_number(t).ok_or_else(|| format!("`{t}` is not a number")),
        }
    };
    let mut looked = Looked {
        records: count(0)?,
        gaps: (0..d).map(|j| count(1 + j)).collect::<Result<_, _>>()?,
        kept: count(1 + d)?,
        present: Vec::with_capacity(d),
        lowest: Vec::with_capacity(d),
        highest: Vec::with_capacity(d),
    };
    for j in 0..d {
        let at = 2 + d + 3 * j;
        looked.present.push(count(at)?);
        looked.lowest.push(double(at + 1, f64::INFINITY)?);
        looked.highest.push(double(at + 2, f64::NEG_INFINITY)?);
    }
    Ok(looked)
}

/// Exact sums over the kept records of `source`: one row of text, for each
/// of `exprs` (doubles; NULL is not summed) its fixed-point sum with
/// `shifts[i]` and its count of values.
pub fn sums_query(
    source: &str,
    kept: &str,
    exprs: &[String],
    shifts: &[Shift],
    dialect: Dialect,
) -> String {
    let items: Vec<String> = (exprs.iter().zip(shifts))
        .map(|(e, &s)| {
            let v = format!("CAST({e} AS DOUBLE PRECISION)");
            format!("{}, CAST(COUNT({v}) AS VARCHAR)", fixed_sum(&v, s, dialect))
        })
        .collect();
    format!(
        "SELECT {}\nFROM {source}\nWHERE {kept}",
        items.join(",\n       ")
    )
}

/// Reads [`sums_query`]'s row (`bounds[i]` the largest magnitude of
/// expression `i`, which chose its shift).
pub fn parse_sums(row: &[Option<String>], bounds: &[f64]) -> Result<Vec<Sum>, String> {
    if row.len() != 2 * bounds.len() {
        return Err(format!(
            "the sums have {} values, not {}",
            row.len(),
            2 * bounds.len()
        ));
    }
    (bounds.iter().enumerate())
        .map(|(i, &b)| sum_of(row[2 * i].as_deref(), row[2 * i + 1].as_deref(), b))
        .collect()
}

/// A [`Sum`] of bound `bound` from its total and count as text (a NULL
/// total: nothing summed).
fn sum_of(total: Option<&str>, count: Option<&str>, bound: f64) -> Result<Sum, String> {
    let total: i128 = match total {
        None => 0,
        Some(t) => t
            .trim()
            .parse()
            .map_err(|_| format!("`{t}` is not a whole number"))?,
    };
    let count: u64 = match count {
        None => 0,
        Some(t) => t
            .trim()
            .parse()
            .map_err(|_| format!("`{t}` is not a count"))?,
    };
    Sum::from_total(bound, total, count).map_err(|e: OutOfRange| e.to_string())
}

/// The value at `rank` (0-based, increasing, NULLs left aside) of `expr`
/// over the kept records of `source`, as text; no row past the last.
pub fn ranked_query(source: &str, kept: &str, expr: &str, rank: u64) -> String {
    format!(
        // The text gets a name of its own: `ORDER BY v` would otherwise
        // sort by it (PostgreSQL names a cast of `v` `v`), not by value.
        "SELECT {} AS ranked_value FROM (SELECT CAST({expr} AS DOUBLE PRECISION) AS v FROM {source} WHERE {kept}) AS values_kept\nWHERE v IS NOT NULL\nORDER BY v\nOFFSET {rank} LIMIT 1",
        as_text("v")
    )
}

/// A key (as text) that two records of `source` share, the first in the
/// order `order` (an `ORDER BY` term over the key), or no row.
pub fn repeated_key_query(source: &str, key: &str, order: &str) -> String {
    format!(
        "SELECT CAST({key} AS VARCHAR) AS repeated_key FROM {source}\nGROUP BY {key}\nHAVING COUNT(*) > 1\nORDER BY {order}\nLIMIT 1"
    )
}

/// Per segment of the kept records of `source` (each record's nearest of
/// `centres` by the prepared `features`, ties to the lower number): one
/// row of text: the segment, its records, then for each of `carried`
/// (doubles, NULL not summed) its fixed-point sum with `shifts[i]` and
/// its count of values. Only segments that drew records, in no set order.
pub fn segment_sums_query(
    (source, kept): (&str, &str),
    features: &[String],
    centres: &[f64],
    carried: &[String],
    shifts: &[Shift],
    dialect: Dialect,
) -> String {
    let k = centres.len() / features.len().max(1);
    let filtered = format!("(SELECT * FROM {source} WHERE {kept}) AS kept_records");
    let carried_doubles: Vec<String> = carried
        .iter()
        .map(|c| format!("CAST({c} AS DOUBLE PRECISION)"))
        .collect();
    let mut q = distances(&filtered, features, &carried_doubles, centres);
    let names: Vec<String> = (0..carried.len()).map(|i| format!("c{i}")).collect();
    let _ = writeln!(
        q,
        "placed AS (\n  SELECT {}{}{} AS segment\n  FROM distances\n)",
        names.join(", "),
        if names.is_empty() { "" } else { ", " },
        nearest_case(k, &|s| s.to_string()),
    );
    let sums: Vec<String> = (names.iter().zip(shifts))
        .map(|(c, &s)| format!("{}, CAST(COUNT({c}) AS VARCHAR)", fixed_sum(c, s, dialect)))
        .collect();
    let _ = write!(
        q,
        "SELECT CAST(segment AS VARCHAR), CAST(COUNT(*) AS VARCHAR){}{}\nFROM placed\nGROUP BY placed.segment\n",
        if sums.is_empty() { "" } else { ",\n       " },
        sums.join(",\n       ")
    );
    q
}

/// Reads [`segment_sums_query`]'s rows for `k` segments: each segment's
/// records, and its sums of the carried expressions (bounded by
/// `bounds`), segment after segment.
pub fn parse_segment_sums(
    rows: &[Vec<Option<String>>],
    k: usize,
    bounds: &[f64],
) -> Result<(Vec<u64>, Vec<Sum>), String> {
    let c = bounds.len();
    let mut counts = vec![0u64; k];
    let mut sums: Vec<Sum> = (0..k)
        .flat_map(|_| bounds.iter().map(|&b| Sum::from_total(b, 0, 0)))
        .collect::<Result<_, _>>()
        .map_err(|e| e.to_string())?;
    for row in rows {
        if row.len() != 2 + 2 * c {
            return Err(format!(
                "a segment's row has {} values, not {}",
                row.len(),
                2 + 2 * c
            ));
        }
        let text = |i: usize| row[i].as_deref().unwrap_or_default().trim();
        let s: usize = text(0)
            .parse()
            .ok()
            .filter(|&s| s < k)
            .ok_or_else(|| format!("`{}` is not a segment of {k}", text(0)))?;
        counts[s] = text(1)
            .parse()
            .map_err(|_| format!("`{}` is not a count", text(1)))?;
        for (j, &b) in bounds.iter().enumerate() {
            sums[s * c + j] = sum_of(row[2 + 2 * j].as_deref(), row[3 + 2 * j].as_deref(), b)?;
        }
    }
    Ok((counts, sums))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_look_row_reads_back_and_an_empty_column_has_no_ends() {
        let row: Vec<Option<String>> = ["10", "2", "0", "8", "8", "-1.5", "4.25", "0", "", ""]
            .iter()
            .map(|t| (!t.is_empty()).then(|| t.to_string()))
            .collect();
        let looked = parse_look(&row, 2).unwrap();
        assert_eq!(looked.records, 10);
        assert_eq!(looked.gaps, vec![2, 0]);
        assert_eq!(looked.kept, 8);
        assert_eq!(looked.present, vec![8, 0]);
        assert_eq!(looked.lowest, vec![-1.5, f64::INFINITY]);
        assert_eq!(looked.highest, vec![4.25, f64::NEG_INFINITY]);
        assert!(parse_look(&row[..9], 2).is_err());
    }

    #[test]
    fn sums_read_back_as_the_sums_formed_here() {
        let mut here = Sum::new(3.0).unwrap();
        for x in [1.0, -2.5, 3.0] {
            here.add(x);
        }
        let row = vec![Some(here.fixed_total().to_string()), Some("3".into())];
        let there = parse_sums(&row, &[3.0]).unwrap();
        assert_eq!(there[0], here);
        assert_eq!(there[0].mean(), Some(0.5));
        let none = parse_sums(&[None, Some("0".into())], &[3.0]).unwrap();
        assert_eq!(none[0].mean(), None);
    }

    #[test]
    fn a_rank_is_read_from_the_sorted_kept_values() {
        let q = ranked_query("\"t\"", "\"a\" IS NOT NULL", "\"b\"", 41);
        assert!(q.contains("WHERE \"a\" IS NOT NULL"), "{q}");
        assert!(q.ends_with("ORDER BY v\nOFFSET 41 LIMIT 1"), "{q}");
    }
}
