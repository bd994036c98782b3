//! Criteria that judge a partition, used to choose k.
//!
//! All take the clustered matrix (records by features, finite values) and
//! 0-based labels below `k`, with every segment non-empty; segment centres
//! are recomputed here as the means of their records.
//!
//! - Within-cluster sum of squares: sum of squared Euclidean distances of
//!   records to their segment mean. O(n d).
//! - Silhouette: exact, or estimated with its standard error; see
//!   [`super::silhouette`].
//! - Calinski-Harabasz (T. Caliński and J. Harabasz, "A dendrite method for
//!   cluster analysis", Communications in Statistics 3(1), 1974):
//!   `[B / (k - 1)] / [W / (n - k)]` with B and W the between- and
//!   within-segment sums of squares. Infinite when W is zero. O(n d).
//! - Davies-Bouldin (D. L. Davies and D. W. Bouldin, "A cluster separation
//!   measure", IEEE PAMI 1(2), 1979): mean over segments of
//!   `max_j (s_i + s_j) / d(c_i, c_j)` with `s` the mean Euclidean distance
//!   of members to their centre. Infinite when two centres coincide. O(n d + k² d).
//!
//! Per-record work runs in parallel and is summed in record order.

use super::dist2;
use super::weights::Weights;
use ndarray::ArrayView2;

pub use super::silhouette::{silhouette, Silhouette};

/// Records up to which the silhouette is computed exactly.
pub const SILHOUETTE_EXACT_LIMIT: usize = super::silhouette::EXACT_LIMIT;

fn rows<'a>(data: &ArrayView2<'a, f64>) -> std::slice::ChunksExact<'a, f64> {
    // Callers pass standard-layout matrices (the run stage builds them so);
    // a row that is not contiguous would be a programming error.
    let d = data.ncols().max(1);
    data.to_slice()
        .expect("engine matrices are row-major and contiguous")
        .chunks_exact(d)
}

/// Segment means, k rows of d.
pub fn centres(data: ArrayView2<'_, f64>, labels: &[u32], k: usize) -> Vec<Vec<f64>> {
    centres_weighted(data, Weights::NONE, labels, k)
}

/// Weighted segment means, k rows of d: `Σ w x / Σ w` per segment.
pub fn centres_weighted(
    data: ArrayView2<'_, f64>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
) -> Vec<Vec<f64>> {
    let d = data.ncols();
    let mut sums = vec![vec![0.0; d]; k];
    let n_of = w.per_segment(labels, k);
    for (i, (row, &l)) in rows(&data).zip(labels).enumerate() {
        let wi = w.at(i);
        for (s, v) in sums[l as usize].iter_mut().zip(row.iter()) {
            *s += wi * v;
        }
    }
    for (s, &n) in sums.iter_mut().zip(&n_of) {
        if n > 0.0 {
            s.iter_mut().for_each(|v| *v /= n);
        }
    }
    sums
}

/// Within-cluster sum of squares about the segment means.
pub fn within_ss(data: ArrayView2<'_, f64>, labels: &[u32], k: usize) -> f64 {
    within_ss_weighted(data, Weights::NONE, labels, k)
}

/// Weighted within-cluster sum of squares: `Σ w ||x - c||²` about the
/// weighted segment means.
pub fn within_ss_weighted(
    data: ArrayView2<'_, f64>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
) -> f64 {
    let c = centres_weighted(data, w, labels, k);
    (rows(&data).zip(labels).enumerate())
        .map(|(i, (r, &l))| w.at(i) * dist2(r, &c[l as usize]))
        .sum()
}

/// Calinski-Harabasz index; see the module documentation.
pub fn calinski_harabasz(data: ArrayView2<'_, f64>, labels: &[u32], k: usize) -> f64 {
    calinski_harabasz_weighted(data, Weights::NONE, labels, k)
}

/// Calinski-Harabasz with record weights: the sums of squares weighted and
/// `n` the summed weight, so whole-number weights give the index of the
/// repeated records.
pub fn calinski_harabasz_weighted(
    data: ArrayView2<'_, f64>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
) -> f64 {
    let n = data.nrows();
    let c = centres_weighted(data, w, labels, k);
    let grand = centres_weighted(data, w, &vec![0; n], 1).remove(0);
    let n_of = w.per_segment(labels, k);
    let between: f64 = c
        .iter()
        .zip(&n_of)
        .map(|(ci, &m)| m * dist2(ci, &grand))
        .sum();
    let within = within_ss_weighted(data, w, labels, k);
    if within == 0.0 {
        return f64::INFINITY;
    }
    (between / (k as f64 - 1.0)) / (within / (w.total(n) - k as f64))
}

