//! `read passes`: a `kmeans ... sample N by key` run over a Parquet input
//! that is never read whole. Every record is read once per pass
//! ([`crate::scale::stream`]); the run holds the key-ranked sample, one
//! 8-byte digest per record (to find a repeated key) and sums.
//!
//! # What comes from where
//! - **Every record, exactly** (fixed-point sums, order statistics by
//!   radix selection): the preparation's parameters (fills, clip bounds,
//!   z-score mean and standard deviation, robust median and spread,
//!   range), so they are those of the same recipe read whole; the
//!   refinement's rounds; each segment's size, share and means, and its
//!   `tally` columns' counts, means, totals and shares; records left out;
//!   and the assignments, written by one more pass in the input's order.
//! - **The sample** (the same records `sample N by key` draws): the
//!   restarts; the criteria that judge k (within-SS, silhouette,
//!   Calinski-Harabasz, Davies-Bouldin, and the evidence); medians,
//!   quartiles and standardised differences of the profiles; the rules;
//!   the drift reference of the model. The run says so in a note.
//!
//! # Passes
//! One to look (count, gaps, ranges, keys, the sample), up to three per
//! stage of parameters that needs order statistics (the fills, then clip
//! and robust scaling), two for z-scores, the rounds of every refinement,
//! one for the chosen segments' sums and one to write the assignments.

use super::error::{Place, RunError};
use super::fit::Candidate;
use super::prepare::{FeatureParams, Prepared};
use super::{load, Step};
use crate::engine::exact::{self, Shifts, Sum};
use crate::engine::kmeans;
use crate::plan::{KMeansPlan, MissingRule, Plan, Scale};
use crate::scale::select::{self, Selection, Tally};
use crate::scale::stream::{rank_of, Draw, Drawn, PassError, Passes, Streamed};
use ndarray::Array2;

mod database;
#[cfg(feature = "ballista")]
mod on_cluster;

/// Where a run in passes reads its records: a Parquet input read here, or
/// a table or query whose passes run in its database.
#[derive(Debug, Clone)]
pub enum Records {
    Parquet(Input),
    Database(database::InDatabase),
}

/// The input opened for passes, with where its columns are.
#[derive(Debug, Clone)]
pub struct Input {
    pub passes: Passes,
    shown: String,
    names: Vec<String>,
    key_at: usize,
    /// Each feature's position in the schema, then each `tally` column's.
    at: Vec<usize>,
}

impl Input {
    /// Opens the plan's input: its schema and row groups, from the footers.
    pub fn open(plan: &Plan) -> Result<Input, RunError> {
        let shown = plan.input.shown();
        let unreadable = |reason: String| RunError::Unreadable {
            file: shown.clone(),
            reason,
        };
        let schema = crate::parquet::schema(&plan.input.resolved)
            .map_err(|e| unreadable(crate::parquet::words(&e)))?;
        let position = |name: &str| {
            schema
                .names
                .iter()
                .position(|n| n.trim() == name)
                .ok_or_else(|| RunError::ColumnGone {
                    file: shown.clone(),
                    column: name.to_string(),
                })
        };
        let key_at = position(&plan.input.key)?;
        // The features, then the `tally` columns: read as numbers alike.
        let at = (plan.features.iter().map(|f| f.column.as_str()))
            .chain(plan.tally.iter().map(String::as_str))
            .map(position)
            .collect::<Result<Vec<_>, _>>()?;
        let passes = Passes::open(&plan.input.resolved, &shown, Some(key_at), &at)
            .map_err(|e| failed(&schema.names, &shown, key_at)(e))?;
        Ok(Input {
            passes,
            names: schema.names,
            shown,
            key_at,
            at,
        })
    }

    /// Record `record` (0-based) at the column at schema position `at`.
    fn place(&self, at: usize, record: usize) -> Place {
        Place::of_record(&self.shown, &self.names, at, record)
    }

    fn failed(&self) -> impl Fn(PassError) -> RunError + '_ {
        failed(&self.names, &self.shown, self.key_at)
    }
}

/// A pass's failure as a run error, at the record and column it names
/// (a missing key at the key's column, `key_at`).
fn failed<'a>(
    names: &'a [String],
    shown: &'a str,
    key_at: usize,
) -> impl Fn(PassError) -> RunError + 'a {
    move |e| {
        let place = |at: usize, record: usize| Place::of_record(shown, names, at, record);
        match e {
            PassError::Read { reason, .. } => load::read_error(reason, &place, shown),
            PassError::NoKey { record, .. } => RunError::BlankKey {
                place: place(key_at, record),
            },
            PassError::Stopped => RunError::Stopped {
                during: "while reading the input in passes",
            },
            other => RunError::Unreadable {
                file: shown.to_string(),
                reason: other.to_string(),
            },
        }
    }
}

/// What a run in passes holds at most, stated before it reads anything
/// (from the footers alone).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Held {
    pub records: usize,
    pub groups: usize,
    /// Bytes beyond the program itself: [`Passes::peak`] (a batch and its
    /// pages per worker, the sample while it is drawn), an 8-byte digest
    /// per record for repeated keys, the sample as the run over it holds
    /// it (its table, its prepared rows and their labels), and per worker
    /// a row group's assignment lines waiting to be written.
    pub bytes: usize,
    pub sample: usize,
    /// The passes and rounds run in the input's database.
    pub database: bool,
}

/// Bytes the run over the sample holds per sample record and feature,
/// and per sample record, at its peak: the table's values and gap marks,
/// the prepared rows, a copy for the judge, the silhouette estimate's and
/// the profiles' working copies, the rules' sorted columns (the highest,
/// when the rules are searched), the keys and labels. Measured, not
/// summed from the layouts: a run over a table in passes at 1,000,000 x
/// 16 with a sample of 200,000 peaked at 245 MiB for the whole process
/// (the rules stage; 173 MiB before it), about 1,200 bytes per sample
/// record; the old sum of the layouts (25 bytes a value and 64 a record)
/// stated 94 MiB. 72 and 128 state 244 MiB for it.
const SAMPLE_PER_VALUE: usize = 72;
const SAMPLE_PER_RECORD: usize = 128;

