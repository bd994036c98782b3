//! k-means by Lloyd's iterations, from greedy k-means++ or random-partition
//! starts, best of several restarts run in parallel.
//!
//! # References
//! - S. Lloyd, "Least squares quantization in PCM", IEEE Transactions on
//!   Information Theory 28(2), 1982: the assign / re-centre iteration.
//! - D. Arthur and S. Vassilvitskii, "k-means++: the advantages of careful
//!   seeding", SODA 2007: seeding by squared-distance sampling. We use the
//!   greedy variant the paper's experiments mention: at each step
//!   `2 + floor(ln k)` candidates are drawn and the one that lowers the
//!   potential most is kept (analysed by Grunau, Özüdoğru, Rozhoň and Tětek,
//!   "A nearly tight analysis of greedy k-means++", SODA 2023).
//! - Random partition: every record gets a uniformly drawn segment and the
//!   first centres are the segment means (E. Forgy's and R. Jancey's early
//!   variants of the method start this way; common practice).
//!
//! # Complexity
//! Each round is O(n k d) time; seeding is O(n k d log k). Memory is O(n + k d)
//! per restart beyond the data; restarts run in parallel, each on its own
//! thread-local buffers.
//!
//! # Determinism and ties
//! Restart `r` for a given `k` draws from stream `(k << 32) | r` of the seeded
//! generator ([`super::rng`]), so its result does not depend on which thread
//! runs it. A record goes to the nearest centre, ties to the lowest centre
//! number. The best restart has the lowest within-cluster sum of squares,
//! ties to the lowest restart number. Sums run in record order within fixed
//! chunks of 8,192 records, the chunks' sums then added in chunk order.
//!
//! # Empty clusters
//! When a centre loses all its records, it is moved onto the record farthest
//! from its own centre among those whose segment has more than one record
//! (ties to the lowest record index); several empty centres are refilled in
//! ascending order, each taking the next farthest record.
//!
//! # Stopping
//! Iterations stop when no record changes segment, when the summed squared
//! movement of the centres falls to `tolerance` times the mean squared
//! distance of the records to their grand mean, or after `max_rounds`
//! rounds. The result always ends with an assignment step, so every record
//! is labelled with its nearest final centre and the within-cluster sum of
//! squares is measured against those centres.
//!
//! # Output convention
//! Segments are numbered canonically: 0..k by decreasing size, ties to the
//! segment holding the lowest record index. Two runs that find the same
//! partition therefore give the same numbers, whatever the restart.

mod hamerly;
mod sampled;
pub use sampled::{best_starts, Start, REFINED};

use super::weights::{draw_by_weight, Weights};
use super::{dist2, rng::Stream, stop, EngineError};
use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;
use serde::Serialize;

/// How restarts choose their first centres.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[non_exhaustive]
pub enum Seeding {
    /// Greedy k-means++ (the default).
    #[serde(rename = "kmeans++")]
    KMeansPlusPlus,
    /// Uniformly random segments, centres at their means.
    #[serde(rename = "random-partition")]
    RandomPartition,
}

