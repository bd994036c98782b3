//! One k-means round as one aggregate SQL query, for an engine that holds
//! the records: each record placed at its nearest centre (ties to the
//! lower number), then per segment its record count, each feature's
//! fixed-point sum and the fixed-point within-segment sum of squares, as
//! [`crate::engine::exact`] defines them. The answer has at most k rows
//! of d + 3 numbers: all that leaves the engine.
//!
//! The query computes exactly what the in-memory round computes, so the
//! sums are equal to the last digit:
//! - squared distances are summed feature by feature from the first, as
//!   `(x0 - c0) * (x0 - c0) + (x1 - c1) * (x1 - c1) + ...`, which SQL reads
//!   from the left, in doubles (IEEE 754, no fused multiply-add);
//! - centres and powers of two are written with every digit a double needs
//!   and cast to `DOUBLE PRECISION`, so the engine holds the same doubles;
//! - a value becomes `FLOOR(x * 2^s)`, cast to `BIGINT` (exact: it is an
//!   integer below 2^61), and the bigints are summed: PostgreSQL's `SUM`
//!   of `BIGINT` is a `NUMERIC`, accumulated exactly (in 128-bit integers
//!   where the platform has them, which is 18 % faster per round than
//!   summing decimals). A double cast straight to a decimal would be
//!   rounded to 15 significant digits by PostgreSQL (seen with version 15:
//!   tests/scale_postgres.rs fails when the query casts so). DataFusion's
//!   sum of bigints is a bigint, so there each bigint is cast to
//!   `DECIMAL(38, 0)` (a 128-bit integer, exact) before the sum;
//! - sums come back as text, so no client library rounds them.
//!
//! Cost in the engine: one scan, O(n d k), and a k-row aggregate.

use super::sample::Dialect;
use crate::engine::exact::{RoundSums, Shift, Shifts};
use crate::sql_words::{nearest_branch, number};
use std::fmt::Write as _;

/// A double literal: the value's every digit, cast so that the engine does
/// not read it as an exact decimal.
fn double(v: f64) -> String {
    format!("CAST({} AS DOUBLE PRECISION)", number(v))
}

/// The integer a value is summed as, in SQL, summed exactly (see the
/// module documentation): PostgreSQL sums bigints into a `NUMERIC`;
/// DataFusion's sum of bigints is a bigint, so each is cast to
/// `DECIMAL(38, 0)` (a 128-bit integer) first.
pub(crate) fn fixed_sum(value: &str, shift: Shift, dialect: Dialect) -> String {
    let fixed = format!(
        "CAST(FLOOR({value} * {}) AS BIGINT)",
        double(shift.factor())
    );
    let summed = match dialect {
        Dialect::Postgres => fixed,
        Dialect::DataFusion => format!("CAST({fixed} AS DECIMAL(38, 0))"),
    };
    format!("CAST(SUM({summed}) AS VARCHAR)")
}

/// The steps every record goes through before it is placed: `prepared`
/// (the features as doubles `x0`, `x1`, ..., beside the `carried`
/// expressions as `c0`, `c1`, ...) and `distances` (each record's squared
/// distance `d0`, `d1`, ... to each of `centres`), as the start of a
/// `WITH` that goes on.
pub(crate) fn distances(
    source: &str,
    features: &[String],
    carried: &[String],
    centres: &[f64],
) -> String {
    let d = features.len();
    let k = centres.len() / d.max(1);
    let xs: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    let mut kept = xs.clone();
    let mut selected: Vec<String> = (features.iter().zip(&xs))
        .map(|(f, x)| format!("CAST({f} AS DOUBLE PRECISION) AS {x}"))
        .collect();
    for (i, c) in carried.iter().enumerate() {
        selected.push(format!("{c} AS c{i}"));
        kept.push(format!("c{i}"));
    }
    // `OFFSET 0` here too: a feature that is an expression (a fill, a
    // clip, a scaling) would otherwise be written out again in each of the
    // 2k terms of the distances that name it.
    let mut q = String::from("WITH prepared AS (\n  SELECT ");
    let _ = writeln!(
        q,
        "{}\n  FROM {source}\n  OFFSET 0\n),",
        selected.join(",\n         ")
    );
    let _ = write!(q, "distances AS (\n  SELECT {}", kept.join(", "));
    for s in 0..k {
        let terms: Vec<String> = (xs.iter().enumerate())
            .map(|(j, x)| {
                let c = double(centres[s * d + j]);
                format!("({x} - {c}) * ({x} - {c})")
            })
            .collect();
        let _ = write!(q, ",\n         {} AS d{s}", terms.join(" + "));
    }
    // `OFFSET 0` keeps the distances a step of their own: a database that
    // folds steps into one another (PostgreSQL does, for a step read
    // once) would otherwise write each distance out again wherever the
    // next step names it, computing it about 2k times instead of once.
    let _ = writeln!(q, "\n  FROM prepared\n  OFFSET 0\n),");
    q
}

/// A `CASE` over the distances of `k` centres whose branch for centre `s`
/// gives `then(s)`: the nearest centre, ties to the lower number.
pub(crate) fn nearest_case(k: usize, then: &dyn Fn(usize) -> String) -> String {
    let branches: Vec<String> = (0..k)
        .map(|s| format!("{} {}", nearest_branch(s, k), then(s)))
        .collect();
    format!("CASE {} END", branches.join(" "))
}

