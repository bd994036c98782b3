//! k-prototypes: k-means for records with numbers and categories, without
//! a dissimilarity matrix.
//!
//! # Reference
//! Z. Huang, "Extensions to the k-means algorithm for clustering large data
//! sets with categorical values", Data Mining and Knowledge Discovery 2(3),
//! 283-304, 1998. A prototype holds a mean for each number column and a
//! mode (most frequent level) for each category; a record's cost against a
//! prototype is
//! ```text
//! cost(x, q) = Σ_numbers (x_f - q_f)²  +  Σ_categories γ_c [x_c ≠ q_c]
//! ```
//! Huang updates the prototypes after each record moves; we update them
//! once per round, after every record has been assigned (batch updates, as
//! Lloyd's k-means does), so the result depends on the data and the seed,
//! not on the order the records are visited in. On numbers alone this is
//! exactly k-means (tested against [`super::kmeans`] from the same starts).
//!
//! # γ
//! Huang suggests γ between 1/3 and 2/3 of the average standard deviation
//! of the number columns; [`huang_gamma`] gives the middle of that range,
//! 1/2 of it, and a recipe may set its own.
//!
//! # Starts, ties, determinism
//! Each restart seeds as k-means++ does, with the cost as the weight (it
//! plays the part of the squared distance): the first prototype a uniformly
//! drawn record, each next one a record drawn with probability proportional
//! to its cost against the nearest chosen one. Restart `r` at k draws from
//! stream `KPROTOTYPES_STREAM | (k << 32) | r`. A record joins the
//! cheapest prototype, ties to the lowest number; a mode tie goes to the
//! lowest level code (the first level in sorted order). A prototype left
//! with no record moves onto the record costing most against its own
//! prototype among segments of more than one record (ties to the lowest
//! record), as k-means does. Means are summed in record order within
//! chunks of 8,192 records, the chunks added in order, so the thread count
//! changes no bit. The best restart has the lowest total cost, ties to the
//! lower restart; segments are numbered canonically.
//!
//! # Stopping
//! When no record moves, when a round lowers the total cost by no more
//! than `tolerance` of it (large tables creep for hundreds of rounds with
//! a handful of records trading places), or after `max_rounds` rounds.
//!
//! # Cost
//! O(n k (p + c)) per round, O(n + k (p + L)) memory beyond the data (L the
//! levels of all categories).

use super::kmeans::canonical;
use super::rng::{spread_records, Stream};
use super::weights::Weights;
use super::{dist2, stop, EngineError};
use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;

/// Stream base for k-prototypes starts.
pub const KPROTOTYPES_STREAM: u64 = 1 << 60;

/// Records per chunk of the segment means.
const MEANS_CHUNK: usize = 8_192;

/// Records with numbers (prepared: scaled and weighted) and categories
/// (level codes, one column per category, no gaps).
#[derive(Debug, Clone, Copy)]
pub struct MixedRecords<'a> {
    /// n by p, row-major; p may be 0.
    pub numbers: ArrayView2<'a, f64>,
    /// Per category, each record's level code.
    pub codes: &'a [Vec<u32>],
    /// Per category, its levels.
    pub levels: &'a [usize],
    /// Per category, the weight γ of a mismatch.
    pub gamma: &'a [f64],
    /// Each record's weight (how many members it stands for): the cost,
    /// the means and the modes' counts weigh each record by it.
    pub weights: Weights<'a>,
}

impl MixedRecords<'_> {
    fn n(&self) -> usize {
        self.numbers.nrows()
    }

    /// The cost of record `i` against record `j`.
    pub fn between(&self, i: usize, j: usize) -> f64 {
        let mut c = 0.0;
        for f in 0..self.numbers.ncols() {
            let d = self.numbers[[i, f]] - self.numbers[[j, f]];
            c += d * d;
        }
        for (codes, &g) in self.codes.iter().zip(self.gamma) {
            if codes[i] != codes[j] {
                c += g;
            }
        }
        c
    }

    /// The cost of record `i` against prototype `q` (means, modes).
    pub fn cost(&self, i: usize, means: &[f64], modes: &[u32]) -> f64 {
        let row = self.numbers.row(i);
        let mut c = match row.as_slice() {
            Some(r) => dist2(r, means),
            None => dist2(&row.to_vec(), means),
        };
        for ((codes, &mode), &g) in self.codes.iter().zip(modes).zip(self.gamma) {
            if codes[i] != mode {
                c += g;
            }
        }
        c
    }
}

/// Half the mean population standard deviation of the number columns
/// (Huang's suggested range, 1/3 to 2/3 of it, at its middle); 1 when there
/// are no number columns.
pub fn huang_gamma(numbers: ArrayView2<'_, f64>) -> f64 {
    huang_gamma_weighted(numbers, Weights::NONE)
}

