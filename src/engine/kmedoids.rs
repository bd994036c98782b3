//! k-medoids: k records (medoids) that minimise the total dissimilarity of
//! every record to its nearest medoid, over any dissimilarity matrix.
//!
//! # Reference
//! E. Schubert and P. J. Rousseeuw, "Fast and eager k-medoids clustering:
//! O(k) runtime improvement of the PAM, CLARA, and CLARANS algorithms",
//! Information Systems 101, 101804, 2021: FasterPAM. Each non-medoid
//! candidate is tried in turn; the change of the total deviation for
//! swapping it with each of the k medoids is found in one O(n + k) pass
//! from the nearest and second-nearest medoid of every record and each
//! medoid's removal loss; the best improving swap is made at once (eager).
//! The loop stops when a whole cycle over the records finds no improving
//! swap (a local optimum of PAM's swap neighbourhood) or at the pass cap.
//!
//! # Starts
//! Each restart seeds its medoids as k-means++ does, with the dissimilarity
//! itself (not its square) as the weight, the common practice for
//! k-medoids: the first medoid uniformly, each next one with probability
//! proportional to the dissimilarity to the nearest chosen one. The best
//! restart (lowest total deviation; ties to the lower restart) is kept.
//!
//! # Ties and determinism
//! A swap is made only if it lowers the total deviation by more than a
//! relative 1e-12 (so rounding cannot make two swaps undo each other
//! forever); among the medoids a candidate could replace, the lowest
//! change wins, ties to the earlier medoid slot. In the result the medoids
//! are sorted by record; a record equally far from two medoids joins the
//! one that comes first in the file. Segments are then numbered as
//! k-means numbers them ([`super::kmeans::canonical`]). The swaps of one
//! restart run in a fixed order on one thread and restarts run in
//! parallel into their own slots, so the thread count changes no bit.
//!
//! # Cost
//! O(n² p) for the matrix (the caller's), n(n - 1)/2 values of memory;
//! each pass over the candidates O(n (n + k)); typically a few passes.

use super::kmeans::canonical;
use super::matrix::Condensed;
use super::rng::{spread_records, Stream};
use super::weights::Weights;
use super::EngineError;
use rayon::prelude::*;

/// Stream base for k-medoids starts: `KMEDOIDS_STREAM | (k << 32) | r`.
pub const KMEDOIDS_STREAM: u64 = 1 << 61;

/// A swap must lower the total deviation by more than this share of it.
const SWAP_GAIN: f64 = 1e-12;

#[derive(Debug, Clone, PartialEq)]
pub struct KMedoidsSettings {
    pub k: usize,
    pub restarts: usize,
    /// The most passes over the candidates per restart.
    pub max_passes: usize,
    pub seed: u64,
}

/// The best restart's segmentation.
#[derive(Debug, Clone, PartialEq)]
pub struct KMedoidsFit {
    /// Each record's segment, numbered canonically.
    pub labels: Vec<u32>,
    /// Each segment's medoid, a record index, in segment order.
    pub medoids: Vec<usize>,
    /// The total dissimilarity of the records to their medoids.
    pub cost: f64,
    /// The total deviation after the seeding and after each swap of the
    /// best restart: never rising.
    pub trace: Vec<f64>,
    pub restarts: usize,
    /// Restarts that ended at the best restart's medoids.
    pub restarts_at_best: usize,
    /// Whether the best restart stopped at a local optimum rather than at
    /// the pass cap.
    pub converged: bool,
}

/// Fits k-medoids to the records of `m`.
pub fn kmedoids(m: &Condensed, s: &KMedoidsSettings) -> Result<KMedoidsFit, EngineError> {
    kmedoids_weighted(m, Weights::NONE, s)
}