impl Seeding {
    pub const NAMES: [&'static str; 2] = ["kmeans++", "random-partition"];

    pub fn parse(word: &str) -> Option<Seeding> {
        match word {
            "kmeans++" => Some(Seeding::KMeansPlusPlus),
            "random-partition" => Some(Seeding::RandomPartition),
            _ => None,
        }
    }
}

/// Settings for one value of k. The caller (the checker) has validated
/// them: `k >= 1`, `restarts >= 1`, `max_rounds >= 1`, `tolerance >= 0`.
#[derive(Debug, Clone)]
pub struct KMeansSettings {
    pub k: usize,
    pub restarts: usize,
    pub max_rounds: usize,
    pub tolerance: f64,
    pub seeding: Seeding,
    pub seed: u64,
    /// Run the restarts on a seeded sample of this many records and refine
    /// the best few on every record (see `sampled`); `None`, or a sample
    /// as large as the data, runs every restart on every record.
    pub sample: Option<usize>,
    /// Centres to start one more restart from (k rows of d values,
    /// row-major), besides the seeded ones: last run's segments, say. It
    /// counts as restart number `restarts`; ignored unless it holds k x d
    /// finite values.
    pub start: Option<Vec<f64>>,
}

/// The best of the restarts, canonically numbered.
#[derive(Debug, Clone)]
pub struct KMeansFit {
    pub k: usize,
    /// Segment of each record, 0-based canonical numbers.
    pub labels: Vec<u32>,
    /// k by d, row `j` is the centre of segment `j`.
    pub centroids: Array2<f64>,
    /// Within-cluster sum of squared distances.
    pub inertia: f64,
    /// Rounds the best restart took.
    pub rounds: usize,
    /// Whether the best restart stopped before `max_rounds`.
    pub converged: bool,
    /// 0-based number of the restart that found the best.
    pub best_restart: usize,
    /// How many restarts reached the same partition as the best.
    pub restarts_at_best: usize,
    pub restarts: usize,
    /// Records the restarts ran on, when they ran on a sample.
    pub sampled: Option<usize>,
    /// Whether the kept result grew from the given start.
    pub from_start: bool,
}

/// Records above which one restart's assignment step is split across
/// threads. Below it, parallel restarts already keep the cores busy.
const PARALLEL_ASSIGN_MIN: usize = 16_384;

/// Records per chunk of the segment means: partial sums per chunk, added in
/// chunk order. Fixed, so the sums' bits never depend on the thread count.
const MEANS_CHUNK: usize = 8_192;

/// Fits k-means: `settings.restarts` restarts, the best kept.
///
/// # Example
/// ```
/// use assort::engine::kmeans::{kmeans, KMeansSettings, Seeding};
/// let x = ndarray::array![[0.0], [0.2], [5.0], [5.1]];
/// let settings = KMeansSettings { k: 2, restarts: 4, max_rounds: 100, tolerance: 0.0, seeding: Seeding::KMeansPlusPlus, seed: 1, sample: None, start: None };
/// let fit = kmeans(x.view(), &settings).unwrap();
/// // Equal sizes: the segment holding the first record is numbered first.
/// assert_eq!(fit.labels, vec![0, 0, 1, 1]);
/// assert!((fit.inertia - (0.02 + 0.005)).abs() < 1e-12);
/// ```
pub fn kmeans(
    data: ArrayView2<'_, f64>,
    settings: &KMeansSettings,
) -> Result<KMeansFit, EngineError> {
    kmeans_with(data, Weights::NONE, settings, Search::Bounded)
}

/// [`kmeans`] with record weights: a record of weight `w` counts as `w`
/// identical records in seeding (k-means++ draws by weight times squared
/// distance, the first centre by weight), in every segment mean and in the
/// within-cluster sum of squares that ranks restarts. A restart on a sample
/// draws the sample uniformly and keeps the drawn records' weights.
pub fn kmeans_weighted(
    data: ArrayView2<'_, f64>,
    weights: Weights<'_>,
    settings: &KMeansSettings,
) -> Result<KMeansFit, EngineError> {
    kmeans_with(data, weights, settings, Search::Bounded)
}

/// How the assignment step finds each record's nearest centre. Both give
/// the same labels, bit for bit; the exhaustive search is kept as the
/// oracle the bounded one is tested against.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum Search {
    /// Hamerly's bounds skip records whose centre cannot have changed
    /// (the default; see `hamerly`).
    Bounded,
    /// Every record measured against every centre, every round.
    Exhaustive,
}

/// [`kmeans`] with the assignment search chosen.
pub fn kmeans_with(
    data: ArrayView2<'_, f64>,
    weights: Weights<'_>,
    settings: &KMeansSettings,
    search: Search,
) -> Result<KMeansFit, EngineError> {
    kmeans_spread(data, weights, settings, search, None)
}

/// The records' spread about their mean, which a fit's tolerance is
/// relative to: the same for every k, so a sweep over millions of records
/// computes it once ([`Spread::of`]) and passes it to
/// [`kmeans_weighted_spread`] instead of two passes over the data per k.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Spread {
    /// The records' summed weight, and their weighted mean squared
    /// distance to their weighted mean.
    total: f64,
    spread: f64,
}

impl Spread {
    /// O(n d), in record order.
    pub fn of(data: ArrayView2<'_, f64>, w: Weights<'_>) -> Spread {
        let (n, d) = data.dim();
        match data.as_slice() {
            Some(x) => Spread::of_rows(x, w, n, d),
            None => Spread::of_rows(&data.iter().copied().collect::<Vec<f64>>(), w, n, d),
        }
    }

    fn of_rows(x: &[f64], w: Weights<'_>, n: usize, d: usize) -> Spread {
        let total = w.total(n);
        let mut grand = vec![0.0; d];
        for (i, row) in x.chunks_exact(d.max(1)).enumerate() {
            for (g, v) in grand.iter_mut().zip(row) {
                *g += w.at(i) * v;
            }
        }
        grand.iter_mut().for_each(|g| *g /= total);
        let spread: f64 = (x.chunks_exact(d.max(1)).enumerate())
            .map(|(i, row)| w.at(i) * dist2(row, &grand))
            .sum::<f64>()
            / total;
        Spread { total, spread }
    }
}