/// Bytes allowed per assignments line while a worker's row group waits
/// its turn to be written.
const LINE_BYTES: usize = 96;

/// What a run in passes of `plan` will hold, on this machine's workers.
pub fn held(plan: &Plan) -> Result<Held, RunError> {
    if let Some(source) = plan.input.source() {
        return database::held(plan, &source);
    }
    let input = Input::open(plan)?;
    let records = input.passes.records();
    let sample = match &plan.method {
        crate::plan::MethodPlan::KMeans(km) => km.sample.unwrap_or(records).min(records),
        _ => records,
    };
    // The sample holds the `tally` columns beside the features.
    let d = plan.features.len() + plan.tally.len();
    let workers = rayon::current_num_threads();
    let largest_group = input
        .passes
        .groups()
        .iter()
        .map(|g| g.rows)
        .max()
        .unwrap_or(0);
    Ok(Held {
        records,
        groups: input.passes.groups().len(),
        bytes: input.passes.peak(workers, sample)
            + 8 * records
            + sample * (SAMPLE_PER_RECORD + SAMPLE_PER_VALUE * d)
            + workers * largest_group * LINE_BYTES,
        sample,
        database: false,
    })
}

impl Held {
    /// In words, for the terminal and the dry run.
    pub fn words(&self) -> String {
        if self.database {
            return format!(
                "read in passes in the database: {} records, each pass and round an aggregate query there, holding at most about {} beyond the program (the sample of {}, a batch of assignments)",
                crate::text::thousands(self.records),
                crate::text::bytes(self.bytes),
                crate::text::thousands(self.sample),
            );
        }
        format!(
            "read in passes: {} records in {} row groups, holding at most about {} beyond the program (the sample of {}, an 8-byte digest per record, a batch per worker)",
            crate::text::thousands(self.records),
            crate::text::thousands(self.groups),
            crate::text::bytes(self.bytes),
            crate::text::thousands(self.sample),
        )
    }
}

/// What the first pass finds.
#[derive(Debug, Clone)]
struct Look {
    records: u64,
    kept: u64,
    /// Per feature: records with a gap (all records; for `missing drop`).
    gaps: Vec<u64>,
    /// Per feature, among kept records: values present, the smallest and
    /// largest, and the first record with a gap.
    present: Vec<u64>,
    lowest: Vec<f64>,
    highest: Vec<f64>,
    first_gap: Vec<Option<usize>>,
    /// Every record's rank's first 8 bytes, for repeated keys.
    ranks: Vec<u64>,
    draw: Draw,
}

impl Look {
    fn new(d: usize, size: usize) -> Look {
        Look {
            records: 0,
            kept: 0,
            gaps: vec![0; d],
            present: vec![0; d],
            lowest: vec![f64::INFINITY; d],
            highest: vec![f64::NEG_INFINITY; d],
            first_gap: vec![None; d],
            ranks: Vec::new(),
            draw: Draw::new(size),
        }
    }

    fn merge(mut self, o: Look) -> Look {
        self.records += o.records;
        self.kept += o.kept;
        for f in 0..self.gaps.len() {
            self.gaps[f] += o.gaps[f];
            self.present[f] += o.present[f];
            self.lowest[f] = self.lowest[f].min(o.lowest[f]);
            self.highest[f] = self.highest[f].max(o.highest[f]);
            self.first_gap[f] = match (self.first_gap[f], o.first_gap[f]) {
                (Some(a), Some(b)) => Some(a.min(b)),
                (a, b) => a.or(b),
            };
        }
        self.ranks.extend(o.ranks);
        self.draw = self.draw.merge(o.draw);
        self
    }
}

/// Whether a record whose features are `values[f][i]` is kept: no gap in
/// a feature whose rule drops the record.
fn kept(plan: &Plan, values: &[&[Option<f64>]], i: usize) -> bool {
    (plan.features.iter().zip(values))
        .all(|(fp, v)| fp.missing != MissingRule::DropRow || v[i].is_some())
}

/// The first pass: counts, gaps, ranges, every record's rank and the
/// sample of `size` kept records.
fn look(plan: &Plan, input: &Input, size: usize) -> Result<Look, RunError> {
    // Every numeric column read: the features, then the `tally` columns.
    let d = plan.features.len() + plan.tally.len();
    let seed = plan.seed;
    input
        .passes
        .pass(
            true,
            || Look::new(d, size),
            |look, first, keys, values| {
                for (i, key) in keys.iter().enumerate() {
                    let record = first + i;
                    let key = key.as_deref().ok_or_else(|| PassError::NoKey {
                        shown: String::new(),
                        record,
                    })?;
                    let rank = rank_of(seed, key);
                    let mut head = [0u8; 8];
                    head.copy_from_slice(&rank[..8]);
                    look.ranks.push(u64::from_be_bytes(head));
                    look.records += 1;
                    for (f, v) in values.iter().enumerate() {
                        if v[i].is_none() {
                            look.gaps[f] += 1;
                        }
                    }
                    if !kept(plan, values, i) {
                        continue;
                    }
                    look.kept += 1;
                    for (f, v) in values.iter().enumerate() {
                        match v[i] {
                            Some(x) => {
                                look.present[f] += 1;
                                look.lowest[f] = look.lowest[f].min(x);
                                look.highest[f] = look.highest[f].max(x);
                            }
                            None => {
                                look.first_gap[f] =
                                    Some(look.first_gap[f].map_or(record, |r| r.min(record)))
                            }
                        }
                    }
                    look.draw
                        .offer(rank, key, || values.iter().map(|c| c[i]).collect());
                }
                Ok(())
            },
            Look::merge,
        )
        .map_err(input.failed())
}

