//! `read passes` over a table or a query on a connection: the records stay
//! in the database. Each pass of [`super`] is an aggregate query there
//! ([`crate::scale::aggregate`]); a k-means round is one query
//! ([`crate::scale::round`]); the sample is drawn there by rank. What
//! leaves the database: a few rows per pass, k rows per round, the sample,
//! and at the end the assignments, read in key order.
//!
//! The prepared features are written as SQL with the parameters' exact
//! doubles: the value (a typed number as itself, text parsed as a number,
//! blank as a gap), its fill (`COALESCE`), its clip (`CASE`), then
//! `(v - centre) / divisor * multiplier`, the arithmetic
//! [`crate::run::model`] does, so the database places each record where
//! assort does. A transform (`LN`, `SQRT`) may differ from assort's own in
//! the last bit, so the check refuses one with this route.

use super::{Gather, Look, Place, RunError, Value};
use crate::engine::exact::Sum;
use crate::plan::{MissingRule, Plan};
use crate::run::prepare::FeatureParams;
use crate::scale::aggregate;
use crate::scale::postgres::{Database, DbError, Target};
use crate::scale::sample::Dialect;
use crate::scale::source::{Class, Source};
use crate::sql_words::{ident, number};
use std::sync::{Arc, Mutex};

/// A double literal the database holds exactly.
fn double(v: f64) -> String {
    format!("CAST({} AS DOUBLE PRECISION)", number(v))
}

/// The input on its connection, and how each column it reads is written.
#[derive(Clone)]
pub struct InDatabase {
    db: Arc<Mutex<Database>>,
    /// The connection in words (no secret).
    pub target: String,
    pub shown: String,
    /// The source as it follows `FROM`.
    from: String,
    key: String,
    /// The `ORDER BY` term of key order.
    order: String,
    /// Each feature's value, then each `tally` column's, as a double (NULL
    /// for a gap).
    columns: Vec<String>,
    /// The predicate of a kept record (no gap a `missing drop` rule drops).
    kept: String,
    /// The key's, the features' and the `tally` columns' names, for places.
    names: Vec<String>,
}

impl std::fmt::Debug for InDatabase {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.shown)
    }
}

fn database(e: DbError) -> RunError {
    RunError::Database {
        reason: e.to_string(),
    }
}

impl InDatabase {
    /// Connects and reads the types of the columns the plan reads.
    pub fn open(plan: &Plan, source: &Source) -> Result<InDatabase, RunError> {
        let env = |v: &str| std::env::var(v).ok();
        let target = Target::resolve(&source.connection, &env).map_err(database)?;
        let mut db = target.connect().map_err(database)?;
        let typed = db.columns(source).map_err(database)?;
        let shown = source.describe();
        let class = |name: &str| -> Result<Class, RunError> {
            match typed.iter().find(|(n, _)| n == name) {
                None => Err(RunError::ColumnGone {
                    file: shown.clone(),
                    column: name.to_string(),
                }),
                Some((_, Class::Other(what))) => Err(RunError::Database {
                    reason: format!(
                        "column `{name}` of {shown} holds {what}, which assort does not read"
                    ),
                }),
                Some((_, c)) => Ok(c.clone()),
            }
        };
        let key = &plan.input.key;
        let order = crate::scale::source::key_order(key, &class(key)?);
        let read: Vec<&str> = (plan.features.iter().map(|f| f.column.as_str()))
            .chain(plan.tally.iter().map(String::as_str))
            .collect();
        let columns = read
            .iter()
            .map(|c| {
                Ok(match class(c)? {
                    Class::Number => format!("CAST({} AS DOUBLE PRECISION)", ident(c)),
                    Class::Single => {
                        format!("CAST(CAST({} AS TEXT) AS DOUBLE PRECISION)", ident(c))
                    }
                    _ => crate::output::sql::read_number(c),
                })
            })
            .collect::<Result<Vec<String>, RunError>>()?;
        let mut names = vec![key.clone()];
        names.extend(read.iter().map(|c| c.to_string()));
        Ok(InDatabase {
            db: Arc::new(Mutex::new(db)),
            target: target.describe(),
            from: source.from_sql(),
            key: ident(key),
            order,
            kept: kept(plan, &columns),
            columns,
            names,
            shown,
        })
    }

    /// Runs `sql`; its rows as text.
    fn read(&self, sql: &str, what: &str) -> Result<Vec<Vec<Option<String>>>, RunError> {
        let mut db = self.db.lock().unwrap_or_else(|p| p.into_inner());
        db.read(sql, what).map_err(database)
    }