/// [`kmeans_weighted`] with the data's [`Spread`] computed beforehand
/// (the same fit, to the bit).
pub fn kmeans_weighted_spread(
    data: ArrayView2<'_, f64>,
    weights: Weights<'_>,
    settings: &KMeansSettings,
    spread: &Spread,
) -> Result<KMeansFit, EngineError> {
    kmeans_spread(data, weights, settings, Search::Bounded, Some(spread))
}

fn kmeans_spread(
    data: ArrayView2<'_, f64>,
    weights: Weights<'_>,
    settings: &KMeansSettings,
    search: Search,
    spread: Option<&Spread>,
) -> Result<KMeansFit, EngineError> {
    let (n, d) = data.dim();
    let k = settings.k;
    if k == 0 {
        return Err(EngineError::BadK { k });
    }
    if d == 0 {
        return Err(EngineError::NoFeatures);
    }
    if k > n {
        return Err(EngineError::TooFewRecords { k, n });
    }
    let owned;
    let x: &[f64] = match data.as_slice() {
        Some(s) => s,
        None => {
            owned = data.iter().copied().collect::<Vec<f64>>();
            &owned
        }
    };
    let spread = match spread {
        Some(s) => *s,
        None => Spread::of_rows(x, weights, n, d),
    };
    let problem = Problem::new(x, weights, (n, d), settings, search, spread);
    if let Some(s) = settings.sample.filter(|&s| s < n) {
        return sampled::fit(&problem, s);
    }

    // Each restart is summarised; only the best is kept in full, by running
    // it again (it is deterministic), so memory stays O(n) per thread.
    let summaries: Vec<(f64, u64)> = (0..problem.starts())
        .into_par_iter()
        .map(|r| {
            if stop::requested() {
                return (f64::INFINITY, 0);
            }
            let run = problem.restart(r);
            let labels = canonical(&run.labels, k).0;
            (run.inertia, partition_hash(&labels))
        })
        .collect();
    if stop::requested() {
        return Err(EngineError::Stopped);
    }
    let mut best = 0;
    for (r, s) in summaries.iter().enumerate() {
        if s.0 < summaries[best].0 {
            best = r;
        }
    }
    let best_hash = summaries[best].1;
    let restarts_at_best = summaries.iter().filter(|s| s.1 == best_hash).count();

    let run = problem.restart(best);
    if stop::requested() {
        return Err(EngineError::Stopped);
    }
    finish(run, d, settings, best, restarts_at_best, None)
}

/// The kept restart, canonically numbered.
fn finish(
    run: Restart,
    d: usize,
    settings: &KMeansSettings,
    best_restart: usize,
    restarts_at_best: usize,
    sampled: Option<usize>,
) -> Result<KMeansFit, EngineError> {
    let k = settings.k;
    if has_empty(&run.labels, k) {
        return Err(EngineError::TooFewDistinct { k });
    }
    let (labels, order) = canonical(&run.labels, k);
    let mut centroids = Array2::zeros((k, d));
    for (new, &old) in order.iter().enumerate() {
        for f in 0..d {
            centroids[[new, f]] = run.centroids[old * d + f];
        }
    }
    Ok(KMeansFit {
        k,
        labels,
        centroids,
        inertia: run.inertia,
        rounds: run.rounds,
        converged: run.converged,
        best_restart,
        restarts_at_best,
        restarts: settings.restarts,
        sampled,
        from_start: best_restart == settings.restarts,
    })
}

/// For each record: its nearest centre, the distance to it, and the margin
/// (distance to the second-nearest centre minus distance to the nearest;
/// zero when there is only one centre). Ties go to the lower centre number.
pub fn nearest_with_margin(
    data: ArrayView2<'_, f64>,
    centroids: ArrayView2<'_, f64>,
) -> Vec<(u32, f64, f64)> {
    let (x, c) = (data.as_standard_layout(), centroids.as_standard_layout());
    let d = data.ncols().max(1);
    let c = c.as_slice().expect("a standard-layout array is one slice");
    x.as_slice()
        .expect("a standard-layout array is one slice")
        .par_chunks(d)
        .map(|row| {
            let (b1, d1, d2) = nearest_two(row, c, d);
            let margin = if d2.is_finite() {
                d2.sqrt() - d1.sqrt()
            } else {
                0.0
            };
            (b1, d1.sqrt(), margin)
        })
        .collect()
}

/// The nearest of the centres (`d` values each, in one slice) by squared
/// distance, ties to the lowest number; its squared distance and the
/// second-smallest squared distance (infinite with one centre).
#[inline]
pub(crate) fn nearest_two(row: &[f64], centres: &[f64], d: usize) -> (u32, f64, f64) {
    two_smallest(centres.chunks_exact(d).map(|c| dist2(row, c)))
}