/// [`kmedoids`] with record weights: the total deviation is
/// `Σ w_o d(o, medoid)` (so every removal loss and swap change weighs each
/// record by its weight) and the starts draw by weight times dissimilarity;
/// whole-number weights give the cost of the repeated records.
pub fn kmedoids_weighted(
    m: &Condensed,
    w: Weights<'_>,
    s: &KMedoidsSettings,
) -> Result<KMedoidsFit, EngineError> {
    let n = m.n();
    // Ones without weights: every product is then the distance itself.
    let weight: Vec<f64> = (0..n).map(|i| w.at(i)).collect();
    if s.k == 0 {
        return Err(EngineError::BadK { k: s.k });
    }
    if s.k > n {
        return Err(EngineError::TooFewRecords { k: s.k, n });
    }
    let runs: Vec<Result<Run, EngineError>> = (0..s.restarts.max(1))
        .into_par_iter()
        .map(|r| {
            let stream = KMEDOIDS_STREAM | ((s.k as u64) << 32) | r as u64;
            let medoids = spread_records((n, w), s.k, &mut Stream::new(s.seed, stream), |i, j| {
                m.get(i, j)
            })
            .ok_or(EngineError::TooFewDistinct { k: s.k })?;
            Ok(swap(m, &weight, medoids, s.max_passes))
        })
        .collect();
    let mut runs = runs.into_iter().collect::<Result<Vec<_>, _>>()?;
    let mut best = 0;
    for (r, run) in runs.iter().enumerate() {
        if run.cost < runs[best].cost {
            best = r;
        }
    }
    let at_best = runs
        .iter()
        .filter(|r| r.medoids == runs[best].medoids)
        .count();
    let run = runs.swap_remove(best);
    let (labels, order) = canonical(&assign(m, &run.medoids), s.k);
    Ok(KMedoidsFit {
        labels,
        medoids: order.iter().map(|&o| run.medoids[o]).collect(),
        cost: run.cost,
        trace: run.trace,
        restarts: s.restarts.max(1),
        restarts_at_best: at_best,
        converged: run.converged,
    })
}

/// Each segment's medoid: the member with the least total dissimilarity to
/// the segment's other members, ties to the first in the file. O(Σ n_s²).
pub fn medoids_of(m: &Condensed, labels: &[u32], k: usize) -> Vec<usize> {
    medoids_of_weighted(m, Weights::NONE, labels, k)
}

/// [`medoids_of`] with record weights: the least `Σ w_j d(i, j)`.
pub fn medoids_of_weighted(m: &Condensed, w: Weights<'_>, labels: &[u32], k: usize) -> Vec<usize> {
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); k];
    for (i, &l) in labels.iter().enumerate() {
        members[l as usize].push(i);
    }
    members
        .par_iter()
        .map(|own| {
            let mut best = (f64::INFINITY, usize::MAX);
            for &i in own {
                let total: f64 = own.iter().map(|&j| w.at(j) * m.get(i, j)).sum();
                if total < best.0 {
                    best = (total, i);
                }
            }
            best.1
        })
        .collect()
}

/// Each record's nearest medoid (an index into `medoids`), ties to the
/// first in `medoids`. O(n k).
pub fn assign(m: &Condensed, medoids: &[usize]) -> Vec<u32> {
    (0..m.n())
        .into_par_iter()
        .map(|o| {
            let mut best = (f64::INFINITY, 0u32);
            for (slot, &med) in medoids.iter().enumerate() {
                let d = m.get(o, med);
                if d < best.0 {
                    best = (d, slot as u32);
                }
            }
            best.1
        })
        .collect()
}

/// One restart's end.
struct Run {
    /// Sorted by record.
    medoids: Vec<usize>,
    cost: f64,
    trace: Vec<f64>,
    converged: bool,
}

/// A record's nearest and second-nearest medoid: (distance, slot).
#[derive(Clone, Copy)]
struct Near {
    near: (f64, usize),
    second: (f64, usize),
}

/// Whether (distance, slot) `a` comes before `b`: nearer, then the lower
/// slot.
fn before(a: (f64, usize), b: (f64, usize)) -> bool {
    a.0 < b.0 || (a.0 == b.0 && a.1 < b.1)
}

/// The nearest and second-nearest medoid of record `o`. O(k).
fn nearest_two(m: &Condensed, medoids: &[usize], o: usize) -> Near {
    let none = (f64::INFINITY, usize::MAX);
    let mut n = Near {
        near: none,
        second: none,
    };
    for (slot, &med) in medoids.iter().enumerate() {
        n.offer((m.get(o, med), slot));
    }
    n
}

impl Near {
    /// Takes medoid `c` (distance, slot) as nearest or second if it is.
    fn offer(&mut self, c: (f64, usize)) {
        if before(c, self.near) {
            self.second = self.near;
            self.near = c;
        } else if before(c, self.second) {
            self.second = c;
        }
    }
}

