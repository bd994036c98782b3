//! Records read in passes from a Parquet input (a file or a folder of
//! parts) that need not fit in memory: each pass reads every record once,
//! row groups in parallel, a batch at a time, and keeps only what the pass
//! gathers (a round's exact sums, the sample). The third engine of the
//! driver ([`super::drive::Rounds`]), beside memory and PostgreSQL.
//!
//! # Memory
//! A pass holds, per thread, one batch of [`BATCH`] records of the
//! columns read (decoded by arrow-rs, then as assort's columns) and the
//! pages being decoded; [`Passes::peak`] states it before anything is
//! read. The sample pass adds the sample (two samples' worth per thread
//! while it is drawn). The records themselves are never held.
//!
//! # Cost
//! A round: one read of the columns, O(n k d) for the placing, in
//! parallel over row groups; an input of a single row group reads on one
//! thread. The sample: one read, a SHA-256 digest per record, and a
//! partial sort per thread, O(n + size log size).

use super::drive::Rounds;
use crate::engine::exact::{RoundSums, Shifts};
use crate::parquet::{self as pq, As, Column, Group, ReadError};
use crate::run::prepare::FeatureParams;
use std::path::Path;

/// The workers of a pass: rayon's thread count (`RAYON_NUM_THREADS`, else
/// the cores), so a pass uses what the rest of a run uses.
fn threads() -> usize {
    rayon::current_num_threads()
}

/// Records decoded at a time by one thread.
pub const BATCH: usize = 16_384;

/// Memory allowed per column and worker for the pages being read and
/// decoded: a compressed page, its decompressed copy and a dictionary,
/// each at most 1 MiB in files written with the usual page size (arrow-rs,
/// parquet-mr and pyarrow all default to 1 MiB pages). Files written with
/// larger pages hold more.
pub const PAGES: usize = 3 << 20;

/// Memory allowed for a sample record's key.
const KEY_BYTES: usize = 32;

/// Bytes a thread holds per value of a batch beyond the value itself: the
/// arrow array (8 bytes and a validity bit), assort's column (16 bytes an
/// optional double) and the prepared row.
const BYTES_PER_VALUE: usize = 8 + 16 + 8;

/// What a pass could not read, with where.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum PassError {
    #[error("{shown}: {}", pq::words(.reason))]
    Read { shown: String, reason: ReadError },
    /// A record the pass needs a key of has none.
    #[error("{shown}: record {record} has no key")]
    NoKey { shown: String, record: usize },
    /// A stop was asked for (Ctrl-C in a session); checked between row
    /// groups.
    #[error("stopped")]
    Stopped,
    /// A value the feature's transform cannot take (the parameter pass
    /// found none, so the input changed in between).
    #[error("{shown}: record {record}: the value {value} of feature {feature} cannot be prepared")]
    Domain {
        shown: String,
        record: usize,
        feature: usize,
        value: f64,
    },
}

/// A Parquet input read in passes: its row groups and the columns a pass
/// reads, the key first when there is one.
#[derive(Debug, Clone)]
pub struct Passes {
    shown: String,
    groups: Vec<Group>,
    key: Option<usize>,
    features: Vec<usize>,
}

/// One record of the sample: its rank (the digest of `seed:key`), key and
/// raw feature values (gaps as `None`).
pub type Drawn = ([u8; 32], String, Vec<Option<f64>>);

impl Passes {
    /// The input at `path` (shown as `shown` in messages), reading the
    /// column at `key` (by schema position) as text and those at
    /// `features` as numbers. Reads the footers only.
    pub fn open(
        path: &Path,
        shown: &str,
        key: Option<usize>,
        features: &[usize],
    ) -> Result<Passes, PassError> {
        let groups = pq::groups(path).map_err(|reason| PassError::Read {
            shown: shown.to_string(),
            reason,
        })?;
        Ok(Passes {
            shown: shown.to_string(),
            groups,
            key,
            features: features.to_vec(),
        })
    }

    /// Records in the input, from the footers.
    pub fn records(&self) -> usize {
        self.groups.iter().map(|g| g.rows).sum()
    }

    /// The most memory the passes hold beyond the program itself, in
    /// bytes, on `threads` workers drawing a sample of `sample` records:
    /// stated before a run reads anything. Per worker: one batch as
    /// arrow-rs decodes it and as assort's columns, [`PAGES`] of pages per
    /// column, and while the sample is drawn two samples' worth of
    /// candidates; then the sample itself. A key is allowed [`KEY_BYTES`].
    pub fn peak(&self, threads: usize, sample: usize) -> usize {
        let threads = threads.max(1);
        let columns = self.features.len() + usize::from(self.key.is_some());
        let batch = BATCH * columns.max(1) * BYTES_PER_VALUE;
        let record = std::mem::size_of::<Drawn>() + KEY_BYTES + 16 * self.features.len();
        threads * (batch + columns * PAGES) + (2 * threads + 1) * sample * record
    }

    fn wanted(&self, with_key: bool) -> Vec<(usize, As)> {
        let key = self.key.filter(|_| with_key).map(|k| (k, As::Texts));
        key.into_iter()
            .chain(self.features.iter().map(|&f| (f, As::Numbers)))
            .collect()
    }