    /// The first row's first value, as a whole number.
    fn count(&self, sql: &str, what: &str) -> Result<u64, RunError> {
        let rows = self.read(sql, what)?;
        let text = rows.first().and_then(|r| r.first()).cloned().flatten();
        text.as_deref()
            .unwrap_or("0")
            .trim()
            .parse()
            .map_err(|_| self.odd(what, "a count that is not a whole number"))
    }

    fn odd(&self, what: &str, reason: &str) -> RunError {
        RunError::Database {
            reason: format!("{what} over {} returned {reason}", self.shown),
        }
    }

    /// Records before the first in key order that `condition` picks: its
    /// place (0-based) among every record in key order.
    fn place_of_first(&self, condition: &str) -> Result<usize, RunError> {
        let (from, order) = (&self.from, &self.order);
        let sql = format!(
            "SELECT CAST(COUNT(*) AS TEXT) FROM {from} WHERE {order} < (SELECT {order} FROM {from} WHERE {condition} ORDER BY {order} LIMIT 1)"
        );
        Ok(self.count(&sql, "finding a record's place")? as usize)
    }

    /// The look: records, gaps, kept records, each column's values present
    /// and ends among them; the first kept record with a gap of a feature
    /// whose rule refuses gaps.
    pub(super) fn look(&self, plan: &Plan) -> Result<Look, RunError> {
        let d = self.columns.len();
        let sql = aggregate::look_query(&self.from, &self.columns, &self.kept);
        let rows = self.read(&sql, "the look")?;
        let row = rows.first().ok_or_else(|| self.odd("the look", "no row"))?;
        let looked = aggregate::parse_look(row, d).map_err(|r| self.odd("the look", &r))?;
        let mut first_gap = vec![None; d];
        for (f, fp) in plan.features.iter().enumerate() {
            if fp.missing == MissingRule::Refuse && looked.present[f] < looked.kept {
                let condition = format!("{} AND {} IS NULL", self.kept, self.columns[f]);
                first_gap[f] = Some(self.place_of_first(&condition)?);
            }
        }
        Ok(Look {
            records: looked.records,
            kept: looked.kept,
            gaps: looked.gaps,
            present: looked.present,
            lowest: looked.lowest,
            highest: looked.highest,
            first_gap,
            ranks: Vec::new(),
            draw: crate::scale::stream::Draw::new(0),
        })
    }

    /// Refuses a record without a key, and a key two records share (the
    /// first in key order; in key order the two are neighbours).
    pub(super) fn keys_once(&self) -> Result<(), RunError> {
        let (from, key) = (&self.from, &self.key);
        let blank = format!("{key} IS NULL OR TRIM(CAST({key} AS TEXT)) = ''");
        let missing = self.count(
            &format!("SELECT CAST(COUNT(*) AS TEXT) FROM {from} WHERE {blank}"),
            "counting records without a key",
        )?;
        if missing > 0 {
            return Err(RunError::Database {
                reason: format!(
                    "{} of {} have no key (NULL or blank); every record needs one",
                    crate::text::thousands(missing as usize),
                    self.shown
                ),
            });
        }
        let sql = aggregate::repeated_key_query(from, key, &self.order);
        let rows = self.read(&sql, "looking for a repeated key")?;
        if let Some(twice) = rows.first().and_then(|r| r.first()).cloned().flatten() {
            let first = self.place_of_first(&format!(
                "CAST({key} AS TEXT) = {}",
                crate::sql_words::text(&twice)
            ))?;
            return Err(RunError::DuplicateKey {
                place: Place::of_record(&self.shown, &self.names, 0, first + 1),
                key: twice,
                first_line: first as u64 + 2,
            });
        }
        Ok(())
    }