/// [`huang_gamma`] with the standard deviations weighted by record.
pub fn huang_gamma_weighted(numbers: ArrayView2<'_, f64>, w: Weights<'_>) -> f64 {
    let p = numbers.ncols();
    if p == 0 || numbers.nrows() == 0 {
        return 1.0;
    }
    let sds: f64 = (0..p)
        .map(|f| {
            let col: Vec<f64> = numbers.column(f).to_vec();
            match w.as_slice() {
                Some(ws) => super::stats::sd_population_weighted(&col, ws),
                None => super::stats::sd_population(&col),
            }
            .unwrap_or(0.0)
        })
        .sum();
    0.5 * sds / p as f64
}

#[derive(Debug, Clone, PartialEq)]
pub struct KPrototypesSettings {
    pub k: usize,
    pub restarts: usize,
    pub max_rounds: usize,
    /// Stop when a round lowers the total cost by no more than this share
    /// of it (0: only when no record moves).
    pub tolerance: f64,
    pub seed: u64,
}

/// The best restart, canonically numbered.
#[derive(Debug, Clone, PartialEq)]
pub struct KPrototypesFit {
    pub labels: Vec<u32>,
    /// k by p: each segment's means.
    pub centres: Array2<f64>,
    /// Per segment, each category's mode.
    pub modes: Vec<Vec<u32>>,
    /// Total cost of the records against their prototypes.
    pub cost: f64,
    pub rounds: usize,
    pub converged: bool,
    pub restarts: usize,
    /// Restarts that reached the best restart's partition.
    pub restarts_at_best: usize,
}

/// A prototype: means and modes.
#[derive(Debug, Clone, PartialEq)]
pub struct Prototype {
    pub means: Vec<f64>,
    pub modes: Vec<u32>,
}

/// Fits k-prototypes: `restarts` seeded restarts, the best kept.
pub fn kprototypes(
    x: MixedRecords<'_>,
    s: &KPrototypesSettings,
) -> Result<KPrototypesFit, EngineError> {
    let n = x.n();
    if s.k == 0 {
        return Err(EngineError::BadK { k: s.k });
    }
    if s.k > n {
        return Err(EngineError::TooFewRecords { k: s.k, n });
    }
    if x.numbers.ncols() == 0 && x.codes.is_empty() {
        return Err(EngineError::NoFeatures);
    }
    let restarts = s.restarts.max(1);
    let runs: Vec<Result<Run, EngineError>> = (0..restarts)
        .into_par_iter()
        .map(|r| {
            if stop::requested() {
                return Err(EngineError::Stopped);
            }
            let stream = KPROTOTYPES_STREAM | ((s.k as u64) << 32) | r as u64;
            let start = seed(x, s.k, &mut Stream::new(s.seed, stream))?;
            Ok(lloyd(x, start, s.max_rounds, s.tolerance))
        })
        .collect();
    let runs = runs.into_iter().collect::<Result<Vec<_>, _>>()?;
    let mut best = 0;
    for (r, run) in runs.iter().enumerate() {
        if run.cost < runs[best].cost {
            best = r;
        }
    }
    let canon: Vec<Vec<u32>> = runs.iter().map(|r| canonical(&r.labels, s.k).0).collect();
    let at_best = canon.iter().filter(|c| **c == canon[best]).count();
    let mut fit = finish(&runs[best], s.k, x.numbers.ncols())?;
    fit.restarts = restarts;
    fit.restarts_at_best = at_best;
    Ok(fit)
}

/// One run from the given prototypes, numbered canonically: the same
/// rounds as a restart (for tests and for last run's prototypes).
pub fn kprototypes_from(
    x: MixedRecords<'_>,
    start: Vec<Prototype>,
    max_rounds: usize,
    tolerance: f64,
) -> Result<KPrototypesFit, EngineError> {
    let k = start.len();
    finish(
        &lloyd(x, start, max_rounds, tolerance),
        k,
        x.numbers.ncols(),
    )
}

fn finish(run: &Run, k: usize, p: usize) -> Result<KPrototypesFit, EngineError> {
    let mut sizes = vec![0usize; k];
    run.labels.iter().for_each(|&l| sizes[l as usize] += 1);
    if sizes.contains(&0) {
        return Err(EngineError::TooFewDistinct { k });
    }
    let (labels, order) = canonical(&run.labels, k);
    let centres = Array2::from_shape_fn((k, p), |(s, f)| run.protos[order[s]].means[f]);
    Ok(KPrototypesFit {
        labels,
        centres,
        modes: order.iter().map(|&o| run.protos[o].modes.clone()).collect(),
        cost: run.cost,
        rounds: run.rounds,
        converged: run.converged,
        restarts: 1,
        restarts_at_best: 1,
    })
}