/// The place of the smallest of `values` (ties to the first), it, and the
/// second smallest (infinite with one value). O(k) for k values.
#[inline]
pub fn two_smallest(values: impl Iterator<Item = f64>) -> (u32, f64, f64) {
    let (mut best, mut d1, mut d2) = (0u32, f64::INFINITY, f64::INFINITY);
    for (j, dd) in values.enumerate() {
        if dd < d1 {
            d2 = d1;
            d1 = dd;
            best = j as u32;
        } else if dd < d2 {
            d2 = dd;
        }
    }
    (best, d1, d2)
}

/// For each record: the distance to the centre of its own segment, and the
/// margin (distance to the nearest other centre minus that distance; zero
/// with one centre). For k-means labels the own centre is the nearest, so
/// the margin is never negative; for a tree's segments it can be, marking a
/// record nearer another segment's centre than its own.
pub fn distance_and_margin(
    data: ArrayView2<'_, f64>,
    centroids: ArrayView2<'_, f64>,
    labels: &[u32],
) -> Vec<(f64, f64)> {
    let (x, c) = (data.as_standard_layout(), centroids.as_standard_layout());
    let d = data.ncols().max(1);
    let c = c.as_slice().expect("a standard-layout array is one slice");
    let cents: Vec<&[f64]> = c.chunks_exact(d).collect();
    x.as_slice()
        .expect("a standard-layout array is one slice")
        .par_chunks(d)
        .zip(labels.par_iter())
        .map(|(row, &own)| {
            let own_d = dist2(row, cents[own as usize]).sqrt();
            let other = cents
                .iter()
                .enumerate()
                .filter(|(j, _)| *j != own as usize)
                .map(|(_, c)| dist2(row, c))
                .fold(f64::INFINITY, f64::min);
            let margin = if other.is_finite() {
                other.sqrt() - own_d
            } else {
                0.0
            };
            (own_d, margin)
        })
        .collect()
}

/// The data and settings shared by all restarts.
struct Problem<'a> {
    x: &'a [f64],
    w: Weights<'a>,
    /// The records' summed weight (`n` without weights).
    total: f64,
    n: usize,
    d: usize,
    settings: &'a KMeansSettings,
    search: Search,
    /// Centre movement below which iterations stop.
    shift_limit: f64,
}

/// One restart's outcome, in its own (not yet canonical) numbering.
struct Restart {
    labels: Vec<u32>,
    centroids: Vec<f64>,
    inertia: f64,
    rounds: usize,
    converged: bool,
}

impl<'a> Problem<'a> {
    fn new(
        x: &'a [f64],
        w: Weights<'a>,
        (n, d): (usize, usize),
        settings: &'a KMeansSettings,
        search: Search,
        spread: Spread,
    ) -> Self {
        Problem {
            x,
            w,
            total: spread.total,
            n,
            d,
            settings,
            search,
            shift_limit: settings.tolerance * spread.spread,
        }
    }