    /// The sample: the `size` kept records of smallest rank, in rank order,
    /// their keys and the features' and `tally` columns' values.
    pub(super) fn sample(&self, seed: u64, size: usize) -> Result<Vec<super::Drawn>, RunError> {
        let kept = self.kept_source();
        let columns: Vec<String> = self
            .columns
            .iter()
            .map(|c| format!("CAST({c} AS TEXT)"))
            .collect();
        let sql = crate::scale::sample::sample_query(
            &kept,
            &self.key,
            &columns,
            seed,
            size,
            Dialect::Postgres,
        );
        // Streamed, each row parsed as it arrives: the sample is held as
        // numbers, never as the text of its rows.
        let mut drawn: Vec<super::Drawn> = Vec::new();
        let bad = || self.odd("drawing the sample", "a value that is not a number");
        let mut db = self.engine();
        db.each_row(&sql, "drawing the sample", |row| {
            let key = row.first().copied().flatten().unwrap_or_default();
            let values = (row[1..].iter())
                .map(|v| match v {
                    None => Ok(None),
                    Some(t) => crate::text::parse_number(t).map(Some).ok_or_else(bad),
                })
                .collect::<Result<Vec<Option<f64>>, RunError>>()?;
            drawn.push((
                crate::scale::sample::digest(seed, key),
                key.to_string(),
                values,
            ));
            Ok(())
        })
        .map_err(database)??;
        Ok(drawn)
    }

    /// The kept records as a source.
    pub(super) fn kept_source(&self) -> String {
        format!(
            "(SELECT * FROM {} WHERE {}) AS kept_records",
            self.from, self.kept
        )
    }

    /// Feature `f` prepared by `p`, in SQL ([`crate::run::model`]'s
    /// arithmetic).
    pub(super) fn prepared(&self, p: &FeatureParams, f: usize) -> String {
        prepared(p, &self.columns[f])
    }

    /// Runs the rounds of a fit: the driver's engine over the kept records.
    pub(super) fn engine(&self) -> std::sync::MutexGuard<'_, Database> {
        self.db.lock().unwrap_or_else(|p| p.into_inner())
    }
}

/// The predicate of a kept record, over each feature's value `columns`
/// (then any `tally` column's): no gap a `missing drop` rule drops.
pub(super) fn kept(plan: &Plan, columns: &[String]) -> String {
    let dropping: Vec<String> = (plan.features.iter().zip(columns))
        .filter(|(f, _)| f.missing == MissingRule::DropRow)
        .map(|(_, c)| c.clone())
        .collect();
    aggregate::kept_predicate(&dropping)
}

/// A feature prepared by `p` from its value `column` (a double, NULL for
/// a gap), in SQL: [`crate::run::model`]'s arithmetic, with the
/// parameters' exact doubles.
pub(super) fn prepared(p: &FeatureParams, column: &str) -> String {
    if p.constant {
        return double(0.0);
    }
    let t = reshaped(p, column);
    format!(
        "((({t}) - {}) / {}) * {}",
        double(p.centre),
        double(p.divisor),
        double(p.multiplier)
    )
}

/// A value filled.
fn filled(p: &FeatureParams, column: &str) -> String {
    match p.fill {
        Some(v) => format!("COALESCE({column}, {})", double(v)),
        None => column.to_string(),
    }
}

/// A value filled and clipped (as `f64::clamp`).
fn reshaped(p: &FeatureParams, column: &str) -> String {
    let v = filled(p, column);
    match p.clip {
        Some((lo, hi)) => format!(
            "(CASE WHEN {v} < {lo} THEN {lo} WHEN {v} > {hi} THEN {hi} ELSE {v} END)",
            lo = double(lo),
            hi = double(hi)
        ),
        None => v,
    }
}

impl Value<'_> {
    /// The value in SQL over `column` (feature `f`), `NULL` for nothing.
    fn sql(self, plan: &Plan, f: usize, column: &str) -> String {
        match self {
            Value::ForMean if plan.features[f].missing == MissingRule::FillMean => column.into(),
            Value::ForMean => "NULL".into(),
            Value::Present => column.into(),
            Value::Filled(params) => filled(&params[f], column),
            Value::Reshaped(params) => reshaped(&params[f], column),
            Value::Deviation(params, means) => {
                let t = reshaped(&params[f], column);
                let m = double(means[f]);
                format!("(({t}) - {m}) * (({t}) - {m})")
            }
        }
    }
}

impl Gather for InDatabase {
    fn sums(&self, plan: &Plan, bounds: &[f64], value: Value<'_>) -> Result<Vec<Sum>, RunError> {
        let d = plan.features.len();
        let shifts = (bounds.iter().enumerate())
            .map(|(f, &b)| {
                Sum::new(b)
                    .map(|s| s.shift())
                    .map_err(|e| super::out_of_range(&plan.features[f].column, e))
            })
            .collect::<Result<Vec<_>, _>>()?;
        let exprs: Vec<String> = (0..d)
            .map(|f| value.sql(plan, f, &self.columns[f]))
            .collect();
        let sql = aggregate::sums_query(&self.from, &self.kept, &exprs, &shifts, Dialect::Postgres);
        let rows = self.read(&sql, "exact sums")?;
        let row = rows
            .first()
            .ok_or_else(|| self.odd("exact sums", "no row"))?;
        aggregate::parse_sums(row, bounds).map_err(|r| self.odd("exact sums", &r))
    }