/// Refuses a key that appears twice: the 8-byte ranks are sorted, and
/// only when two agree is the input read again for those keys (two keys
/// of one rank prefix are rare, 1 in 3,700 at 100 million records).
fn keys_once(plan: &Plan, input: &Input, mut ranks: Vec<u64>) -> Result<(), RunError> {
    use rayon::prelude::*;
    ranks.par_sort_unstable();
    let mut twice: Vec<u64> = ranks
        .windows(2)
        .filter(|w| w[0] == w[1])
        .map(|w| w[0])
        .collect();
    drop(ranks);
    if twice.is_empty() {
        return Ok(());
    }
    twice.dedup();
    let seed = plan.seed;
    let found = input
        .passes
        .pass(
            true,
            Vec::new,
            |found: &mut Vec<(String, usize)>, first, keys, _| {
                for (i, key) in keys.iter().enumerate() {
                    let key = key.as_deref().unwrap_or_default();
                    let rank = rank_of(seed, key);
                    let mut head = [0u8; 8];
                    head.copy_from_slice(&rank[..8]);
                    if twice.binary_search(&u64::from_be_bytes(head)).is_ok() {
                        found.push((key.to_string(), first + i));
                    }
                }
                Ok(())
            },
            |mut a, b| {
                a.extend(b);
                a
            },
        )
        .map_err(input.failed())?;
    let mut found = found;
    found.sort();
    // The first repeated key in key order, at its second record.
    match found.windows(2).find(|w| w[0].0 == w[1].0) {
        Some(w) => Err(RunError::DuplicateKey {
            place: input.place(input.key_at, w[1].1),
            key: w[1].0.clone(),
            first_line: w[0].1 as u64 + 2,
        }),
        None => Ok(()),
    }
}

/// Order statistics over the kept records, narrowed pass by pass:
/// `value(f, x)` is what feature `f`'s value `x` (a gap as `None`) counts
/// as, or `None` when it is not counted. `counts[f]` values are counted
/// What a pass gathers of a feature's value (`None`: nothing): the same
/// here, record by record, and in SQL ([`database`]).
#[derive(Clone, Copy)]
pub(super) enum Value<'a> {
    /// The value present, of a feature filled by its mean; nothing of
    /// the others.
    ForMean,
    /// The value present.
    Present,
    /// The value, or the fill of a gap.
    Filled(&'a [FeatureParams]),
    /// The value filled, clipped and transformed.
    Reshaped(&'a [FeatureParams]),
    /// The reshaped value's squared deviation from `means[f]`.
    Deviation(&'a [FeatureParams], &'a [f64]),
}

impl Value<'_> {
    fn of(self, plan: &Plan, f: usize, x: Option<f64>) -> Option<f64> {
        let reshaped = |params: &[FeatureParams]| {
            let p = &params[f];
            x.or(p.fill).and_then(|x| reshape(p, x))
        };
        match self {
            Value::ForMean => x.filter(|_| plan.features[f].missing == MissingRule::FillMean),
            Value::Present => x,
            Value::Filled(params) => x.or(params[f].fill),
            Value::Reshaped(params) => reshaped(params),
            Value::Deviation(params, means) => {
                reshaped(params).map(|t| (t - means[f]) * (t - means[f]))
            }
        }
    }
}