    /// The problem over the records `x` (weights `w`), of the same width
    /// and settings.
    fn over(&self, x: &'a [f64], w: Weights<'a>, n: usize) -> Problem<'a> {
        let spread = Spread::of_rows(x, w, n, self.d);
        Problem::new(x, w, (n, self.d), self.settings, self.search, spread)
    }

    fn row(&self, i: usize) -> &[f64] {
        &self.x[i * self.d..(i + 1) * self.d]
    }

    /// The given start, when it fits: k x d finite values.
    fn given_start(&self) -> Option<&[f64]> {
        self.settings
            .start
            .as_deref()
            .filter(|c| c.len() == self.settings.k * self.d && c.iter().all(|v| v.is_finite()))
    }

    /// The restarts to run: the seeded ones, and the given start if any.
    fn starts(&self) -> usize {
        self.settings.restarts + usize::from(self.given_start().is_some())
    }

    fn restart(&self, r: usize) -> Restart {
        if r == self.settings.restarts {
            if let Some(c) = self.given_start() {
                return self.lloyd(c.to_vec(), vec![0u32; self.n], vec![0.0; self.n], true);
            }
        }
        let k = self.settings.k;
        let mut stream = Stream::new(self.settings.seed, ((k as u64) << 32) | r as u64);
        let mut labels = vec![0u32; self.n];
        let mut dists = vec![0.0; self.n];
        let centroids = match self.settings.seeding {
            Seeding::KMeansPlusPlus => self.plusplus(&mut stream),
            Seeding::RandomPartition => {
                for l in labels.iter_mut() {
                    *l = stream.below(k) as u32;
                }
                // Distances to the first means are needed only to refill
                // empty segments; measure them against the raw means.
                let rough = self.means(&labels);
                for i in 0..self.n {
                    dists[i] = dist2(self.row(i), &rough[labels[i] as usize * self.d..][..self.d]);
                }
                self.update(&mut labels, &dists)
            }
        };
        let first = self.settings.seeding == Seeding::KMeansPlusPlus;
        self.lloyd(centroids, labels, dists, first)
    }

    /// Lloyd's iterations from `centroids` to the end of a restart. `first`
    /// says the labels are not yet an assignment (so the first step's
    /// changes do not count as movement).
    fn lloyd(
        &self,
        mut centroids: Vec<f64>,
        mut labels: Vec<u32>,
        mut dists: Vec<f64>,
        mut first: bool,
    ) -> Restart {
        let k = self.settings.k;
        let mut rounds = 0;
        let mut converged = false;
        let mut bounds = hamerly::Bounds::new(self.n);
        let mut previous = centroids.clone();
        loop {
            let changed = match self.search {
                Search::Exhaustive => self.assign(&centroids, &mut labels, &mut dists),
                Search::Bounded => hamerly::assign(
                    self.x,
                    self.d,
                    &centroids,
                    &previous,
                    &mut labels,
                    &mut bounds,
                ),
            };
            previous.clone_from(&centroids);
            if (changed == 0 && !first) || converged {
                converged = true;
                break;
            }
            first = false;
            if rounds == self.settings.max_rounds || stop::requested() {
                break;
            }
            if self.search == Search::Bounded && has_empty(&labels, k) {
                // The refill rule reads each record's distance to its
                // centre, which the bounded step does not keep; it also
                // moves records, which voids their bounds.
                self.own_distances(&centroids, &labels, &mut dists);
                bounds.invalidate();
            }
            // Without an empty segment `update` is the segment means.
            let next = self.update(&mut labels, &dists);
            let shift: f64 = centroids
                .chunks_exact(self.d)
                .zip(next.chunks_exact(self.d))
                .map(|(a, b)| dist2(a, b))
                .sum();
            centroids = next;
            rounds += 1;
            if shift <= self.shift_limit {
                // One last assignment against the final centres follows.
                converged = true;
            }
        }
        if self.search == Search::Bounded {
            self.own_distances(&centroids, &labels, &mut dists);
        }
        // A round cap can stop right after an assignment that emptied a
        // segment; refill and reassign until none is empty. Each pass moves a
        // centre onto a record, which then keeps it unless another centre
        // sits on an identical record, so this ends within k passes.
        for _ in 0..k {
            if !has_empty(&labels, k) {
                break;
            }
            centroids = self.update(&mut labels, &dists);
            self.assign(&centroids, &mut labels, &mut dists);
        }
        let inertia = (dists.iter().enumerate())
            .map(|(i, d)| self.w.at(i) * d)
            .sum();
        Restart {
            labels,
            centroids,
            inertia,
            rounds,
            converged,
        }
    }

    /// Greedy k-means++ seeding; see the module documentation. A step's
    /// candidates are all drawn from the same potential, so they are drawn
    /// first and measured in one pass over the records (the data read
    /// once per step, not once per candidate); the draws and every sum are
    /// those of measuring them one after the other.
    fn plusplus(&self, stream: &mut Stream) -> Vec<f64> {
        let (n, d, k) = (self.n, self.d, self.settings.k);
        let trials = 2 + (k as f64).ln().floor() as usize;
        let mut centres = Vec::with_capacity(k * d);
        let first = match self.w.as_slice() {
            Some(w) => draw_by_weight(w, stream.unit(), self.total),
            None => stream.below(n),
        };
        centres.extend_from_slice(self.row(first));
        let mut closest = vec![0.0; n];
        let mut potential = self.nearer(&vec![f64::INFINITY; n], self.row(first), &mut closest);
        let mut candidates: Vec<Vec<f64>> = vec![vec![0.0; n]; trials];
        for _ in 1..k {
            let picks: Vec<usize> = (0..trials)
                .map(|_| {
                    if potential > 0.0 {
                        self.draw_by_potential(&closest, stream.unit() * potential)
                    } else {
                        // Every record sits on a centre already
                        // (duplicates); any record will do and the
                        // empty-cluster rule follows.
                        stream.below(n)
                    }
                })
                .collect();
            let rows: Vec<&[f64]> = picks.iter().map(|&p| self.row(p)).collect();
            let pots = self.nearer_all(&closest, &rows, &mut candidates);
            // The lowest potential, ties to the earlier candidate.
            let mut best = 0;
            for (t, &p) in pots.iter().enumerate() {
                if p < pots[best] {
                    best = t;
                }
            }
            centres.extend_from_slice(self.row(picks[best]));
            std::mem::swap(&mut closest, &mut candidates[best]);
            potential = pots[best];
        }
        centres
    }

    /// [`Problem::nearer`] for several centres in one pass over the
    /// records: `outs[t]` takes the smaller of `closest` and the squared
    /// distance to `cs[t]`; returns each one's weighted sum, summed as
    /// `nearer` sums (fixed chunks, added in chunk order).
    fn nearer_all(&self, closest: &[f64], cs: &[&[f64]], outs: &mut [Vec<f64>]) -> Vec<f64> {
        let m = cs.len();
        let chunks = self.n.div_ceil(MEANS_CHUNK);
        // Each chunk's slices of every output, so chunks can be written in
        // parallel.
        let mut per_chunk: Vec<Vec<&mut [f64]>> =
            (0..chunks).map(|_| Vec::with_capacity(m)).collect();
        for out in outs.iter_mut() {
            for (c, part) in out.chunks_mut(MEANS_CHUNK).enumerate() {
                per_chunk[c].push(part);
            }
        }
        let work = |(ch, parts): (usize, &mut Vec<&mut [f64]>)| {
            let mut pots = vec![0.0; m];
            let start = ch * MEANS_CHUNK;
            for off in 0..parts.first().map_or(0, |p| p.len()) {
                let i = start + off;
                let (row, cl, w) = (self.row(i), closest[i], self.w.at(i));
                for (t, c) in cs.iter().enumerate() {
                    let v = cl.min(dist2(row, c));
                    parts[t][off] = v;
                    pots[t] += w * v;
                }
            }
            pots
        };
        let parts: Vec<Vec<f64>> = if self.n >= PARALLEL_ASSIGN_MIN {
            per_chunk.par_iter_mut().enumerate().map(work).collect()
        } else {
            per_chunk.iter_mut().enumerate().map(work).collect()
        };
        (0..m)
            .map(|t| parts.iter().fold(0.0, |a, p| a + p[t]))
            .collect()
    }

    /// A record drawn with probability proportional to its weight times its
    /// squared distance to the nearest centre: the first whose running
    /// potential exceeds `target`.
    fn draw_by_potential(&self, closest: &[f64], target: f64) -> usize {
        // Weight times squared distance, formed as the scan reads it: no
        // copy of the potentials per draw.
        match self.w.as_slice() {
            None => sample_by_weight(closest.iter().copied(), target),
            Some(w) => sample_by_weight(closest.iter().zip(w).map(|(c, w)| c * w), target),
        }
    }

    /// For each record, the smaller of `closest` and its squared distance to
    /// `c`, written to `out`; returns their sum weighted by the records'
    /// weights (the k-means++ potential). In parallel over fixed
    /// chunks of records, the chunks' sums added in chunk order, so the
    /// bits do not depend on the thread count (and, below one chunk, equal
    /// a plain sum in record order).
    fn nearer(&self, closest: &[f64], c: &[f64], out: &mut [f64]) -> f64 {
        let work = |(ch, (cl, o)): (usize, (&[f64], &mut [f64]))| {
            let mut pot = 0.0;
            for (off, (cv, ov)) in cl.iter().zip(o.iter_mut()).enumerate() {
                let i = ch * MEANS_CHUNK + off;
                let v = cv.min(dist2(self.row(i), c));
                *ov = v;
                pot += self.w.at(i) * v;
            }
            pot
        };
        let parts: Vec<f64> = if self.n >= PARALLEL_ASSIGN_MIN {
            closest
                .par_chunks(MEANS_CHUNK)
                .zip(out.par_chunks_mut(MEANS_CHUNK))
                .enumerate()
                .map(work)
                .collect()
        } else {
            closest
                .chunks(MEANS_CHUNK)
                .zip(out.chunks_mut(MEANS_CHUNK))
                .enumerate()
                .map(work)
                .collect()
        };
        parts.iter().fold(0.0, |a, p| a + p)
    }

    /// Each record's squared distance to its own centre, the value the
    /// exhaustive step leaves in `dists` (the nearest centre's squared
    /// distance), in parallel over fixed chunks.
    fn own_distances(&self, centroids: &[f64], labels: &[u32], dists: &mut [f64]) {
        let d = self.d;
        dists
            .par_chunks_mut(MEANS_CHUNK)
            .enumerate()
            .for_each(|(c, ds)| {
                for (off, dd) in ds.iter_mut().enumerate() {
                    let i = c * MEANS_CHUNK + off;
                    let own = labels[i] as usize;
                    *dd = dist2(self.row(i), &centroids[own * d..(own + 1) * d]);
                }
            });
    }

    /// Labels every record with its nearest centre; returns how many changed.
    fn assign(&self, centroids: &[f64], labels: &mut [u32], dists: &mut [f64]) -> usize {
        let d = self.d;
        let nearest = |row: &[f64]| {
            let mut best = (0u32, f64::INFINITY);
            for (j, c) in centroids.chunks_exact(d).enumerate() {
                let dd = dist2(row, c);
                if dd < best.1 {
                    best = (j as u32, dd);
                }
            }
            best
        };
        let work = |(chunk_start, (ls, ds)): (usize, (&mut [u32], &mut [f64]))| {
            let mut changed = 0;
            for (off, (l, dd)) in ls.iter_mut().zip(ds.iter_mut()).enumerate() {
                let (j, v) = nearest(self.row(chunk_start + off));
                if *l != j {
                    changed += 1;
                    *l = j;
                }
                *dd = v;
            }
            changed
        };
        if self.n >= PARALLEL_ASSIGN_MIN {
            const CHUNK: usize = 4096;
            labels
                .par_chunks_mut(CHUNK)
                .zip(dists.par_chunks_mut(CHUNK))
                .enumerate()
                .map(|(c, pair)| work((c * CHUNK, pair)))
                .sum()
        } else {
            work((0, (labels, dists)))
        }
    }

    /// Segment means, with no care for empty segments (left at zero).
    fn means(&self, labels: &[u32]) -> Vec<f64> {
        let (d, k) = (self.d, self.settings.k);
        // Partial sums over fixed chunks of records, in parallel, then
        // added in chunk order: the chunking never depends on the thread
        // count, so neither do the bits.
        // Weighted sums and summed weights; without weights the products
        // are the values themselves and the counts exact.
        let partial = |(c, ls): (usize, &[u32])| {
            let mut sums = vec![0.0; k * d];
            let mut counts = vec![0.0f64; k];
            for (off, &l) in ls.iter().enumerate() {
                let l = l as usize;
                let i = c * MEANS_CHUNK + off;
                let w = self.w.at(i);
                counts[l] += w;
                for (s, v) in sums[l * d..(l + 1) * d].iter_mut().zip(self.row(i)) {
                    *s += w * v;
                }
            }
            (sums, counts)
        };
        let parts: Vec<(Vec<f64>, Vec<f64>)> = if self.n >= PARALLEL_ASSIGN_MIN {
            labels
                .par_chunks(MEANS_CHUNK)
                .enumerate()
                .map(partial)
                .collect()
        } else {
            labels
                .chunks(MEANS_CHUNK)
                .enumerate()
                .map(partial)
                .collect()
        };
        let mut sums = vec![0.0; k * d];
        let mut counts = vec![0.0f64; k];
        for (ps, pc) in &parts {
            sums.iter_mut().zip(ps).for_each(|(s, p)| *s += p);
            counts.iter_mut().zip(pc).for_each(|(c, p)| *c += p);
        }
        for (j, &c) in counts.iter().enumerate() {
            if c > 0.0 {
                sums[j * d..(j + 1) * d].iter_mut().for_each(|s| *s /= c);
            }
        }
        sums
    }

    /// New centres as segment means, refilling empty segments by the rule in
    /// the module documentation (which may relabel records).
    fn update(&self, labels: &mut [u32], dists: &[f64]) -> Vec<f64> {
        let k = self.settings.k;
        let mut counts = vec![0usize; k];
        for &l in labels.iter() {
            counts[l as usize] += 1;
        }
        if !counts.contains(&0) {
            return self.means(labels);
        }
        let mut taken = vec![false; self.n];
        for j in 0..k {
            if counts[j] > 0 {
                continue;
            }
            let mut far: Option<usize> = None;
            for i in 0..self.n {
                if taken[i] || counts[labels[i] as usize] <= 1 {
                    continue;
                }
                if far.is_none_or(|f| dists[i] > dists[f]) {
                    far = Some(i);
                }
            }
            // k <= n guarantees some segment has two records while one is
            // empty; the guard keeps a bug from turning into a panic.
            if let Some(i) = far {
                counts[labels[i] as usize] -= 1;
                labels[i] = j as u32;
                counts[j] = 1;
                taken[i] = true;
            }
        }
        self.means(labels)
    }
}