    /// One pass: `threads` workers take the row groups in turn, each
    /// reading its groups batch by batch through `each` (the batch's first
    /// record, its keys when `with_key`, its feature columns) into its one
    /// `T` (from `init`); the workers' `T`s are then combined by `merge`.
    /// Which worker reads which group varies, so a pass's result must not
    /// depend on it. One `T` per worker, not per group: the memory a pass
    /// holds does not grow with the groups.
    pub fn pass<T: Send>(
        &self,
        with_key: bool,
        init: impl Fn() -> T + Sync,
        each: impl Fn(&mut T, usize, &[Option<String>], &[&[Option<f64>]]) -> Result<(), PassError>
            + Sync,
        merge: impl Fn(T, T) -> T,
    ) -> Result<T, PassError> {
        use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
        let wanted = self.wanted(with_key);
        let next = AtomicUsize::new(0);
        let failed = AtomicBool::new(false);
        let work = || -> Result<T, PassError> {
            let mut acc = init();
            while !failed.load(Ordering::Relaxed) {
                let Some(g) = self.groups.get(next.fetch_add(1, Ordering::Relaxed)) else {
                    break;
                };
                if crate::engine::stop::requested() {
                    failed.store(true, Ordering::Relaxed);
                    return Err(PassError::Stopped);
                }
                self.read_group(g, &wanted, &mut acc, &each)
                    .inspect_err(|_| {
                        failed.store(true, Ordering::Relaxed);
                    })?;
            }
            Ok(acc)
        };
        let workers = threads().min(self.groups.len()).max(1);
        let results: Vec<Result<T, PassError>> = std::thread::scope(|scope| {
            let handles: Vec<_> = (0..workers).map(|_| scope.spawn(work)).collect();
            handles
                .into_iter()
                .map(|h| h.join().unwrap_or_else(|p| std::panic::resume_unwind(p)))
                .collect()
        });
        let mut out: Option<T> = None;
        for r in results {
            let r = r?;
            out = Some(match out {
                None => r,
                Some(a) => merge(a, r),
            });
        }
        Ok(out.unwrap_or_else(init))
    }

    /// The row groups a pass reads, in the input's order.
    pub fn groups(&self) -> &[Group] {
        &self.groups
    }

    /// One row group through `each`, batch by batch, into `acc`.
    fn read_group<T>(
        &self,
        g: &Group,
        wanted: &[(usize, As)],
        acc: &mut T,
        each: &impl Fn(&mut T, usize, &[Option<String>], &[&[Option<f64>]]) -> Result<(), PassError>,
    ) -> Result<(), PassError> {
        self.batches(g, wanted, |first, keys, values| {
            each(acc, first, keys, values)
        })
    }

    /// One row group read on this thread, batch by batch through `each`
    /// (the batch's first record, its keys when `with_key`, its feature
    /// columns).
    pub fn read_one(
        &self,
        g: &Group,
        with_key: bool,
        each: impl FnMut(usize, &[Option<String>], &[&[Option<f64>]]) -> Result<(), PassError>,
    ) -> Result<(), PassError> {
        self.batches(g, &self.wanted(with_key), each)
    }

    fn batches(
        &self,
        g: &Group,
        wanted: &[(usize, As)],
        mut each: impl FnMut(usize, &[Option<String>], &[&[Option<f64>]]) -> Result<(), PassError>,
    ) -> Result<(), PassError> {
        pq::each_batch(g, wanted, BATCH, |first, columns| {
            let mut keys: &[Option<String>] = &[];
            let mut values: Vec<&[Option<f64>]> = Vec::with_capacity(columns.len());
            for c in columns {
                match c {
                    Column::Texts(t) => keys = t,
                    Column::Numbers(v) => values.push(v),
                }
            }
            each(first, keys, &values).map_err(Wrapped)
        })
        .map_err(|e: Wrapped| match e.0 {
            PassError::Read { reason, .. } => PassError::Read {
                shown: self.shown.clone(),
                reason,
            },
            other => other,
        })
    }

    /// One exact Lloyd round over every record whose features can all be
    /// prepared by `params` (a gap with no fill leaves the record out, as
    /// `missing drop` does): see [`RoundSums`].
    pub fn round(
        &self,
        params: &[FeatureParams],
        centres: &[f64],
        shifts: &Shifts,
    ) -> Result<RoundSums, PassError> {
        let d = params.len();
        let k = centres.len() / d.max(1);
        self.pass(
            false,
            || RoundSums::new(k, d),
            |sums, first, _, values| {
                let mut row = vec![0.0; d];
                for i in 0..values.first().map_or(0, |c| c.len()) {
                    if self.prepare(params, values, i, first, &mut row)? {
                        sums.observe(&row, centres, shifts);
                    }
                }
                Ok(())
            },
            |mut a, b| {
                a.add(&b);
                a
            },
        )
    }