/// Where the parameters' passes run: over the records read here
/// ([`Input`]) or as aggregate queries where they live
/// ([`database::InDatabase`]).
pub(super) trait Gather {
    /// Exact sums over the kept records of `value` per feature, each with
    /// the bound of `bounds[f]`.
    fn sums(&self, plan: &Plan, bounds: &[f64], value: Value<'_>) -> Result<Vec<Sum>, RunError>;
    /// The values at `wants` (feature, rank among its `counts[f]` values
    /// of `value`, increasing), in the order of `wants`.
    fn select(
        &self,
        plan: &Plan,
        counts: &[u64],
        wants: &[(usize, u64)],
        value: Value<'_>,
    ) -> Result<Vec<f64>, RunError>;
    /// The first kept record (in the input's order) whose filled value of
    /// feature `f` the transform of `p` cannot take, and that value.
    fn first_failing(&self, plan: &Plan, p: &FeatureParams, f: usize) -> Option<(usize, f64)>;
    /// Record `record` (0-based, in the input's order) at feature `f`.
    fn place(&self, f: usize, record: usize) -> Place;
}

impl Gather for Input {
    fn sums(&self, plan: &Plan, bounds: &[f64], value: Value<'_>) -> Result<Vec<Sum>, RunError> {
        sums(plan, self, bounds, value)
    }
    fn select(
        &self,
        plan: &Plan,
        counts: &[u64],
        wants: &[(usize, u64)],
        value: Value<'_>,
    ) -> Result<Vec<f64>, RunError> {
        select(plan, self, counts, wants, value)
    }
    fn first_failing(&self, plan: &Plan, p: &FeatureParams, f: usize) -> Option<(usize, f64)> {
        first_failing(plan, self, p, f)
    }
    fn place(&self, f: usize, record: usize) -> Place {
        Input::place(self, self.at[f], record)
    }
}

/// per feature.
fn select(
    plan: &Plan,
    input: &Input,
    counts: &[u64],
    wants: &[(usize, u64)],
    value: Value<'_>,
) -> Result<Vec<f64>, RunError> {
    let value = |f: usize, x: Option<f64>| value.of(plan, f, x);
    let mut selection = Selection::new(counts, wants);
    while !selection.probes().is_empty() {
        let probes = selection.probes().to_vec();
        let tallies = input
            .passes
            .pass(
                false,
                || selection.tallies(),
                |tallies: &mut Vec<Tally>, _, _, values| {
                    for i in 0..values.first().map_or(0, |c| c.len()) {
                        if !kept(plan, values, i) {
                            continue;
                        }
                        for (p, t) in probes.iter().zip(tallies.iter_mut()) {
                            if let Some(x) = value(p.column, values[p.column][i]) {
                                t.observe(p, x);
                            }
                        }
                    }
                    Ok(())
                },
                |mut a, b| {
                    select::merge(&mut a, b);
                    a
                },
            )
            .map_err(input.failed())?;
        selection.settle(tallies);
    }
    Ok(selection.found().unwrap_or_default())
}

/// Exact sums over the kept records of `value(f, x)` per feature (a
/// feature whose value is `None` is not summed), each with the bound of
/// `bounds[f]`.
fn sums(
    plan: &Plan,
    input: &Input,
    bounds: &[f64],
    value: Value<'_>,
) -> Result<Vec<Sum>, RunError> {
    let value = |f: usize, x: Option<f64>| value.of(plan, f, x);
    let start = (bounds.iter().enumerate())
        .map(|(f, &b)| Sum::new(b).map_err(|e| out_of_range(&plan.features[f].column, e)))
        .collect::<Result<Vec<Sum>, RunError>>()?;
    input
        .passes
        .pass(
            false,
            || start.clone(),
            |sums: &mut Vec<Sum>, _, _, values| {
                for i in 0..values.first().map_or(0, |c| c.len()) {
                    if !kept(plan, values, i) {
                        continue;
                    }
                    for (f, s) in sums.iter_mut().enumerate() {
                        if let Some(x) = value(f, values[f][i]) {
                            s.add(x);
                        }
                    }
                }
                Ok(())
            },
            |mut a, b| {
                a.iter_mut().zip(&b).for_each(|(a, b)| a.merge(b));
                a
            },
        )
        .map_err(input.failed())
}

fn out_of_range(column: &str, e: exact::OutOfRange) -> RunError {
    RunError::ByKey {
        reason: format!(
            "the values of `{column}` are out of the exact sums' range: {}",
            e.to_string().replace("feature 0", "the column")
        ),
    }
}

/// The quantile at `q` of `n` values from the selection's `found`, whose
/// two order statistics for it start at `at`, mapped by `map` first.
fn quantile(found: &[f64], at: usize, n: u64, q: f64, map: impl Fn(f64) -> f64) -> f64 {
    let (_, _, frac) = select::quantile_ranks(n, q);
    select::interpolate(map(found[at]), map(found[at + 1]), frac)
}

/// The two ranks of the quantile at `q` among `n` values of feature `f`.
fn ranks_of(f: usize, n: u64, q: f64) -> [(usize, u64); 2] {
    let (lo, hi, _) = select::quantile_ranks(n, q);
    [(f, lo), (f, hi)]
}

/// Every feature's parameters, over every kept record, as
/// [`super::prepare::prepare`] computes them for `by key`: the fills, then
/// the order statistics (clip bounds, robust scaling), then z-scores.
fn parameters(
    plan: &Plan,
    input: &dyn Gather,
    look: &Look,
) -> Result<Vec<FeatureParams>, RunError> {
    refuse_gaps(plan, input, look)?;
    let fill = fills(plan, input, look)?;
    // The filled values' range: the present values', and the fill's when
    // it fills a gap.
    let gaps = |f: usize| look.kept - look.present[f];
    let ends: Vec<(f64, f64)> = (0..plan.features.len())
        .map(|f| match fill[f].filter(|_| gaps(f) > 0) {
            Some(v) => (look.lowest[f].min(v), look.highest[f].max(v)),
            None => (look.lowest[f], look.highest[f]),
        })
        .collect();
    let mut params: Vec<FeatureParams> = (plan.features.iter().enumerate())
        .map(|(f, fp)| FeatureParams::filled(fp, fill[f], fill[f].map_or(0, |_| gaps(f) as usize)))
        .collect();
    ordered(plan, input, look, &ends, &mut params)?;
    if plan.scale == Scale::Zscore {
        zscores(plan, input, &ends, &mut params)?;
    }
    for p in params.iter_mut() {
        p.constant = p.divisor == 0.0;
        if p.constant {
            p.divisor = 1.0;
        }
    }
    Ok(params)
}

/// A gap no rule fills, and a fill with nothing to fill from, stop the
/// run: the first feature in recipe order, at its first such record.
fn refuse_gaps(plan: &Plan, input: &dyn Gather, look: &Look) -> Result<(), RunError> {
    for (f, fp) in plan.features.iter().enumerate() {
        let fills = matches!(fp.missing, MissingRule::FillMean | MissingRule::FillMedian);
        if fills && look.present[f] == 0 && look.kept > 0 {
            return Err(RunError::NothingToFillFrom {
                column: fp.column.clone(),
            });
        }
        if let (MissingRule::Refuse, Some(r)) = (fp.missing, look.first_gap[f]) {
            return Err(RunError::MissingValue {
                place: input.place(f, r),
            });
        }
    }
    Ok(())
}

/// Each feature's fill: a value given, the exact mean or the median of
/// the values present among the kept records.
fn fills(plan: &Plan, input: &dyn Gather, look: &Look) -> Result<Vec<Option<f64>>, RunError> {
    let rule = |f: usize| plan.features[f].missing;
    let d = plan.features.len();
    let mut fill: Vec<Option<f64>> = (0..d)
        .map(|f| match rule(f) {
            MissingRule::FillValue(v) => Some(v),
            _ => None,
        })
        .collect();
    if (0..d).any(|f| rule(f) == MissingRule::FillMean) {
        let bounds: Vec<f64> = (0..d)
            .map(|f| look.lowest[f].abs().max(look.highest[f].abs()))
            .collect();
        let sums = input.sums(plan, &bounds, Value::ForMean)?;
        for f in (0..d).filter(|&f| rule(f) == MissingRule::FillMean) {
            fill[f] = sums[f].mean();
        }
    }
    let medians: Vec<(usize, u64)> = (0..d)
        .filter(|&f| rule(f) == MissingRule::FillMedian)
        .flat_map(|f| ranks_of(f, look.present[f], 0.5))
        .collect();
    if !medians.is_empty() {
        let found = input.select(plan, &look.present, &medians, Value::Present)?;
        for (i, pair) in medians.chunks(2).enumerate() {
            let f = pair[0].0;
            fill[f] = Some(quantile(&found, 2 * i, look.present[f], 0.5, |x| x));
        }
    }
    Ok(fill)
}

/// Clip bounds, and the centre and divisor of robust, range and no
/// scaling, from order statistics of the filled values (clipping and the
/// transforms keep their order); `ends` are the filled values' smallest
/// and largest, where a transform's domain is checked.
fn ordered(
    plan: &Plan,
    input: &dyn Gather,
    look: &Look,
    ends: &[(f64, f64)],
    params: &mut [FeatureParams],
) -> Result<(), RunError> {
    let robust = plan.scale == Scale::Robust;
    let mut wants: Vec<(usize, u64)> = Vec::new();
    for (f, fp) in plan.features.iter().enumerate() {
        if let Some((lo, hi)) = fp.clip {
            wants.extend(ranks_of(f, look.kept, lo));
            wants.extend(ranks_of(f, look.kept, hi));
        }
        if robust {
            for q in [0.25, 0.5, 0.75] {
                wants.extend(ranks_of(f, look.kept, q));
            }
        }
    }
    let found = match wants.is_empty() {
        true => Vec::new(),
        false => {
            let counts = vec![look.kept; plan.features.len()];
            input.select(plan, &counts, &wants, Value::Filled(params))?
        }
    };
    let mut at = 0;
    for (f, fp) in plan.features.iter().enumerate() {
        if let Some((lo, hi)) = fp.clip {
            let a = quantile(&found, at, look.kept, lo, |x| x);
            let b = quantile(&found, at + 2, look.kept, hi, |x| x);
            params[f].clip = Some((a, b));
            at += 4;
        }
        let p = &params[f];
        let (lo, hi) = (
            reshaped(plan, input, p, f, ends[f].0)?,
            reshaped(plan, input, p, f, ends[f].1)?,
        );
        let (centre, divisor) = match plan.scale {
            Scale::Robust => {
                let t = |x: f64| reshape(p, x).unwrap_or(f64::NAN);
                let q1 = quantile(&found, at, look.kept, 0.25, t);
                let q2 = quantile(&found, at + 2, look.kept, 0.5, t);
                let q3 = quantile(&found, at + 4, look.kept, 0.75, t);
                at += 6;
                (q2, q3 - q1)
            }
            Scale::Range => (lo, hi - lo),
            Scale::None => (0.0, 1.0),
            // From exact sums, in [`zscores`].
            Scale::Zscore => (0.0, 0.0),
        };
        params[f].centre = centre;
        params[f].divisor = divisor;
    }
    Ok(())
}

/// Z-scores over the reshaped (filled, clipped, transformed) values: the
/// exact mean, then the exact sum of squared deviations from it.
fn zscores(
    plan: &Plan,
    input: &dyn Gather,
    ends: &[(f64, f64)],
    params: &mut [FeatureParams],
) -> Result<(), RunError> {
    let d = params.len();
    let largest: Vec<f64> = (0..d)
        .map(|f| {
            let p = &params[f];
            let (a, b) = (reshape(p, ends[f].0), reshape(p, ends[f].1));
            a.unwrap_or(0.0).abs().max(b.unwrap_or(0.0).abs())
        })
        .collect();
    let snapshot = params.to_vec();
    let means: Vec<f64> = (input
        .sums(plan, &largest, Value::Reshaped(&snapshot))?
        .iter())
    .map(|s| s.mean().unwrap_or(0.0))
    .collect();
    let bounds: Vec<f64> = (0..d)
        .map(|f| exact::deviation_bound(largest[f], means[f]))
        .collect();
    let spreads = input.sums(plan, &bounds, Value::Deviation(&snapshot, &means))?;
    for (f, p) in params.iter_mut().enumerate() {
        p.centre = means[f];
        p.divisor = spreads[f].mean().map_or(0.0, f64::sqrt);
    }
    Ok(())
}

/// A filled value clipped and transformed; `None` outside the transform's
/// domain.
fn reshape(p: &FeatureParams, x: f64) -> Option<f64> {
    let x = match p.clip {
        Some((a, b)) => x.clamp(a, b),
        None => x,
    };
    super::prepare::transform(p.transform, x).ok()
}

/// [`reshape`] of one end of a feature's filled values, or the error of
/// the first kept record (in the input's order) whose value the transform
/// cannot take, found by one more pass: the ends are tried, as every
/// transform's domain is bounded below.
fn reshaped(
    plan: &Plan,
    input: &dyn Gather,
    p: &FeatureParams,
    f: usize,
    x: f64,
) -> Result<f64, RunError> {
    let Err((transform, help)) = reshape_checked(p, x) else {
        return Ok(reshape(p, x).unwrap_or(f64::NAN));
    };
    let (record, value) = input.first_failing(plan, p, f).unwrap_or((0, x));
    Err(RunError::TransformDomain {
        place: input.place(f, record),
        transform,
        value,
        help,
    })
}

/// [`reshape`] with the transform's words when it fails.
fn reshape_checked(p: &FeatureParams, x: f64) -> Result<f64, (&'static str, &'static str)> {
    let x = match p.clip {
        Some((a, b)) => x.clamp(a, b),
        None => x,
    };
    super::prepare::transform(p.transform, x)
}

/// The first kept record whose filled value of feature `f` the transform
/// cannot take, and that value, in one pass.
fn first_failing(plan: &Plan, input: &Input, p: &FeatureParams, f: usize) -> Option<(usize, f64)> {
    input
        .passes
        .pass(
            false,
            || None,
            |found: &mut Option<(usize, f64)>, first, _, values| {
                let n = values.first().map_or(0, |c| c.len());
                let bad = (0..n).filter(|&i| kept(plan, values, i)).find_map(|i| {
                    let x = values[f][i].or(p.fill)?;
                    reshape_checked(p, x).is_err().then_some((first + i, x))
                });
                if let Some(b) = bad {
                    *found = Some(found.map_or(b, |a| if a.0 <= b.0 { a } else { b }));
                }
                Ok(())
            },
            |a, b| match (a, b) {
                (Some(a), Some(b)) => Some(if a.0 <= b.0 { a } else { b }),
                (a, b) => a.or(b),
            },
        )
        .ok()
        .flatten()
}

/// The sample as a table, in rank order (a record's "line" is its place
/// in the sample, for it is never reported).
fn sample_table(fields: Vec<usize>, drawn: &[Drawn], d: usize) -> load::Table {
    let mut table = load::Table {
        keys: load::Keys::default(),
        lines: Vec::with_capacity(drawn.len()),
        numeric: vec![load::NumericColumn::default(); d],
        fields,
        text_fields: Vec::new(),
        text: Vec::new(),
        digest: None,
        target: None,
    };
    for (i, (_, key, values)) in drawn.iter().enumerate() {
        table.keys.push(key);
        table.lines.push(i as u64 + 2);
        for (c, &v) in table.numeric.iter_mut().zip(values) {
            c.push(v);
        }
    }
    table
}

/// The shifts of the exact sums: each feature's largest prepared
/// magnitude, at one end of its filled values (preparing keeps order).
fn shifts(params: &[FeatureParams], look: &Look) -> Result<Shifts, RunError> {
    let largest: Vec<f64> = (params.iter().enumerate())
        .map(|(f, p)| {
            let ends = [look.lowest[f], look.highest[f]]
                .into_iter()
                .chain(p.fill.filter(|_| p.filled > 0));
            ends.filter(|x| x.is_finite())
                .filter_map(|x| super::model::prepared_value(p, x))
                .fold(0.0_f64, |m, v| m.max(v.abs()))
        })
        .collect();
    Shifts::of(&largest).map_err(|e| RunError::ByKey {
        reason: format!("the clustered values are out of the exact sums' range: {e}"),
    })
}

/// Each segment's exact sums over every kept record: records, the original
/// (filled) values and the gaps filled, per feature; segment `s` is the
/// record's nearest of `centres` (k rows, in number order).
#[derive(Debug, Clone)]
pub struct SegmentSums {
    pub counts: Vec<u64>,
    /// k × d sums of original values.
    pub values: Vec<Sum>,
    /// k × d gaps filled.
    pub filled: Vec<u64>,
    /// k × t sums of the `tally` columns' known values.
    pub tallies: Vec<Sum>,
}

impl SegmentSums {
    /// Nothing summed yet for `k` segments: each feature's sums bounded by
    /// its filled values' range, each `tally` column's by its known values'.
    fn zero(
        plan: &Plan,
        params: &[FeatureParams],
        look: &Look,
        k: usize,
    ) -> Result<SegmentSums, RunError> {
        let d = params.len();
        let mut values = Vec::with_capacity(k * d);
        let mut tallies = Vec::with_capacity(k * plan.tally.len());
        for _ in 0..k {
            for (f, p) in params.iter().enumerate() {
                let mut bound = look.lowest[f].abs().max(look.highest[f].abs());
                if let Some(v) = p.fill.filter(|_| p.filled > 0) {
                    bound = bound.max(v.abs());
                }
                values.push(Sum::new(bound).map_err(|e| out_of_range(&p.column, e))?);
            }
            for (j, name) in plan.tally.iter().enumerate() {
                let bound = look.lowest[d + j].abs().max(look.highest[d + j].abs());
                // No value known: nothing is summed, any bound does.
                let bound = if bound.is_finite() { bound } else { 0.0 };
                tallies.push(Sum::new(bound).map_err(|e| out_of_range(name, e))?);
            }
        }
        Ok(SegmentSums {
            counts: vec![0; k],
            values,
            filled: vec![0; k * d],
            tallies,
        })
    }