fn has_empty(labels: &[u32], k: usize) -> bool {
    let mut seen = vec![false; k];
    labels.iter().for_each(|&l| seen[l as usize] = true);
    seen.contains(&false)
}

/// Index where the running sum of `weights` first exceeds `target`; the last
/// index with positive weight when rounding leaves `target` past the total.
fn sample_by_weight(weights: impl Iterator<Item = f64>, target: f64) -> usize {
    let mut acc = 0.0;
    let mut last_positive = 0;
    for (i, w) in weights.enumerate() {
        if w > 0.0 {
            acc += w;
            last_positive = i;
            if acc > target {
                return i;
            }
        }
    }
    last_positive
}

/// Renumbers a labelling canonically (see the module documentation).
/// Returns the new labels and, for each new number, the old one.
pub fn canonical(labels: &[u32], k: usize) -> (Vec<u32>, Vec<usize>) {
    let mut size = vec![0u64; k];
    for &l in labels {
        size[l as usize] += 1;
    }
    canonical_by_sizes(labels, &size)
}

/// [`canonical`] with each segment's size given (`sizes`, one per
/// segment), as when `labels` label only a sample of the records the
/// sizes count: larger first, a tie to the segment met first in `labels`.
pub fn canonical_by_sizes(labels: &[u32], sizes: &[u64]) -> (Vec<u32>, Vec<usize>) {
    let k = sizes.len();
    let mut first = vec![usize::MAX; k];
    for (i, &l) in labels.iter().enumerate() {
        first[l as usize] = first[l as usize].min(i);
    }
    let mut order: Vec<usize> = (0..k).collect();
    order.sort_by(|&a, &b| sizes[b].cmp(&sizes[a]).then(first[a].cmp(&first[b])));
    let mut new_of = vec![0u32; k];
    for (new, &old) in order.iter().enumerate() {
        new_of[old] = new as u32;
    }
    (labels.iter().map(|&l| new_of[l as usize]).collect(), order)
}