/// Davies-Bouldin index; see the module documentation.
pub fn davies_bouldin(data: ArrayView2<'_, f64>, labels: &[u32], k: usize) -> f64 {
    davies_bouldin_weighted(data, Weights::NONE, labels, k)
}

/// Davies-Bouldin with record weights: each scatter the weighted mean
/// distance to the weighted centre.
pub fn davies_bouldin_weighted(
    data: ArrayView2<'_, f64>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
) -> f64 {
    let c = centres_weighted(data, w, labels, k);
    let n_of = w.per_segment(labels, k);
    let mut scatter = vec![0.0; k];
    for (i, (r, &l)) in rows(&data).zip(labels).enumerate() {
        scatter[l as usize] += w.at(i) * dist2(r, &c[l as usize]).sqrt();
    }
    for (s, &m) in scatter.iter_mut().zip(&n_of) {
        *s /= if m > 0.0 { m } else { 1.0 };
    }
    davies_bouldin_from(&scatter, |i, j| dist2(&c[i], &c[j]).sqrt())
}

/// The weighted mean of every record: the centre Calinski-Harabasz
/// measures the segments' spread from, the same for every partition.
pub fn grand_mean_weighted(data: ArrayView2<'_, f64>, w: Weights<'_>) -> Vec<f64> {
    centres_weighted(data, w, &vec![0; data.nrows()], 1).remove(0)
}

/// The within-cluster sum of squares, Calinski-Harabasz and
/// Davies-Bouldin of one partition.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Judged {
    pub within_ss: f64,
    pub calinski_harabasz: f64,
    pub davies_bouldin: f64,
}

/// [`within_ss_weighted`], [`calinski_harabasz_weighted`] and
/// [`davies_bouldin_weighted`] together, to the bit: the same sums in the
/// same order, from one computation of the centres and one pass over the
/// records (the three apart take eight passes), with `grand` from
/// [`grand_mean_weighted`]. The distances to the centres are measured in
/// parallel and summed in record order. O(n d + k² d).
pub fn judged_weighted(
    data: ArrayView2<'_, f64>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
    grand: &[f64],
) -> Judged {
    use rayon::prelude::*;
    let n = data.nrows();
    let c = centres_weighted(data, w, labels, k);
    let n_of = w.per_segment(labels, k);
    let d = data.ncols().max(1);
    let squared: Vec<f64> = (data.to_slice())
        .expect("engine matrices are row-major and contiguous")
        .par_chunks_exact(d)
        .zip(labels.par_iter())
        .map(|(r, &l)| dist2(r, &c[l as usize]))
        .collect();
    let within: f64 = (squared.iter().enumerate())
        .map(|(i, &e)| w.at(i) * e)
        .sum();
    let mut scatter = vec![0.0; k];
    for (i, (&e, &l)) in squared.iter().zip(labels).enumerate() {
        scatter[l as usize] += w.at(i) * e.sqrt();
    }
    for (s, &m) in scatter.iter_mut().zip(&n_of) {
        *s /= if m > 0.0 { m } else { 1.0 };
    }
    let between: f64 = c
        .iter()
        .zip(&n_of)
        .map(|(ci, &m)| m * dist2(ci, grand))
        .sum();
    let calinski_harabasz = if within == 0.0 {
        f64::INFINITY
    } else {
        (between / (k as f64 - 1.0)) / (within / (w.total(n) - k as f64))
    };
    Judged {
        within_ss: within,
        calinski_harabasz,
        davies_bouldin: davies_bouldin_from(&scatter, |i, j| dist2(&c[i], &c[j]).sqrt()),
    }
}

/// Davies-Bouldin from each segment's scatter (mean distance of its
/// records to its centre) and the separation of two segments' centres,
/// for methods with their own measure (medoids, prototypes).
pub fn davies_bouldin_from(scatter: &[f64], separation: impl Fn(usize, usize) -> f64) -> f64 {
    let k = scatter.len();
    let mut total = 0.0;
    for i in 0..k {
        let mut worst = 0.0f64;
        for j in 0..k {
            if i == j {
                continue;
            }
            let sep = separation(i, j);
            let ratio = if sep == 0.0 {
                f64::INFINITY
            } else {
                (scatter[i] + scatter[j]) / sep
            };
            worst = worst.max(ratio);
        }
        total += worst;
    }
    total / k as f64
}