    /// Another worker's sums added.
    fn merge(mut self, b: SegmentSums) -> SegmentSums {
        self.counts
            .iter_mut()
            .zip(&b.counts)
            .for_each(|(a, b)| *a += b);
        self.values
            .iter_mut()
            .zip(&b.values)
            .for_each(|(a, b)| a.merge(b));
        self.filled
            .iter_mut()
            .zip(&b.filled)
            .for_each(|(a, b)| *a += b);
        self.tallies
            .iter_mut()
            .zip(&b.tallies)
            .for_each(|(a, b)| a.merge(b));
        self
    }
}

fn segment_sums(
    plan: &Plan,
    input: &Input,
    params: &[FeatureParams],
    centres: &[f64],
    look: &Look,
) -> Result<SegmentSums, RunError> {
    let d = params.len();
    let k = centres.len() / d.max(1);
    let t = plan.tally.len();
    let start = SegmentSums::zero(plan, params, look, k)?;
    input
        .passes
        .pass(
            false,
            || start.clone(),
            |sums: &mut SegmentSums, first, _, values| {
                let mut row = vec![0.0; d];
                for i in 0..values.first().map_or(0, |c| c.len()) {
                    // A record `missing drop` leaves out has a gap with no
                    // fill, so preparing it fails: no separate check.
                    if !input.passes.prepare(params, values, i, first, &mut row)? {
                        continue;
                    }
                    let (s, _, _) = kmeans::nearest_two(&row, centres, d.max(1));
                    let s = s as usize;
                    sums.counts[s] += 1;
                    for (f, p) in params.iter().enumerate() {
                        match values[f][i] {
                            Some(x) => sums.values[s * d + f].add(x),
                            None => {
                                sums.values[s * d + f].add(p.fill.unwrap_or(0.0));
                                sums.filled[s * d + f] += 1;
                            }
                        }
                    }
                    for j in 0..t {
                        if let Some(x) = values[d + j][i] {
                            sums.tallies[s * t + j].add(x);
                        }
                    }
                }
                Ok(())
            },
            SegmentSums::merge,
        )
        .map_err(input.failed())
}

/// What a run in passes carries beyond the outcome of its sample: the
/// input to read again for the assignments, the parameters and the
/// chosen centres.
#[derive(Debug, Clone)]
pub struct InPasses {
    pub input: Records,
    pub params: Vec<FeatureParams>,
    /// The chosen segments' centres, k rows of d in number order.
    pub centres: Vec<f64>,
    /// The sample's size.
    pub sample: usize,
    /// The chosen segments' numbers, in the order of `centres`.
    pub numbers: Vec<usize>,
    /// k × t sums of the `tally` columns' known values, segment after
    /// segment.
    tallies: Vec<Sum>,
}

/// What the run over the sample needs from the passes.
pub(super) struct Measured {
    pub table: load::Table,
    pub prepared: Prepared,
    pub candidates: Vec<Candidate>,
    pub input: Records,
    pub look_records: u64,
    pub dropped_by: Vec<(String, usize)>,
    look: Look,
}

/// The passes up to the fits: the look, repeated keys, the parameters,
/// the sample prepared, and one candidate per k refined by streamed
/// rounds.
pub(super) fn measure(
    plan: &Plan,
    km: &KMeansPlan,
    progress: &dyn Fn(Step),
) -> Result<Measured, RunError> {
    let size = km.sample.unwrap_or(usize::MAX);
    // The passes before the fit, as steps of a progress display.
    let step = |done: usize| {
        progress(Step {
            what: "reading every record: the look, the keys, the parameters",
            done,
            total: 3,
        })
    };
    step(0);
    let d = plan.features.len();
    let (input, look, params, drawn) = read_up_to_fit(plan, size, &step)?;
    step(3);
    let fields: Vec<usize> = match &input {
        Records::Parquet(i) => i.at.iter().map(|a| a + 1).collect(),
        Records::Database(_) => (2..d + plan.tally.len() + 2).collect(),
    };
    let mut table = sample_table(fields, &drawn, d + plan.tally.len());
    drop(drawn);
    if let Records::Database(db) = &input {
        table.target = Some(db.target.clone());
    }
    let prepared = super::prepare::prepare_given(plan, &table, params.clone())?;
    let shifts = shifts(&params, &look)?;
    let sample = prepared.matrix.view();
    let driven = super::driven::Driven {
        sample,
        shifts: &shifts,
        labelled: sample,
        every_record: false,
    };
    let candidates = fit_each_k(plan, km, &input, &driven, (&params, &shifts), progress)?;
    let dropped_by = (plan.features.iter().enumerate())
        .filter(|(_, fp)| fp.missing == MissingRule::DropRow)
        .map(|(f, fp)| (fp.column.clone(), look.gaps[f] as usize))
        .collect();
    Ok(Measured {
        look_records: look.records,
        table,
        prepared,
        candidates,
        input,
        dropped_by,
        look,
    })
}

/// A run whose rounds go to a cluster stops before its first pass when
/// the cluster's address is not given or nothing answers there.
fn cluster_found(plan: &Plan) -> Result<(), RunError> {
    if plan.input.cluster.is_none() {
        return Ok(());
    }
    #[cfg(feature = "ballista")]
    return on_cluster::reachable(plan);
    #[cfg(not(feature = "ballista"))]
    return Err(no_cluster_engine());
}

/// A plan naming a cluster in an assort built without the engine (the
/// check refuses it first).
#[cfg(not(feature = "ballista"))]
fn no_cluster_engine() -> RunError {
    RunError::Cluster {
        reason: "this assort was built without the cluster engine (the `ballista` feature)".into(),
    }
}

/// The passes before the fit, on either kind of input: the look, the
/// keys, the parameters and the sample drawn.
#[allow(clippy::type_complexity)]
fn read_up_to_fit(
    plan: &Plan,
    size: usize,
    step: &dyn Fn(usize),
) -> Result<(Records, Look, Vec<FeatureParams>, Vec<Drawn>), RunError> {
    match plan.input.source() {
        None => {
            cluster_found(plan)?;
            let input = Input::open(plan)?;
            let mut look = look(plan, &input, size)?;
            step(1);
            keys_once(plan, &input, std::mem::take(&mut look.ranks))?;
            super::go_on("after reading the input")?;
            step(2);
            let params = parameters(plan, &input, &look)?;
            let drawn = std::mem::replace(&mut look.draw, Draw::new(0)).finish();
            Ok((Records::Parquet(input), look, params, drawn))
        }
        Some(source) => {
            let input = database::InDatabase::open(plan, &source)?;
            let look = input.look(plan)?;
            step(1);
            input.keys_once()?;
            super::go_on("after looking at the input")?;
            step(2);
            let params = parameters(plan, &input, &look)?;
            let drawn = input.sample(plan.seed, size.min(look.kept as usize))?;
            Ok((Records::Database(input), look, params, drawn))
        }
    }
}

/// One candidate per k, refined by rounds where the records are: streamed
/// from Parquet, or run in the database.
fn fit_each_k(
    plan: &Plan,
    km: &KMeansPlan,
    input: &Records,
    driven: &super::driven::Driven<'_>,
    (params, shifts): (&[FeatureParams], &Shifts),
    progress: &dyn Fn(Step),
) -> Result<Vec<Candidate>, RunError> {
    match input {
        Records::Parquet(input) if plan.input.cluster.is_some() => {
            #[cfg(feature = "ballista")]
            return on_cluster::fit_each_k(plan, km, input, driven, (params, shifts), progress);
            #[cfg(not(feature = "ballista"))]
            return Err(no_cluster_engine());
        }
        Records::Parquet(input) => {
            let mut engine = Streamed {
                passes: &input.passes,
                params,
                shifts,
            };
            driven.each_k(plan, km, &mut engine, input.failed(), progress)
        }
        Records::Database(input) => {
            let mut db = input.engine();
            let engine = crate::scale::sql::InEngine {
                engine: &mut *db,
                source: input.kept_source(),
                features: (params.iter().enumerate())
                    .map(|(f, p)| input.prepared(p, f))
                    .collect(),
                shifts,
            };
            let failed = |e: crate::scale::postgres::DbError| RunError::Database {
                reason: format!("{e} (reading {})", input.shown),
            };
            let mut engine = database::Announced {
                inner: engine,
                rounds: 0,
            };
            driven.each_k(plan, km, &mut engine, failed, progress)
        }
    }
}

impl Measured {
    /// The chosen segments' sums over every record, one pass: the
    /// profiles (in number order, the sample's) and the overall profile
    /// corrected by them ([`every_record`]); returns what the outcome keeps
    /// to write the assignments.
    pub(super) fn every_record(
        &self,
        plan: &Plan,
        numbered: &super::number::Numbered,
        profiles: &mut [super::Profile],
        overall: &mut super::Profile,
    ) -> Result<InPasses, RunError> {
        let centres: Vec<f64> = numbered.fit.centres.iter().copied().collect();
        let params = self.prepared.features.clone();
        let sums = match &self.input {
            Records::Parquet(input) => segment_sums(plan, input, &params, &centres, &self.look)?,
            Records::Database(input) => input.segment_sums(plan, &params, &centres, &self.look)?,
        };
        every_record(profiles, overall, &sums);
        Ok(InPasses {
            input: self.input.clone(),
            params,
            centres,
            sample: self.table.keys.len(),
            numbers: numbered.numbers.clone(),
            tallies: sums.tallies,
        })
    }