/// FNV-1a over the labels: identifies a canonical partition.
fn partition_hash(labels: &[u32]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for l in labels {
        for b in l.to_le_bytes() {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
    }
    h
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    fn settings(k: usize) -> KMeansSettings {
        KMeansSettings {
            k,
            restarts: 8,
            max_rounds: 100,
            tolerance: 0.0,
            seeding: Seeding::KMeansPlusPlus,
            seed: 1,
            sample: None,
            start: None,
        }
    }

    #[test]
    fn two_obvious_groups_are_found() {
        let x = array![
            [0.0, 0.0],
            [0.0, 1.0],
            [10.0, 10.0],
            [10.0, 11.0],
            [0.5, 0.5]
        ];
        let fit = kmeans(x.view(), &settings(2)).unwrap();
        assert_eq!(fit.labels, vec![0, 0, 1, 1, 0]);
        assert_eq!(fit.restarts_at_best, 8);
        // Worked by hand: the first group's mean is (1/6, 1/2), its squared
        // distances 10/36 + 10/36 + 4/36; the second's are 1/4 + 1/4.
        assert!((fit.inertia - (2.0 / 3.0 + 0.5)).abs() < 1e-12);
    }

    #[test]
    fn k_above_the_record_count_is_an_error() {
        let x = array![[0.0], [1.0]];
        assert_eq!(
            kmeans(x.view(), &settings(3)).unwrap_err(),
            EngineError::TooFewRecords { k: 3, n: 2 }
        );
    }

    #[test]
    fn fewer_distinct_records_than_k_is_an_error() {
        let x = array![[1.0], [1.0], [1.0], [1.0], [2.0]];
        assert_eq!(
            kmeans(x.view(), &settings(3)).unwrap_err(),
            EngineError::TooFewDistinct { k: 3 }
        );
    }

    #[test]
    fn identical_points_still_give_k_nonempty_segments() {
        let x = array![[1.0], [1.0], [1.0], [1.0], [2.0], [3.0]];
        let fit = kmeans(x.view(), &settings(3)).unwrap();
        let mut sizes = [0; 3];
        fit.labels.iter().for_each(|&l| sizes[l as usize] += 1);
        assert!(sizes.iter().all(|&s| s > 0), "{sizes:?}");
        assert_eq!(fit.inertia, 0.0);
    }

    #[test]
    fn random_partition_seeding_also_converges() {
        let x = array![
            [0.0, 0.0],
            [0.0, 1.0],
            [10.0, 10.0],
            [10.0, 11.0],
            [0.5, 0.5]
        ];
        let mut s = settings(2);
        s.seeding = Seeding::RandomPartition;
        let fit = kmeans(x.view(), &s).unwrap();
        assert_eq!(fit.labels, vec![0, 0, 1, 1, 0]);
        assert!(fit.converged);
    }

    #[test]
    fn canonical_numbers_follow_size_then_first_record() {
        let (labels, order) = canonical(&[2, 0, 0, 1, 1, 2, 2], 3);
        // Segment 2 has three records; 0 and 1 have two each, 0 first.
        assert_eq!(labels, vec![0, 1, 1, 2, 2, 0, 0]);
        assert_eq!(order, vec![2, 0, 1]);
    }

    #[test]
    fn margins_measure_the_gap_to_the_second_centre() {
        let x = array![[1.0], [4.0]];
        let c = array![[0.0], [5.0]];
        let out = nearest_with_margin(x.view(), c.view());
        assert_eq!(out, vec![(0, 1.0, 3.0), (1, 1.0, 3.0)]);
    }
}