/// Each medoid's removal loss: what the total deviation would rise by if
/// its records went to their second-nearest medoid.
fn removal_loss(nears: &[Near], weight: &[f64], k: usize) -> Vec<f64> {
    let mut loss = vec![0.0; k];
    for (n, w) in nears.iter().zip(weight) {
        loss[n.near.1] += w * (n.second.0 - n.near.0);
    }
    loss
}

/// The total deviation: each record's weight times its distance to its
/// nearest medoid.
fn deviation(nears: &[Near], weight: &[f64]) -> f64 {
    nears.iter().zip(weight).map(|(x, w)| w * x.near.0).sum()
}

/// FasterPAM's eager swaps from the given medoids.
fn swap(m: &Condensed, weight: &[f64], mut medoids: Vec<usize>, max_passes: usize) -> Run {
    let n = m.n();
    let k = medoids.len();
    let mut nears: Vec<Near> = (0..n).map(|o| nearest_two(m, &medoids, o)).collect();
    let mut cost = deviation(&nears, weight);
    let mut trace = vec![cost];
    let mut is_medoid = vec![false; n];
    medoids.iter().for_each(|&med| is_medoid[med] = true);
    let mut loss = removal_loss(&nears, weight, k);
    let mut since_swap = 0usize;
    let mut converged = k == n;
    let mut delta = vec![0.0; k];
    'passes: for _ in 0..max_passes {
        for xc in 0..n {
            if since_swap >= n {
                converged = true;
                break 'passes;
            }
            since_swap += 1;
            if is_medoid[xc] {
                continue;
            }
            delta.copy_from_slice(&loss);
            let mut gain = 0.0;
            for (o, (x, w)) in nears.iter().zip(weight).enumerate() {
                let d = m.get(o, xc);
                if d < x.near.0 {
                    gain += w * (d - x.near.0);
                    delta[x.near.1] += w * (x.near.0 - x.second.0);
                } else if d < x.second.0 {
                    delta[x.near.1] += w * (d - x.second.0);
                }
            }
            let mut slot = 0;
            for (i, &v) in delta.iter().enumerate() {
                if v < delta[slot] {
                    slot = i;
                }
            }
            if delta[slot] + gain < -SWAP_GAIN * cost.abs().max(f64::MIN_POSITIVE) {
                is_medoid[medoids[slot]] = false;
                is_medoid[xc] = true;
                medoids[slot] = xc;
                update(m, &medoids, slot, &mut nears);
                cost = deviation(&nears, weight);
                trace.push(cost);
                loss = removal_loss(&nears, weight, k);
                since_swap = 0;
            }
        }
    }
    medoids.sort_unstable();
    Run {
        medoids,
        cost,
        trace,
        converged,
    }
}