    /// Records kept, and left out by `missing drop`.
    pub(super) fn kept(&self) -> (u64, u64) {
        (self.look.kept, self.look.records - self.look.kept)
    }
}

/// The profiles (in number order) and the overall profile, corrected by
/// the sums over every record: sizes, shares, means and gaps filled. The
/// medians, quartiles and standardised differences stay the sample's.
pub(super) fn every_record(
    profiles: &mut [super::Profile],
    overall: &mut super::Profile,
    sums: &SegmentSums,
) {
    let d = overall.features.len();
    let kept: u64 = sums.counts.iter().sum();
    let share = |n: u64| {
        if kept == 0 {
            0.0
        } else {
            n as f64 / kept as f64
        }
    };
    for (s, p) in profiles.iter_mut().enumerate() {
        p.size = sums.counts[s] as usize;
        p.share = share(sums.counts[s]);
        for (f, fs) in p.features.iter_mut().enumerate() {
            fs.mean = sums.values[s * d + f].mean().unwrap_or(f64::NAN);
            fs.filled = sums.filled[s * d + f] as usize;
        }
    }
    overall.size = kept as usize;
    overall.share = 1.0;
    for (f, fs) in overall.features.iter_mut().enumerate() {
        let mut all = sums.values[f];
        for s in 1..sums.counts.len() {
            all.merge(&sums.values[s * d + f]);
        }
        fs.mean = all.mean().unwrap_or(f64::NAN);
        fs.filled = (0..sums.counts.len())
            .map(|s| sums.filled[s * d + f] as usize)
            .sum();
    }
}

impl InPasses {
    /// Each segment's sum of the `tally` column `j`, in profile order.
    pub fn tally_sums(&self, j: usize) -> Vec<Sum> {
        let t = self.tallies.len() / self.numbers.len().max(1);
        (0..self.numbers.len())
            .filter_map(|s| self.tallies.get(s * t + j).copied())
            .collect()
    }