/// The prototype a single record makes.
fn of_record(x: MixedRecords<'_>, i: usize) -> Prototype {
    Prototype {
        means: x.numbers.row(i).to_vec(),
        modes: x.codes.iter().map(|c| c[i]).collect(),
    }
}

/// k-means++-style seeding with the cost as the weight.
fn seed(x: MixedRecords<'_>, k: usize, rng: &mut Stream) -> Result<Vec<Prototype>, EngineError> {
    let chosen = spread_records((x.n(), x.weights), k, rng, |i, j| x.between(i, j))
        .ok_or(EngineError::TooFewDistinct { k })?;
    Ok(chosen.into_iter().map(|j| of_record(x, j)).collect())
}

struct Run {
    labels: Vec<u32>,
    protos: Vec<Prototype>,
    cost: f64,
    rounds: usize,
    converged: bool,
}

/// Each record's cheapest prototype (ties to the lowest) and its cost.
fn assign(x: MixedRecords<'_>, protos: &[Prototype]) -> (Vec<u32>, Vec<f64>) {
    (0..x.n())
        .into_par_iter()
        .map(|i| {
            let mut best = (f64::INFINITY, 0u32);
            for (s, q) in protos.iter().enumerate() {
                let c = x.cost(i, &q.means, &q.modes);
                if c < best.0 {
                    best = (c, s as u32);
                }
            }
            (best.1, best.0)
        })
        .unzip()
}

/// Assign and update until no record moves, a round lowers the total cost
/// by no more than `tolerance` of it, or `max_rounds` updates.
fn lloyd(
    x: MixedRecords<'_>,
    mut protos: Vec<Prototype>,
    max_rounds: usize,
    tolerance: f64,
) -> Run {
    let (mut labels, mut costs) = assign(x, &protos);
    let weighed = |costs: &[f64]| -> f64 {
        (costs.iter().enumerate())
            .map(|(i, c)| x.weights.at(i) * c)
            .sum()
    };
    let mut total = weighed(&costs);
    let mut rounds = 0;
    let mut converged = false;
    while rounds < max_rounds {
        rounds += 1;
        protos = update(x, &labels, &costs, protos);
        let (next, next_costs) = assign(x, &protos);
        let moved = next != labels;
        labels = next;
        costs = next_costs;
        let before = total;
        total = weighed(&costs);
        if !moved || before - total <= tolerance * before {
            converged = true;
            break;
        }
    }
    Run {
        cost: total,
        labels,
        protos,
        rounds,
        converged,
    }
}

/// New prototypes from the labels: chunked means, modes, and empty
/// segments refilled.
fn update(
    x: MixedRecords<'_>,
    labels: &[u32],
    costs: &[f64],
    mut protos: Vec<Prototype>,
) -> Vec<Prototype> {
    let k = protos.len();
    let p = x.numbers.ncols();
    let mut sizes = vec![0usize; k];
    labels.iter().for_each(|&l| sizes[l as usize] += 1);
    let weighed = x.weights.per_segment(labels, k);
    let sums = chunked_sums(x, labels, k);
    for (s, q) in protos.iter_mut().enumerate() {
        if sizes[s] > 0 {
            for f in 0..p {
                q.means[f] = sums[s * p + f] / weighed[s];
            }
        }
    }
    for (c, codes) in x.codes.iter().enumerate() {
        let levels = x.levels[c];
        let mut counts = vec![0.0f64; k * levels];
        for (i, (&l, &code)) in labels.iter().zip(codes).enumerate() {
            counts[l as usize * levels + code as usize] += x.weights.at(i);
        }
        for (s, q) in protos.iter_mut().enumerate() {
            if sizes[s] == 0 {
                continue;
            }
            q.modes[c] = mode(&counts[s * levels..(s + 1) * levels]) as u32;
        }
    }
    refill_empty(x, labels, costs, &sizes, &mut protos);
    protos
}

/// The most common level given each level's count (summed weight, with
/// record weights), ties to the first level. O(levels).
pub fn mode(counts: &[f64]) -> usize {
    let mut mode = 0;
    for (level, &count) in counts.iter().enumerate() {
        if count > counts[mode] {
            mode = level;
        }
    }
    mode
}

