//! Evidence for k beyond a single criterion: the knee of the within-cluster
//! sum of squares, the gap statistic, and bootstrap stability.
//!
//! The functions here take the clustering itself as a function (`Recluster`)
//! so the same evidence serves k-means and trees: given a matrix, the k
//! values and a seed, it returns a labelling for each k.

use super::weights::Weights;
use super::{compare::adjusted_rand_index, criteria, rng::Stream};
use nalgebra::{DMatrix, SymmetricEigen};
use ndarray::{Array2, ArrayView2};

/// Clusters `data` (its records weighing as the weights say) at each of
/// `ks`, with its own random draws keyed by `seed`; returns one labelling
/// (0-based) per k, in the order of `ks`.
pub type Recluster<'a> =
    dyn Fn(ArrayView2<'_, f64>, Weights<'_>, &[usize], u64) -> Vec<Vec<u32>> + Sync + 'a;

/// A seed for the `i`-th use of purpose `purpose` under `seed`, by the
/// SplitMix64 finaliser (G. Steele, D. Lea, C. Flood, "Fast splittable
/// pseudorandom number generators", OOPSLA 2014), so reference sets and
/// resamples never share draws with the main fit or with each other.
pub fn derived_seed(seed: u64, purpose: u64, i: u64) -> u64 {
    let mut z =
        seed ^ purpose.wrapping_mul(0x9e37_79b9_7f4a_7c15) ^ i.wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

const GAP_PURPOSE: u64 = 0x0067_6170;
const STABILITY_PURPOSE: u64 = 0x7374_6162;

// --------------------------------------------------------------- knee --

/// The knee of a decreasing curve of within-cluster sums of squares, by
/// the offline Kneedle method (V. Satopää, J. Albrecht, D. Irwin and
/// B. Raghavan, "Finding a 'Kneedle' in a haystack: detecting knee points
/// in system behavior", ICDCS Workshops 2011): both axes are scaled to
/// [0, 1], the curve is flipped to rise, and the knee is the k where it
/// stands highest above the diagonal. Ties go to the smaller k. `None`
/// with fewer than three k, or when the curve does not fall.
pub fn knee(ks: &[usize], within: &[f64]) -> Option<usize> {
    if ks.len() < 3 || ks.len() != within.len() {
        return None;
    }
    let (k0, k1) = (ks[0] as f64, ks[ks.len() - 1] as f64);
    let hi = within.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let lo = within.iter().copied().fold(f64::INFINITY, f64::min);
    if hi <= lo || hi.is_nan() || lo.is_nan() || k1 <= k0 {
        return None;
    }
    let mut best: Option<(usize, f64)> = None;
    for (&k, &w) in ks.iter().zip(within) {
        let x = (k as f64 - k0) / (k1 - k0);
        let y = (hi - w) / (hi - lo);
        let lift = y - x;
        if best.is_none_or(|(_, b)| lift > b) {
            best = Some((k, lift));
        }
    }
    best.filter(|&(_, lift)| lift > 0.0).map(|(k, _)| k)
}

// ---------------------------------------------------------------- gap --

/// The gap statistic at one k.
#[derive(Debug, Clone, PartialEq)]
pub struct Gap {
    pub k: usize,
    /// E*[log W_k] - log W_k.
    pub gap: f64,
    /// s_k = sd(log W*_k) * sqrt(1 + 1/B).
    pub se: f64,
}

/// The gap statistic (R. Tibshirani, G. Walther and T. Hastie, "Estimating
/// the number of clusters in a data set via the gap statistic", JRSS B 63(2),
/// 2001) for k = 1 and every k of `ks`. W_k is the pooled within-cluster sum
/// of squares. The `references` reference sets are drawn uniformly over the
/// box aligned with the data's principal components (the paper's second
/// method), each clustered by `recluster` with a seed of its own. The
/// principal axes come from the covariance matrix's eigenvectors (nalgebra's
/// symmetric eigen-decomposition, d x d).
///
/// With record weights, the data are clustered and W_k summed with them,
/// the box's centre and axes are those of the weighted data, and each
/// reference set's n records weigh alike, W / n each for the data's summed
/// weight W (a record standing for W / n members): its W_k is the
/// unweighted one times W / n, so the reference sets hold as many members
/// as the data.
///
/// Cost: `references` times the cost of clustering at every k.
pub fn gap_statistic(
    (data, w): (ArrayView2<'_, f64>, Weights<'_>),
    ks: &[usize],
    references: usize,
    seed: u64,
    recluster: &Recluster<'_>,
) -> Vec<Gap> {
    let mut all_ks = vec![1];
    all_ks.extend(ks.iter().copied().filter(|&k| k > 1));
    let observed: Vec<f64> = {
        let labels = recluster(data, w, &all_ks, seed);
        all_ks
            .iter()
            .zip(&labels)
            .map(|(&k, l)| log_within(data, w, l, k))
            .collect()
    };
    // ln(W / n): zero without weights.
    let per_reference = if w.is_weighted() {
        (w.total(data.nrows()) / data.nrows().max(1) as f64).ln()
    } else {
        0.0
    };
    let frame = PcBox::new(data, w);
    let mut reference_logs: Vec<Vec<f64>> = vec![Vec::with_capacity(references); all_ks.len()];
    for b in 0..references {
        let ref_seed = derived_seed(seed, GAP_PURPOSE, b as u64);
        let z = frame.draw(data.nrows(), ref_seed);
        let labels = recluster(z.view(), Weights::NONE, &all_ks, ref_seed);
        for (i, (&k, l)) in all_ks.iter().zip(&labels).enumerate() {
            reference_logs[i].push(log_within(z.view(), Weights::NONE, l, k) + per_reference);
        }
    }
    let b = references.max(1) as f64;
    all_ks
        .iter()
        .enumerate()
        .map(|(i, &k)| {
            let logs = &reference_logs[i];
            let mean = logs.iter().sum::<f64>() / b;
            let var = logs.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / b;
            Gap {
                k,
                gap: mean - observed[i],
                se: var.sqrt() * (1.0 + 1.0 / b).sqrt(),
            }
        })
        .collect()
}

/// The one-standard-error rule: the smallest k with
/// Gap(k) >= Gap(k') - s_k', k' the next k in the list. May be 1: no
/// cluster structure. `None` for an empty list; the largest k when no k
/// passes.
pub fn gap_choice(gaps: &[Gap]) -> Option<usize> {
    for w in gaps.windows(2) {
        if w[0].gap >= w[1].gap - w[1].se {
            return Some(w[0].k);
        }
    }
    gaps.last().map(|g| g.k)
}

fn log_within(data: ArrayView2<'_, f64>, w: Weights<'_>, labels: &[u32], k: usize) -> f64 {
    // A zero sum (every record on its centre) has no logarithm; a floor far
    // below any real spread keeps the statistic finite.
    criteria::within_ss_weighted(data, w, labels, k)
        .max(1e-300)
        .ln()
}

/// The box spanned by the data along its principal axes.
struct PcBox {
    mean: Vec<f64>,
    /// d x d, columns are the principal axes.
    axes: DMatrix<f64>,
    lo: Vec<f64>,
    hi: Vec<f64>,
}

impl PcBox {
    fn new(data: ArrayView2<'_, f64>, w: Weights<'_>) -> PcBox {
        let (n, d) = data.dim();
        let total = if n == 0 { 1.0 } else { w.total(n) };
        let mean: Vec<f64> = (0..d)
            .map(|f| {
                (data.column(f).iter().enumerate())
                    .map(|(i, v)| w.at(i) * v)
                    .sum::<f64>()
                    / total
            })
            .collect();
        let centred = DMatrix::from_fn(n, d, |i, f| data[[i, f]] - mean[f]);
        // The weighted scatter: each row scaled by the root of its weight.
        let cov = match w.as_slice() {
            Some(ws) => {
                let scaled = DMatrix::from_fn(n, d, |i, f| ws[i].sqrt() * centred[(i, f)]);
                scaled.transpose() * &scaled
            }
            None => centred.transpose() * &centred,
        };
        let axes = SymmetricEigen::new(cov).eigenvectors;
        let rotated = &centred * &axes;
        let lo = (0..d).map(|f| rotated.column(f).min()).collect();
        let hi = (0..d).map(|f| rotated.column(f).max()).collect();
        PcBox { mean, axes, lo, hi }
    }

    /// `n` records drawn uniformly in the box, in the data's coordinates.
    fn draw(&self, n: usize, seed: u64) -> Array2<f64> {
        let d = self.mean.len();
        let mut s = Stream::new(seed, 0);
        let z = DMatrix::from_fn(n, d, |_, f| {
            self.lo[f] + (self.hi[f] - self.lo[f]) * s.unit()
        });
        let back = z * self.axes.transpose();
        Array2::from_shape_fn((n, d), |(i, f)| back[(i, f)] + self.mean[f])
    }
}

// ---------------------------------------------------------- stability --

/// Bootstrap stability of a segmentation at each k.
#[derive(Debug, Clone, PartialEq)]
pub struct Stability {
    pub k: usize,
    /// Mean adjusted Rand index between the full-data segments and the
    /// resampled segmentation, on the records each resample drew.
    pub mean_ari: f64,
    /// For each full-data segment, the mean over resamples of its best
    /// Jaccard similarity with a resampled segment.
    pub jaccard: Vec<f64>,
}

/// Segments whose mean Jaccard recovery falls below this are flagged as
/// unstable. C. Hennig ("Cluster-wise assessment of cluster stability",
/// Computational Statistics & Data Analysis 52, 2007) reads values at or
/// below 0.5 as a dissolved cluster and 0.6 to 0.75 as a pattern without
/// much trust; 0.6 marks the line below which a segment should not be
/// presented as real.
pub const UNSTABLE_BELOW: f64 = 0.6;

/// Bootstrap stability (Hennig 2007): `resamples` times, draw n records
/// with replacement, recluster the distinct records drawn (as `recluster`
/// does, seeded per resample), and compare with the full-data segments
/// `labels[i]` (one labelling per k of `ks`) on those records: the adjusted
/// Rand index (Hubert and Arabie 1985), and for each full-data segment C
/// the best Jaccard |C ∩ D| / |C ∪ D| over resampled segments D.
///
/// With record weights each draw takes a record with probability
/// proportional to its weight (a member drawn at random, by its record),
/// and the records drawn are reclustered without weights: the resample
/// stands for the members, not for the records. O(n log n) per resample
/// for the draws.
pub fn bootstrap_stability(
    (data, w): (ArrayView2<'_, f64>, Weights<'_>),
    ks: &[usize],
    labels: &[Vec<u32>],
    resamples: usize,
    seed: u64,
    recluster: &Recluster<'_>,
) -> Vec<Stability> {
    let (n, d) = data.dim();
    // The running weights, for draws by weight in O(log n) each.
    let running: Option<Vec<f64>> = w.as_slice().map(|ws| {
        ws.iter()
            .scan(0.0, |acc, v| {
                *acc += v;
                Some(*acc)
            })
            .collect()
    });
    let mut ari_sums = vec![0.0; ks.len()];
    let mut jaccard_sums: Vec<Vec<f64>> = ks.iter().map(|&k| vec![0.0; k]).collect();
    for b in 0..resamples {
        let res_seed = derived_seed(seed, STABILITY_PURPOSE, b as u64);
        let mut s = Stream::new(res_seed, 0);
        let mut drawn = vec![false; n];
        match &running {
            None => (0..n).for_each(|_| drawn[s.below(n)] = true),
            Some(run) => (0..n).for_each(|_| drawn[by_running_weight(run, s.unit())] = true),
        }
        let picked: Vec<usize> = (0..n).filter(|&i| drawn[i]).collect();
        let sub = Array2::from_shape_fn((picked.len(), d), |(r, f)| data[[picked[r], f]]);
        let usable: Vec<usize> = ks.iter().copied().filter(|&k| k <= picked.len()).collect();
        let fresh = recluster(sub.view(), Weights::NONE, &usable, res_seed);
        for (i, &k) in ks.iter().enumerate() {
            let Some(u) = usable.iter().position(|&x| x == k) else {
                continue;
            };
            let original: Vec<u32> = picked.iter().map(|&p| labels[i][p]).collect();
            ari_sums[i] += adjusted_rand_index(&original, &fresh[u]);
            for (c, js) in jaccard_sums[i].iter_mut().enumerate() {
                *js += best_jaccard(&original, &fresh[u], c as u32);
            }
        }
    }
    let b = resamples.max(1) as f64;
    ks.iter()
        .enumerate()
        .map(|(i, &k)| Stability {
            k,
            mean_ari: ari_sums[i] / b,
            jaccard: jaccard_sums[i].iter().map(|j| j / b).collect(),
        })
        .collect()
}

/// The first record whose running weight exceeds `unit` times the total
/// (the last record when rounding leaves the target past it).
fn by_running_weight(running: &[f64], unit: f64) -> usize {
    let target = unit * running.last().copied().unwrap_or(0.0);
    running
        .partition_point(|&r| r <= target)
        .min(running.len().saturating_sub(1))
}

/// The best Jaccard similarity between segment `c` of `original` and any
/// segment of `fresh` (same records). 0 when `c` has no record here.
fn best_jaccard(original: &[u32], fresh: &[u32], c: u32) -> f64 {
    let in_c = original.iter().filter(|&&l| l == c).count();
    if in_c == 0 {
        return 0.0;
    }
    let groups = fresh.iter().copied().max().map_or(0, |m| m as usize + 1);
    let mut both = vec![0usize; groups];
    let mut size = vec![0usize; groups];
    for (&o, &f) in original.iter().zip(fresh) {
        size[f as usize] += 1;
        if o == c {
            both[f as usize] += 1;
        }
    }
    (0..groups)
        .map(|g| both[g] as f64 / (in_c + size[g] - both[g]) as f64)
        .fold(0.0, f64::max)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_knee_of_a_sharp_elbow_is_found() {
        // Worked by hand: x = 0, .25, .5, .75, 1 and the flipped, scaled
        // curve y = 0, .857, .929, .971, 1, so y - x peaks at k = 3 (.607).
        let ks = [2, 3, 4, 5, 6];
        let w = [100.0, 40.0, 35.0, 32.0, 30.0];
        assert_eq!(knee(&ks, &w), Some(3));
    }

    #[test]
    fn a_straight_line_has_no_knee() {
        assert_eq!(knee(&[2, 3, 4], &[30.0, 20.0, 10.0]), None);
        assert_eq!(knee(&[2, 3], &[30.0, 20.0]), None);
    }

    #[test]
    fn the_one_standard_error_rule_takes_the_first_k_that_holds() {
        let g = |k, gap, se| Gap { k, gap, se };
        assert_eq!(
            gap_choice(&[
                g(1, 0.1, 0.05),
                g(2, 0.5, 0.05),
                g(3, 0.52, 0.05),
                g(4, 0.5, 0.05)
            ]),
            Some(2)
        );
        assert_eq!(gap_choice(&[g(1, 0.3, 0.05), g(2, 0.2, 0.05)]), Some(1));
    }

    #[test]
    fn jaccard_recovery_matches_a_hand_count() {
        // Segment 0 = {0, 1, 2}; fresh group 1 = {1, 2, 3}: 2 / 4.
        let original = [0, 0, 0, 1, 1];
        let fresh = [0, 1, 1, 1, 2];
        assert_eq!(best_jaccard(&original, &fresh, 0), 0.5);
    }

    #[test]
    fn derived_seeds_differ_by_purpose_and_index() {
        let a = derived_seed(1, GAP_PURPOSE, 0);
        assert_ne!(a, derived_seed(1, GAP_PURPOSE, 1));
        assert_ne!(a, derived_seed(1, STABILITY_PURPOSE, 0));
        assert_eq!(a, derived_seed(1, GAP_PURPOSE, 0));
    }
}