    /// Writes the assignments of every kept record, in the input's order,
    /// as [`crate::output::files::assignments_csv`] writes them, a few row
    /// groups at a time (one per worker, read in parallel, then written in
    /// order): memory holds those groups' lines, not the file.
    /// Returns the cells a spreadsheet would run as formulas, written
    /// exactly all the same.
    pub fn write_assignments(
        &self,
        key: &str,
        label: &(dyn Fn(usize) -> String + Sync),
        out: &mut dyn std::io::Write,
    ) -> Result<usize, RunError> {
        use rayon::prelude::*;
        let d = self.params.len();
        let k = self.centres.len() / d.max(1);
        let centres =
            Array2::from_shape_vec((k, d), self.centres.clone()).map_err(|e| RunError::ByKey {
                reason: e.to_string(),
            })?;
        let write_failed = |e: std::io::Error| RunError::Write {
            path: String::new(),
            reason: e.to_string(),
        };
        // The header alone, as each batch's lines begin with it.
        let header =
            crate::output::files::assignments_csv(key, &super::Assignments::default(), label);
        out.write_all(&header.bytes).map_err(write_failed)?;
        let mut formula_like = header.formula_like;
        let input = match &self.input {
            Records::Parquet(input) => input,
            Records::Database(db) => {
                let mut write = |keys: &[&str], rows: Vec<f64>| -> Result<(), RunError> {
                    let (lines, risky) = self.lines(keys, rows, key, label, &centres, &header);
                    out.write_all(&lines).map_err(write_failed)?;
                    formula_like += risky;
                    Ok(())
                };
                db.assignments(&self.params, &mut write)?;
                return Ok(formula_like);
            }
        };
        let workers = rayon::current_num_threads().max(1);
        for window in input.passes.groups().chunks(workers) {
            let parts: Vec<Result<(Vec<u8>, usize), RunError>> = window
                .par_iter()
                .map(|g| self.group_lines(input, g, key, label, &centres, &header))
                .collect();
            for part in parts {
                let (lines, risky) = part?;
                out.write_all(&lines).map_err(write_failed)?;
                formula_like += risky;
            }
        }
        Ok(formula_like)
    }