/// Per segment and number column, the weighted sum of its records' values:
/// record order within fixed chunks, chunks added in order.
fn chunked_sums(x: MixedRecords<'_>, labels: &[u32], k: usize) -> Vec<f64> {
    let numbers = x.numbers;
    let p = numbers.ncols();
    let n = numbers.nrows();
    let chunks: Vec<Vec<f64>> = (0..n.div_ceil(MEANS_CHUNK))
        .into_par_iter()
        .map(|c| {
            let mut s = vec![0.0; k * p];
            for i in c * MEANS_CHUNK..((c + 1) * MEANS_CHUNK).min(n) {
                let l = labels[i] as usize;
                let w = x.weights.at(i);
                for f in 0..p {
                    s[l * p + f] += w * numbers[[i, f]];
                }
            }
            s
        })
        .collect();
    let mut total = vec![0.0; k * p];
    for c in chunks {
        for (t, v) in total.iter_mut().zip(c) {
            *t += v;
        }
    }
    total
}

/// Moves each empty segment's prototype onto the record costing most
/// against its own prototype among segments of more than one record.
fn refill_empty(
    x: MixedRecords<'_>,
    labels: &[u32],
    costs: &[f64],
    sizes: &[usize],
    protos: &mut [Prototype],
) {
    let mut taken = vec![false; labels.len()];
    for s in 0..protos.len() {
        if sizes[s] > 0 {
            continue;
        }
        let mut far: Option<usize> = None;
        for (i, &l) in labels.iter().enumerate() {
            if taken[i] || sizes[l as usize] < 2 {
                continue;
            }
            if far.is_none_or(|f| costs[i] > costs[f]) {
                far = Some(i);
            }
        }
        if let Some(i) = far {
            taken[i] = true;
            protos[s] = of_record(x, i);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::kmeans::{kmeans, KMeansSettings, Seeding};

    fn blobs(n: usize, seed: u64) -> Array2<f64> {
        let mut r = Stream::new(seed, 0);
        Array2::from_shape_fn((n, 3), |(i, f)| {
            (i % 4) as f64 * 3.0 * ((f + 1) as f64) + 2.0 * r.unit()
        })
    }

    #[test]
    fn on_numbers_alone_it_is_kmeans_from_the_same_starts() {
        let x = blobs(500, 4);
        let none: [Vec<u32>; 0] = [];
        let data = MixedRecords {
            numbers: x.view(),
            codes: &none,
            levels: &[],
            gamma: &[],
            weights: Weights::NONE,
        };
        for starts in [[0usize, 1, 2, 3], [10, 11, 30, 31], [5, 9, 13, 400]] {
            let start: Vec<Prototype> = starts.iter().map(|&i| of_record(data, i)).collect();
            let ours = kprototypes_from(data, start, 100, 0.0).expect("four segments");
            let settings = KMeansSettings {
                k: 4,
                // Only the given start runs.
                restarts: 0,
                max_rounds: 100,
                tolerance: 0.0,
                seeding: Seeding::KMeansPlusPlus,
                seed: 1,
                sample: None,
                start: Some(starts.iter().flat_map(|&i| x.row(i).to_vec()).collect()),
            };
            let theirs = kmeans(x.view(), &settings).expect("four segments");
            assert!(theirs.from_start);
            assert_eq!(ours.labels, theirs.labels, "starts {starts:?}");
            assert_eq!(ours.centres, theirs.centroids, "starts {starts:?}");
            assert!((ours.cost - theirs.inertia).abs() <= 1e-9 * theirs.inertia);
        }
    }

    #[test]
    fn a_mismatched_level_costs_gamma() {
        let x = ndarray::array![[0.0], [1.0]];
        let codes = vec![vec![0u32, 1]];
        let data = MixedRecords {
            numbers: x.view(),
            codes: &codes,
            levels: &[2],
            gamma: &[0.7],
            weights: Weights::NONE,
        };
        assert_eq!(data.cost(1, &[0.0], &[0]), 1.0 + 0.7);
        assert_eq!(data.cost(0, &[0.0], &[0]), 0.0);
    }

    #[test]
    fn huangs_gamma_is_half_the_mean_standard_deviation() {
        let x = ndarray::array![[0.0, 0.0], [2.0, 4.0]];
        // Standard deviations 1 and 2.
        assert_eq!(huang_gamma(x.view()), 0.75);
    }

    #[test]
    fn the_same_seed_gives_the_same_fit_on_one_two_and_eight_threads() {
        let x = blobs(20_000, 2);
        let codes = vec![(0..20_000u32).map(|i| (i * 7 + i / 3) % 5).collect()];
        let data = MixedRecords {
            numbers: x.view(),
            codes: &codes,
            levels: &[5],
            gamma: &[0.8],
            weights: Weights::NONE,
        };
        let s = KPrototypesSettings {
            k: 4,
            restarts: 4,
            max_rounds: 50,
            tolerance: 1e-6,
            seed: 3,
        };
        let on = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("a thread pool")
                .install(|| kprototypes(data, &s).expect("four segments"))
        };
        let one = on(1);
        assert_eq!(one, on(2));
        assert_eq!(one, on(8));
    }
}