    fn select(
        &self,
        plan: &Plan,
        _counts: &[u64],
        wants: &[(usize, u64)],
        value: Value<'_>,
    ) -> Result<Vec<f64>, RunError> {
        let mut found: Vec<((usize, u64), f64)> = Vec::new();
        for &(f, rank) in wants {
            if let Some(&(_, v)) = found.iter().find(|(w, _)| *w == (f, rank)) {
                found.push(((f, rank), v));
                continue;
            }
            let expr = value.sql(plan, f, &self.columns[f]);
            let sql = aggregate::ranked_query(&self.from, &self.kept, &expr, rank);
            let rows = self.read(&sql, "an order statistic")?;
            let v = rows
                .first()
                .and_then(|r| r.first())
                .cloned()
                .flatten()
                .as_deref()
                .and_then(crate::text::parse_number)
                .ok_or_else(|| self.odd("an order statistic", "no value"))?;
            found.push(((f, rank), v));
        }
        Ok(found.into_iter().map(|(_, v)| v).collect())
    }

    fn first_failing(&self, _: &Plan, _: &FeatureParams, _: usize) -> Option<(usize, f64)> {
        // No transform reaches this route (the check refuses one), and
        // filling and clipping take every value.
        None
    }

    fn place(&self, f: usize, record: usize) -> Place {
        Place::of_record(&self.shown, &self.names, f + 1, record)
    }
}

impl InDatabase {
    /// Each segment's exact sums over every kept record, as one query
    /// grouped by the nearest of `centres`: records, the original (filled)
    /// values and the gaps filled per feature, the `tally` columns' known
    /// values.
    pub(super) fn segment_sums(
        &self,
        plan: &Plan,
        params: &[FeatureParams],
        centres: &[f64],
        look: &Look,
    ) -> Result<super::SegmentSums, RunError> {
        let d = params.len();
        let k = centres.len() / d.max(1);
        let t = plan.tally.len();
        let zero = super::SegmentSums::zero(plan, params, look, k)?;
        // Carried: each feature filled, each feature as it is (its count
        // is the values present), each `tally` column.
        let mut carried: Vec<String> = (params.iter().zip(&self.columns))
            .map(|(p, c)| filled(p, c))
            .collect();
        carried.extend(self.columns[..d].iter().cloned());
        carried.extend(self.columns[d..].iter().cloned());
        let sum_of = |s: &Sum| s.shift();
        let mut bounds: Vec<f64> = Vec::with_capacity(carried.len());
        let mut shifts = Vec::with_capacity(carried.len());
        for (f, s) in zero.values[..d].iter().enumerate() {
            bounds.push(bound_of(
                look,
                f,
                params[f].fill.filter(|_| params[f].filled > 0),
            ));
            shifts.push(sum_of(s));
        }
        for f in 0..d {
            bounds.push(bounds[f]);
            shifts.push(shifts[f]);
        }
        for (j, s) in zero.tallies[..t].iter().enumerate() {
            let b = bound_of(look, d + j, None);
            bounds.push(if b.is_finite() { b } else { 0.0 });
            shifts.push(sum_of(s));
        }
        let features: Vec<String> = (params.iter().enumerate())
            .map(|(f, p)| self.prepared(p, f))
            .collect();
        let sql = aggregate::segment_sums_query(
            (&self.from, &self.kept),
            &features,
            centres,
            &carried,
            &shifts,
            Dialect::Postgres,
        );
        let rows = self.read(&sql, "the segments' sums")?;
        let (counts, sums) = aggregate::parse_segment_sums(&rows, k, &bounds)
            .map_err(|r| self.odd("the segments' sums", &r))?;
        let c = bounds.len();
        let mut out = zero;
        out.counts = counts;
        for s in 0..k {
            for f in 0..d {
                out.values[s * d + f] = sums[s * c + f];
                let present = sums[s * c + d + f].count();
                out.filled[s * d + f] = out.counts[s].saturating_sub(present);
            }
            for j in 0..t {
                out.tallies[s * t + j] = sums[s * c + 2 * d + j];
            }
        }
        Ok(out)
    }