/// Updates every record's nearest two after medoid `slot` changed. O(n k)
/// at worst, O(n) when the changed slot was neither of a record's two.
fn update(m: &Condensed, medoids: &[usize], slot: usize, nears: &mut [Near]) {
    let xc = medoids[slot];
    for (o, x) in nears.iter_mut().enumerate() {
        if x.near.1 == slot || x.second.1 == slot {
            *x = nearest_two(m, medoids, o);
            continue;
        }
        x.offer((m.get(o, xc), slot));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn points(n: usize, seed: u64) -> Vec<[f64; 2]> {
        let mut r = Stream::new(seed, 0);
        (0..n)
            .map(|i| {
                let c = (i % 3) as f64 * 4.0;
                [c + 3.0 * r.unit(), c * 0.5 + 3.0 * r.unit()]
            })
            .collect()
    }

    fn matrix(p: &[[f64; 2]]) -> Condensed {
        Condensed::from_fn(p.len(), |i, j| {
            ((p[i][0] - p[j][0]).powi(2) + (p[i][1] - p[j][1]).powi(2)).sqrt()
        })
    }

    fn cost(m: &Condensed, medoids: &[usize]) -> f64 {
        (0..m.n())
            .map(|o| {
                medoids
                    .iter()
                    .map(|&c| m.get(o, c))
                    .fold(f64::INFINITY, f64::min)
            })
            .sum()
    }

    /// The lowest total deviation over every set of k medoids.
    fn exhaustive(m: &Condensed, k: usize) -> f64 {
        fn go(m: &Condensed, k: usize, from: usize, set: &mut Vec<usize>, best: &mut f64) {
            if set.len() == k {
                *best = best.min(cost(m, set));
                return;
            }
            for i in from..m.n() {
                set.push(i);
                go(m, k, i + 1, set, best);
                set.pop();
            }
        }
        let mut best = f64::INFINITY;
        go(m, k, 0, &mut Vec::new(), &mut best);
        best
    }

    fn settings(k: usize) -> KMedoidsSettings {
        KMedoidsSettings {
            k,
            restarts: 10,
            max_passes: 100,
            seed: 7,
        }
    }

    #[test]
    fn on_small_inputs_the_result_is_the_best_of_every_medoid_set() {
        for seed in 0..12 {
            let m = matrix(&points(11, seed));
            for k in 2..=4 {
                let fit = kmedoids(&m, &settings(k)).expect("k below n");
                let best = exhaustive(&m, k);
                assert!(
                    (fit.cost - best).abs() <= 1e-12 * best,
                    "seed {seed} k {k}: {} against the exhaustive {best}",
                    fit.cost
                );
                assert_eq!(fit.cost, cost(&m, &fit.medoids));
            }
        }
    }

    #[test]
    fn a_random_dissimilarity_also_reaches_the_exhaustive_optimum() {
        // Not a metric: FasterPAM needs none.
        let mut r = Stream::new(3, 1);
        let m = Condensed::from_fn(10, |_, _| 0.0);
        let values: Vec<f64> = (0..Condensed::pairs(10)).map(|_| r.unit()).collect();
        let mut m = m;
        let mut at = 0;
        for i in 0..10 {
            for j in i + 1..10 {
                m.set(i, j, values[at]);
                at += 1;
            }
        }
        for k in 2..=3 {
            let fit = kmedoids(&m, &settings(k)).expect("k below n");
            assert!((fit.cost - exhaustive(&m, k)).abs() < 1e-12);
        }
    }

    #[test]
    fn the_total_deviation_never_rises_during_swaps() {
        let m = matrix(&points(300, 5));
        let fit = kmedoids(
            &m,
            &KMedoidsSettings {
                restarts: 1,
                ..settings(6)
            },
        )
        .expect("k below n");
        assert!(fit.trace.len() > 1, "no swap was made");
        assert!(fit.trace.windows(2).all(|w| w[1] < w[0]), "{:?}", fit.trace);
        assert!(fit.converged);
        assert_eq!(*fit.trace.last().unwrap(), fit.cost);
    }

    #[test]
    fn a_record_as_near_two_medoids_joins_the_first_in_the_file() {
        // Records at 0, 1 and 2 on a line, 3 beside 2; record 1 is as near
        // 0 as 2. The fit lists its medoids in file order, so the tie goes
        // to the medoid that comes first in the file; `assign` itself
        // gives ties to the medoid listed first.
        let p = [[0.0, 0.0], [1.0, 0.0], [2.0, 0.0], [2.1, 0.0]];
        assert_eq!(assign(&matrix(&p), &[0, 2]), vec![0, 0, 1, 1]);
        assert_eq!(assign(&matrix(&p), &[2, 0]), vec![1, 0, 0, 0]);
        let fit = kmedoids(&matrix(&p), &settings(2)).expect("k below n");
        assert_eq!(fit.labels[1], fit.labels[0]);
    }

    #[test]
    fn the_same_seed_gives_the_same_medoids_on_one_two_and_eight_threads() {
        let m = matrix(&points(400, 9));
        let on = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .expect("a thread pool")
                .install(|| kmedoids(&m, &settings(5)).expect("k below n"))
        };
        let one = on(1);
        assert_eq!(one, on(2));
        assert_eq!(one, on(8));
        assert_eq!(one.cost.to_bits(), on(8).cost.to_bits());
    }

    #[test]
    fn impossible_k_and_too_few_distinct_records_are_errors() {
        let m = matrix(&[[1.0, 1.0], [1.0, 1.0], [1.0, 1.0]]);
        assert_eq!(
            kmedoids(&m, &settings(4)),
            Err(EngineError::TooFewRecords { k: 4, n: 3 })
        );
        assert_eq!(
            kmedoids(&m, &settings(2)),
            Err(EngineError::TooFewDistinct { k: 2 })
        );
    }
}
