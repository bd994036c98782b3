//! What every engine that runs SQL where the records are (PostgreSQL, a
//! Ballista cluster) does alike: the queries of a round, of the features'
//! range, of the sample and of the placements ([`super::round`],
//! [`super::sample`]), written in the engine's dialect, and their answers
//! read back. An engine only runs a statement and returns its rows as
//! text.

use super::drive::Rounds;
use super::round::{assign_query, parse_round, round_query};
use super::sample::{sample_query, Dialect};
use crate::engine::exact::{RoundSums, Shifts};

/// An engine that runs one SQL statement at a time where the records are.
pub trait SqlEngine {
    type Error;

    /// The dialect it speaks.
    fn dialect(&self) -> Dialect;

    /// Runs `sql` (which only reads) and returns its rows, every value as
    /// text (`None` for a NULL); a double as the shortest text that reads
    /// back as the same double. `what` names the step for messages.
    fn read(&mut self, sql: &str, what: &str) -> Result<Vec<Vec<Option<String>>>, Self::Error>;

    /// The error of step `what` failing for `reason` (an answer assort
    /// cannot read).
    fn failed(&self, what: &str, reason: String) -> Self::Error;

    /// One k-means round over `source` (see [`super::round`]).
    fn round(
        &mut self,
        source: &str,
        features: &[String],
        centres: &[f64],
        shifts: &Shifts,
    ) -> Result<RoundSums, Self::Error> {
        let d = features.len();
        let query = round_query(source, features, centres, shifts, self.dialect());
        let rows = self.read(&query, "a k-means round")?;
        let text: Vec<Vec<String>> = rows
            .into_iter()
            .map(|r| r.into_iter().map(Option::unwrap_or_default).collect())
            .collect();
        parse_round(&text, centres.len() / d.max(1), d)
            .map_err(|reason| self.failed("reading a round's sums", reason))
    }

    /// The largest magnitude of each of `features` (SQL expressions over
    /// `source`), exact: what the exact sums' shifts are chosen from.
    /// NULLs are left aside.
    fn largest(&mut self, source: &str, features: &[String]) -> Result<Vec<f64>, Self::Error> {
        let list: Vec<String> = features
            .iter()
            .map(|f| double_out(&format!("MAX(ABS({f}))"), self.dialect()))
            .collect();
        let sql = format!("SELECT {} FROM {source}", list.join(", "));
        let row = self
            .read(&sql, "measuring the features' range")?
            .into_iter()
            .next()
            .unwrap_or_default();
        Ok(row
            .iter()
            .map(|v| {
                v.as_deref()
                    .and_then(crate::text::parse_number)
                    .unwrap_or(0.0)
            })
            .collect())
    }

    /// The seeded sample of `size` records of `source` keyed by `key`, in
    /// rank order ([`super::sample`]): their keys and `features` (SQL
    /// expressions) as doubles, one slice row by row. A value that is
    /// NULL or not a number is an error naming the record's key.
    fn sample(
        &mut self,
        source: &str,
        key: &str,
        features: &[String],
        (seed, size): (u64, usize),
    ) -> Result<(Vec<String>, Vec<f64>), Self::Error> {
        let dialect = self.dialect();
        let columns: Vec<String> = features.iter().map(|f| double_out(f, dialect)).collect();
        let sql = sample_query(source, key, &columns, seed, size, dialect);
        let rows = self.read(&sql, "drawing the sample")?;
        let mut keys = Vec::with_capacity(rows.len());
        let mut values = Vec::with_capacity(rows.len() * features.len());
        for row in rows {
            let mut cells = row.into_iter();
            let k = cells.next().flatten().unwrap_or_default();
            for (j, v) in cells.enumerate() {
                match v.as_deref().and_then(crate::text::parse_number) {
                    Some(x) => values.push(x),
                    None => {
                        let is = v.map_or("NULL".into(), |v| format!("`{v}`, not a number"));
                        let reason = format!("feature {} of the record keyed `{k}` is {is}", j + 1);
                        return Err(self.failed("drawing the sample", reason));
                    }
                }
            }
            keys.push(k);
        }
        Ok((keys, values))
    }

    /// Every record's key (as text) and the number (from 0) of its nearest
    /// of `centres`, placed as a round places it; in no set order.
    fn assign(
        &mut self,
        source: &str,
        key: &str,
        features: &[String],
        centres: &[f64],
    ) -> Result<Vec<(String, usize)>, Self::Error> {
        let k = centres.len() / features.len().max(1);
        let sql = assign_query(source, key, features, centres);
        let rows = self.read(&sql, "placing the records")?;
        let mut placed = Vec::with_capacity(rows.len());
        for row in rows {
            let key = row.first().cloned().flatten().unwrap_or_default();
            match row.get(1).cloned().flatten().and_then(|s| s.parse().ok()) {
                Some(s) if s < k => placed.push((key, s)),
                _ => {
                    let reason = format!("the record keyed `{key}` came back without a segment");
                    return Err(self.failed("placing the records", reason));
                }
            }
        }
        Ok(placed)
    }
}

/// `expr` selected as a double the engine returns exactly: PostgreSQL's
/// text of a double is exact (the connection asks for
/// `extra_float_digits = 3`); a DataFusion double arrives as a double.
fn double_out(expr: &str, dialect: Dialect) -> String {
    match dialect {
        Dialect::Postgres => format!("CAST(CAST({expr} AS DOUBLE PRECISION) AS TEXT)"),
        Dialect::DataFusion => format!("CAST({expr} AS DOUBLE PRECISION)"),
    }
}

/// Rounds run by an engine over `source` (as it may follow `FROM`), whose
/// `features` are SQL expressions of the prepared values.
pub struct InEngine<'a, E> {
    pub engine: &'a mut E,
    pub source: String,
    pub features: Vec<String>,
    pub shifts: &'a Shifts,
}

impl<E: SqlEngine> Rounds for InEngine<'_, E> {
    type Error = E::Error;
    fn round(&mut self, centres: &[f64]) -> Result<RoundSums, E::Error> {
        self.engine
            .round(&self.source, &self.features, centres, self.shifts)
    }
}