    /// One row group's assignment lines, without the header, batch by
    /// batch; and the cells among them a spreadsheet would run.
    fn group_lines(
        &self,
        input: &Input,
        g: &crate::parquet::Group,
        key: &str,
        label: &(dyn Fn(usize) -> String + Sync),
        centres: &Array2<f64>,
        header: &crate::output::files::Csv,
    ) -> Result<(Vec<u8>, usize), RunError> {
        let d = self.params.len();
        let mut lines: Vec<u8> = Vec::new();
        let mut risky = 0;
        let mut row = vec![0.0; d];
        let passes = &input.passes;
        passes
            .read_one(g, true, |first, batch_keys, values| {
                let mut keys: Vec<&str> = Vec::with_capacity(batch_keys.len());
                let mut rows: Vec<f64> = Vec::with_capacity(batch_keys.len() * d);
                for (i, k) in batch_keys.iter().enumerate() {
                    if passes.prepare(&self.params, values, i, first, &mut row)? {
                        keys.push(k.as_deref().unwrap_or_default());
                        rows.extend_from_slice(&row);
                    }
                }
                let (batch, batch_risky) = self.lines(&keys, rows, key, label, centres, header);
                lines.extend_from_slice(&batch);
                risky += batch_risky;
                Ok(())
            })
            .map_err(input.failed())?;
        Ok((lines, risky))
    }

    /// The assignment lines of the records keyed `keys` whose prepared
    /// values are `rows` (one slice), without the header; and the cells
    /// among them a spreadsheet would run.
    fn lines(
        &self,
        keys: &[&str],
        rows: Vec<f64>,
        key: &str,
        label: &(dyn Fn(usize) -> String + Sync),
        centres: &Array2<f64>,
        header: &crate::output::files::Csv,
    ) -> (Vec<u8>, usize) {
        let d = self.params.len();
        let x = Array2::from_shape_vec((keys.len(), d), rows)
            .expect("d values were pushed with each key");
        let mut assignments = super::Assignments::with_capacity(keys.len());
        let nearest = kmeans::nearest_with_margin(x.view(), centres.view());
        for (key, (s, distance, margin)) in keys.iter().zip(nearest) {
            assignments.push(super::Assignment {
                key,
                segment: self.numbers[s as usize],
                distance,
                margin,
            });
        }
        let csv = crate::output::files::assignments_csv(key, &assignments, label);
        let body = csv.bytes.get(header.bytes.len()..).unwrap_or_default();
        (body.to_vec(), csv.formula_like - header.formula_like)
    }
}