    /// Every kept record's prepared values, read in key order a batch at a
    /// time and handed to `write` with their keys: the assignments, placed
    /// here as a file input's are.
    pub(super) fn assignments(
        &self,
        params: &[FeatureParams],
        write: &mut Lines<'_>,
    ) -> Result<(), RunError> {
        const BATCH: usize = 16_384;
        let d = params.len();
        let mut columns = vec![format!("CAST({} AS TEXT)", self.key)];
        columns.extend(
            self.columns[..d]
                .iter()
                .map(|c| format!("CAST({c} AS TEXT)")),
        );
        let sql = format!(
            "SELECT {} FROM {} WHERE {} ORDER BY {}",
            columns.join(", "),
            self.from,
            self.kept,
            self.order
        );
        let mut keys: Vec<String> = Vec::with_capacity(BATCH);
        let mut rows: Vec<f64> = Vec::with_capacity(BATCH * d);
        let flush = |keys: &mut Vec<String>, rows: &mut Vec<f64>, write: &mut Lines<'_>| {
            let borrowed: Vec<&str> = keys.iter().map(String::as_str).collect();
            let r = write(&borrowed, std::mem::take(rows));
            keys.clear();
            r
        };
        let mut db = self.engine();
        let read = db
            .each_row(&sql, "reading the assignments' records", |row| {
                let key = row.first().copied().flatten().unwrap_or_default();
                for (f, p) in params.iter().enumerate() {
                    let x = row
                        .get(f + 1)
                        .copied()
                        .flatten()
                        .and_then(crate::text::parse_number)
                        .or(p.fill);
                    let v = x.and_then(|x| crate::run::model::prepared_value(p, x));
                    rows.push(v.ok_or_else(|| RunError::Database {
                        reason: format!(
                            "the record keyed `{key}` of {} changed since it was measured (feature `{}`)",
                            self.shown, p.column
                        ),
                    })?);
                }
                keys.push(key.to_string());
                if keys.len() == BATCH {
                    flush(&mut keys, &mut rows, write)?;
                }
                Ok(())
            })
            .map_err(database)?;
        read?;
        flush(&mut keys, &mut rows, write)
    }
}

/// What takes a batch of assignments: the keys and the prepared rows.
pub(super) type Lines<'a> = dyn FnMut(&[&str], Vec<f64>) -> Result<(), RunError> + 'a;

/// The largest magnitude of column `c`'s values among the kept records,
/// and of `fill` where given.
fn bound_of(look: &Look, c: usize, fill: Option<f64>) -> f64 {
    let b = look.lowest[c].abs().max(look.highest[c].abs());
    fill.map_or(b, |v| b.max(v.abs()))
}

/// What a run in passes over `source` holds at most: the sample as the run
/// over it holds it, and a batch of assignments. Counts the records.
pub(super) fn held(plan: &Plan, source: &Source) -> Result<super::Held, RunError> {
    let input = InDatabase::open(plan, source)?;
    let records = input.count(
        &format!("SELECT CAST(COUNT(*) AS TEXT) FROM {}", input.from),
        "counting the records",
    )? as usize;
    let sample = match &plan.method {
        crate::plan::MethodPlan::KMeans(km) => km.sample.unwrap_or(records).min(records),
        _ => records,
    };
    let d = plan.features.len() + plan.tally.len();
    Ok(super::Held {
        records,
        groups: 0,
        bytes: sample * (super::SAMPLE_PER_RECORD + super::SAMPLE_PER_VALUE * d)
            + 16_384 * (super::LINE_BYTES + 64 + 8 * d),
        sample,
        database: true,
    })
}

/// Rounds as `inner` runs them. A test hook: with
/// `ASSORT_TEST_ROUND_PAUSE_MS` set, each round is announced on standard
/// error (`assort-test: round N`) and waits that long first, so that
/// tests/database_input.rs can stop the server between two rounds.
pub(super) struct Announced<R> {
    pub inner: R,
    pub rounds: usize,
}

impl<R: crate::scale::drive::Rounds> crate::scale::drive::Rounds for Announced<R> {
    type Error = R::Error;
    fn round(&mut self, centres: &[f64]) -> Result<crate::engine::exact::RoundSums, R::Error> {
        if let Some(ms) = std::env::var("ASSORT_TEST_ROUND_PAUSE_MS")
            .ok()
            .and_then(|v| v.parse::<u64>().ok())
        {
            self.rounds += 1;
            eprintln!("assort-test: round {}", self.rounds);
            std::thread::sleep(std::time::Duration::from_millis(ms));
        }
        self.inner.round(centres)
    }
}