/// Calinski-Harabasz on a method's own objective: `total` its value for
/// all records as one segment, `within` at k segments; `((T - W) / (k - 1))
/// / (W / (n - k))`, `n` the records' summed weight when they carry weights. For k-means (within-cluster sum of squares) this is
/// the index itself; for k-medoids the total deviation, for k-prototypes
/// the total cost take its place.
pub fn calinski_harabasz_from(total: f64, within: f64, n: f64, k: usize) -> f64 {
    if within == 0.0 {
        return f64::INFINITY;
    }
    ((total - within) / (k as f64 - 1.0)) / (within / (n - k as f64))
}

/// Silhouette computed the slow, obvious way from a full distance matrix:
/// the oracle the fast version is tested against.
pub fn silhouette_naive(data: ArrayView2<'_, f64>, labels: &[u32]) -> f64 {
    let all: Vec<&[f64]> = rows(&data).collect();
    let n = all.len();
    let mut total = 0.0;
    for i in 0..n {
        let mut same = (0.0, 0usize);
        let mut other: std::collections::BTreeMap<u32, (f64, usize)> = Default::default();
        for j in 0..n {
            if i == j {
                continue;
            }
            let dd = dist2(all[i], all[j]).sqrt();
            if labels[j] == labels[i] {
                same.0 += dd;
                same.1 += 1;
            } else {
                let e = other.entry(labels[j]).or_insert((0.0, 0));
                e.0 += dd;
                e.1 += 1;
            }
        }
        if same.1 == 0 {
            continue;
        }
        let a = same.0 / same.1 as f64;
        let b = other
            .values()
            .map(|(s, m)| s / *m as f64)
            .fold(f64::INFINITY, f64::min);
        if b.is_finite() && a.max(b) > 0.0 {
            total += (b - a) / a.max(b);
        }
    }
    total / n as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::rng::Stream;
    use ndarray::Array2;

    /// Deterministic scattered points in three loose groups.
    fn cloud(n: usize) -> (Array2<f64>, Vec<u32>) {
        let mut s = Stream::new(5, 0);
        let mut x = Array2::zeros((n, 3));
        let mut labels = vec![0; n];
        for i in 0..n {
            let g = (i % 3) as u32;
            labels[i] = if s.unit() < 0.1 { (g + 1) % 3 } else { g };
            for f in 0..3 {
                x[[i, f]] = g as f64 * 2.0 + s.unit();
            }
        }
        (x, labels)
    }

    #[test]
    fn the_criteria_judged_together_are_those_judged_apart_to_the_bit() {
        let (x, labels) = cloud(301);
        let weights: Vec<f64> = (0..301).map(|i| 1.0 + (i % 4) as f64 * 0.75).collect();
        for w in [Weights::NONE, Weights::maybe(Some(&weights))] {
            for k in [2, 3] {
                let labels: Vec<u32> = labels.iter().map(|&l| l % k as u32).collect();
                let grand = grand_mean_weighted(x.view(), w);
                let together = judged_weighted(x.view(), w, &labels, k, &grand);
                let apart = Judged {
                    within_ss: within_ss_weighted(x.view(), w, &labels, k),
                    calinski_harabasz: calinski_harabasz_weighted(x.view(), w, &labels, k),
                    davies_bouldin: davies_bouldin_weighted(x.view(), w, &labels, k),
                };
                assert_eq!(together, apart);
            }
        }
    }

    #[test]
    fn exact_silhouette_agrees_with_the_naive_oracle() {
        let (x, labels) = cloud(90);
        let fast = silhouette(x.view(), &labels, 3, 0, 0);
        let slow = silhouette_naive(x.view(), &labels);
        assert!(
            (fast.mean - slow).abs() < 1e-12,
            "{} vs {}",
            fast.mean,
            slow
        );
        assert_eq!(fast.evaluated, 90);
    }

    #[test]
    fn a_record_alone_in_its_segment_scores_zero() {
        let x = ndarray::array![[0.0], [0.1], [5.0]];
        let s = silhouette(x.view(), &[0, 0, 1], 2, 0, 0);
        assert_eq!(s.per_segment[1], 0.0);
    }

    #[test]
    fn calinski_harabasz_is_infinite_when_segments_are_points() {
        let x = ndarray::array![[0.0], [0.0], [5.0]];
        assert_eq!(calinski_harabasz(x.view(), &[0, 0, 1], 2), f64::INFINITY);
    }
}