    /// The largest magnitude of each feature's prepared values, over the
    /// records a round takes: what the exact sums' shifts are chosen from
    /// ([`Shifts::of`]). A value that is not finite makes its feature's
    /// NaN, which the shifts refuse.
    pub fn largest(&self, params: &[FeatureParams]) -> Result<Vec<f64>, PassError> {
        let d = params.len();
        let widest = |a: f64, b: f64| {
            if a.is_nan() || b.is_nan() {
                f64::NAN
            } else {
                a.max(b.abs())
            }
        };
        self.pass(
            false,
            || vec![0.0; d],
            |largest, first, _, values| {
                let mut row = vec![0.0; d];
                for i in 0..values.first().map_or(0, |c| c.len()) {
                    if self.prepare(params, values, i, first, &mut row)? {
                        for (m, &x) in largest.iter_mut().zip(&row) {
                            *m = widest(*m, x);
                        }
                    }
                }
                Ok(())
            },
            |a, b| a.into_iter().zip(b).map(|(a, b)| widest(a, b)).collect(),
        )
    }

    /// Record `i` of a batch prepared into `row`; false when a gap has
    /// no fill.
    pub fn prepare(
        &self,
        params: &[FeatureParams],
        values: &[&[Option<f64>]],
        i: usize,
        first: usize,
        row: &mut [f64],
    ) -> Result<bool, PassError> {
        for (f, (fp, column)) in params.iter().zip(values).enumerate() {
            let Some(x) = column[i].or(fp.fill) else {
                return Ok(false);
            };
            // The error is built only when it happens: a message per value
            // would cost more than the rest of the round.
            row[f] = crate::run::model::prepared_value(fp, x).ok_or_else(|| PassError::Domain {
                shown: self.shown.clone(),
                record: first + i,
                feature: f,
                value: x,
            })?;
        }
        Ok(true)
    }

    /// The seeded sample ([`super::sample`]): the `size` records of
    /// smallest rank, in rank order (then by key), with their raw values.
    /// Needs the key.
    pub fn sample(&self, seed: u64, size: usize) -> Result<Vec<Drawn>, PassError> {
        let drawn = self.pass(
            true,
            || Draw::new(size),
            |draw: &mut Draw, first, keys, values| {
                for (i, key) in keys.iter().enumerate() {
                    let key = key.as_deref().ok_or_else(|| PassError::NoKey {
                        shown: self.shown.clone(),
                        record: first + i,
                    })?;
                    draw.offer(rank_of(seed, key), key, || {
                        values.iter().map(|c| c[i]).collect()
                    });
                }
                Ok(())
            },
            Draw::merge,
        )?;
        Ok(drawn.finish())
    }
}

/// A record's rank: the SHA-256 digest of `seed:key` ([`super::sample`]).
pub fn rank_of(seed: u64, key: &str) -> [u8; 32] {
    super::sample::digest(seed, key)
}

/// The sample being drawn by one worker: at most two samples' worth of
/// candidates between trims, and once a sample's worth is held, records
/// of a larger rank than the last kept are not held at all.
#[derive(Debug, Clone)]
pub struct Draw {
    size: usize,
    drawn: Vec<Drawn>,
    cutoff: Option<[u8; 32]>,
}

impl Draw {
    pub fn new(size: usize) -> Draw {
        Draw {
            size,
            drawn: Vec::new(),
            cutoff: None,
        }
    }

    /// A record of rank `rank`; its values are gathered only when it may
    /// be drawn.
    #[inline]
    pub fn offer(&mut self, rank: [u8; 32], key: &str, values: impl FnOnce() -> Vec<Option<f64>>) {
        if self.cutoff.is_some_and(|c| rank > c) {
            return;
        }
        self.drawn.push((rank, key.to_string(), values()));
        if self.drawn.len() >= 2 * self.size.max(1) {
            self.trim();
        }
    }

    fn trim(&mut self) {
        self.drawn
            .sort_unstable_by(|a, b| a.0.cmp(&b.0).then_with(|| a.1.cmp(&b.1)));
        self.drawn.truncate(self.size);
        if self.drawn.len() == self.size {
            self.cutoff = self.drawn.last().map(|d| d.0);
        }
    }

    /// Another worker's candidates joined to these.
    pub fn merge(mut self, other: Draw) -> Draw {
        self.drawn.extend(other.drawn);
        self.trim();
        self
    }

    /// The sample, in rank order (then by key).
    pub fn finish(mut self) -> Vec<Drawn> {
        self.trim();
        self.drawn
    }
}

/// A pass error carried through [`pq::each_batch`], which hands read
/// errors in by `From`.
struct Wrapped(PassError);

impl From<ReadError> for Wrapped {
    fn from(reason: ReadError) -> Wrapped {
        Wrapped(PassError::Read {
            shown: String::new(),
            reason,
        })
    }
}

/// [`Passes::round`] as the driver's engine, with the features' parameters
/// and the shifts fixed for the fit.
pub struct Streamed<'a> {
    pub passes: &'a Passes,
    pub params: &'a [FeatureParams],
    pub shifts: &'a Shifts,
}

impl Rounds for Streamed<'_> {
    type Error = PassError;
    fn round(&mut self, centres: &[f64]) -> Result<RoundSums, PassError> {
        self.passes.round(self.params, centres, self.shifts)
    }
}