/// The query for one round over `source` (a table or a parenthesised query
/// with an alias, as it may follow `FROM`), whose prepared features are
/// the SQL expressions `features` (doubles, no gaps), with `centres` (k
/// rows of d in one slice). Rows, every value text: segment, records, d
/// sums, within; only segments that drew records, in no set order.
pub fn round_query(
    source: &str,
    features: &[String],
    centres: &[f64],
    shifts: &Shifts,
    dialect: Dialect,
) -> String {
    let d = features.len();
    let k = centres.len() / d.max(1);
    let xs: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    let mut q = distances(source, features, &[], centres);
    let _ = writeln!(
        q,
        "placed AS (\n  SELECT {},\n         {} AS segment,\n         {} AS nearest\n  FROM distances\n)",
        xs.join(", "),
        nearest_case(k, &|s| s.to_string()),
        nearest_case(k, &|s| format!("d{s}")),
    );
    let sums: Vec<String> = (xs.iter().zip(&shifts.features))
        .map(|(x, &shift)| format!("{} AS sum{}", fixed_sum(x, shift, dialect), &x[1..]))
        .collect();
    let _ = write!(
        q,
        "SELECT CAST(segment AS VARCHAR) AS segment, CAST(COUNT(*) AS VARCHAR) AS records,\n       {},\n       {} AS within\nFROM placed\nGROUP BY placed.segment\n",
        sums.join(",\n       "),
        fixed_sum("nearest", shifts.within, dialect)
    );
    q
}

/// The query placing every record of `source` at its nearest of `centres`
/// as a round does: rows of the key (as text) and the segment's number
/// (from 0), in no set order. O(n d k) in the engine; every record's key
/// leaves it.
pub fn assign_query(source: &str, key: &str, features: &[String], centres: &[f64]) -> String {
    let k = centres.len() / features.len().max(1);
    let mut q = distances(
        source,
        features,
        &[format!("CAST({key} AS VARCHAR)")],
        centres,
    );
    let _ = write!(
        q,
        "placed AS (\n  SELECT c0 AS record_key, {} AS segment\n  FROM distances\n)\nSELECT record_key, segment FROM placed\n",
        nearest_case(k, &|s| s.to_string())
    );
    q
}

/// The sums of a round from the query's rows (each as text, in the order
/// [`round_query`] selects them), or what is wrong with them.
pub fn parse_round(rows: &[Vec<String>], k: usize, d: usize) -> Result<RoundSums, String> {
    let mut sums = RoundSums::new(k, d);
    for row in rows {
        if row.len() != d + 3 {
            return Err(format!(
                "a round's row has {} values, not {}",
                row.len(),
                d + 3
            ));
        }
        let segment: usize = row[0]
            .trim()
            .parse()
            .ok()
            .filter(|&s| s < k)
            .ok_or_else(|| format!("`{}` is not a segment of {k}", row[0]))?;
        let int = |t: &str| -> Result<i128, String> {
            t.trim()
                .parse()
                .map_err(|_| format!("`{t}` is not a whole number"))
        };
        sums.counts[segment] =
            u64::try_from(int(&row[1])?).map_err(|_| format!("`{}` is not a count", row[1]))?;
        for j in 0..d {
            sums.sums[segment * d + j] = int(&row[2 + j])?;
        }
        sums.within += int(&row[d + 2])?;
    }
    Ok(sums)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_query_names_each_centre_and_reads_every_value_as_a_double() {
        let shifts = Shifts::of(&[2.0, 0.5]).unwrap();
        let q = round_query(
            "\"members\"",
            &["\"a\"".into(), "\"b\"".into()],
            &[0.0, 0.1, 1.5, -0.25],
            &shifts,
            Dialect::Postgres,
        );
        assert!(q.contains("FROM \"members\""), "{q}");
        assert!(q.contains("(x0 - CAST(1.5 AS DOUBLE PRECISION)) * (x0 - CAST(1.5 AS DOUBLE PRECISION)) + (x1 - CAST(-0.25 AS DOUBLE PRECISION))"), "{q}");
        assert!(
            q.contains("CASE WHEN d0 <= d1 THEN 0 ELSE 1 END AS segment"),
            "{q}"
        );
        // 2 lies in [2, 4): e = 2, shift 59.
        assert!(
            q.contains(&format!(
                "FLOOR(x0 * CAST({:?} AS DOUBLE PRECISION)) AS BIGINT)",
                2f64.powi(59)
            )),
            "{q}"
        );
    }

    #[test]
    fn rows_read_back_as_sums_and_bad_rows_are_named() {
        let rows = vec![vec![
            "1".into(),
            "3".into(),
            "-12".into(),
            "170141183460469231731687303715884105".into(),
            "9".into(),
        ]];
        let s = parse_round(&rows, 2, 2).unwrap();
        assert_eq!(s.counts, vec![0, 3]);
        assert_eq!(s.sums[2], -12);
        assert_eq!(s.sums[3], 170_141_183_460_469_231_731_687_303_715_884_105);
        assert_eq!(s.within, 9);
        assert!(parse_round(&[vec!["5".into(); 5]], 2, 2)
            .unwrap_err()
            .contains("not a segment"));
        assert!(parse_round(
            &[vec![
                "0".into(),
                "1.5".into(),
                "0".into(),
                "0".into(),
                "0".into()
            ]],
            2,
            2
        )
        .is_err());
        assert!(parse_round(&[vec!["0".into()]], 2, 2).is_err());
    }
}
