//! The silhouette of a partition: exact, or estimated at a cost that does
//! not grow with the number of records, with its standard error.
//!
//! # Reference
//! P. J. Rousseeuw, "Silhouettes: a graphical aid to the interpretation and
//! validation of cluster analysis", Journal of Computational and Applied
//! Mathematics 20, 1987. For record i, `s(i) = (b - a) / max(a, b)` with `a`
//! the mean Euclidean distance to the other records of its segment and `b`
//! the smallest mean distance to the records of another segment;
//! `s(i) = 0` for a record alone in its segment (and when `a = b = 0`).
//!
//! # Exact
//! Every record against every record, in blocks: O(n² d) time, O(n d + n k)
//! memory; no n-by-n matrix is ever held.
//!
//! # Estimate
//! A stratified sample: each segment contributes records in proportion to
//! its size, at least [`SAMPLE_PER_SEGMENT`] (or all of a smaller segment),
//! drawn uniformly without replacement within the segment. Each sampled
//! record's mean distance to a segment is estimated by its mean distance
//! to that segment's sampled records (an unbiased estimate, the sample
//! being uniform within the segment), and its silhouette computed from
//! those. The overall value is the size-weighted mean of the segments'
//! sample means. Cost: O(s² d) for s sampled records, plus O(n) to draw
//! the sample, whatever n is.
//!
//! The standard error comes from a delete-a-group jackknife (P. S. Kott,
//! "The delete-a-group jackknife", Journal of Official Statistics 17(4),
//! 2001): the sample is dealt into [`GROUPS`] groups, in turn within each
//! segment; the estimate is recomputed [`GROUPS`] times, each time without
//! one group in either role (neither as a record judged nor as a record
//! measured against), and `SE² = (G - 1) / G · Σ_g (θ_(-g) - θ̄)²`. Leaving a
//! group out of the measuring side too is what makes the error include the
//! noise of the estimated mean distances, not only that of which records
//! were judged. It ignores the finite-population correction, so it
//! overstates the error a little when the sample is a large share of the
//! records.
//!
//! # Record weights
//! A record of weight `w` counts as `w` identical records: the mean
//! distances weigh each other record by its weight, the own segment's
//! denominator is its summed weight less one (the record's other copies sit
//! at distance 0), a segment of summed weight at most 1 gives 0, and the
//! means over records weigh each silhouette by its record's weight. The
//! estimate stratifies by summed weight and estimates each mean distance
//! by the weighted mean over the segment's sampled records (a ratio
//! estimate). With whole-number weights the exact value equals that of
//! the repeated records.
//!
//! # Determinism
//! The sample is drawn from the caller's seeded stream. Distances are
//! summed per (segment, group) cell in blocks of [`LANES`] reference
//! records, lane by lane, the lanes then added in lane order, so the
//! result depends on neither the thread count nor the machine.

use super::rng::Stream;
use super::weights::Weights;
use ndarray::ArrayView2;
use rayon::prelude::*;

/// Records up to which [`silhouette`] is exact.
pub const EXACT_LIMIT: usize = 12_000;

/// How many records the estimate draws in all (at least; small segments
/// may add more).
pub const SAMPLE: usize = 8_000;

/// Each segment contributes at least this many sampled records (or all its
/// records, when it has fewer), so small segments are never missed.
pub const SAMPLE_PER_SEGMENT: usize = 200;

/// Groups of the delete-a-group jackknife.
pub const GROUPS: usize = 20;

/// Reference records per block of the distance kernel.
pub const LANES: usize = 8;

/// A silhouette, with how it was obtained.
#[derive(Debug, Clone, PartialEq)]
pub struct Silhouette {
    /// Mean silhouette over all records (estimated when sampled).
    pub mean: f64,
    /// Standard error of `mean`; `None` when exact.
    pub std_error: Option<f64>,
    /// Mean silhouette of each segment's records (or of its sample).
    pub per_segment: Vec<f64>,
    /// Records whose silhouette was computed; `n` when exact.
    pub evaluated: usize,
    /// Each segment's evaluated silhouettes, sorted from highest to lowest
    /// (for a silhouette chart).
    pub values: Vec<Vec<f64>>,
}

/// Exact up to [`EXACT_LIMIT`] records, else estimated from a sample drawn
/// from stream `stream` of `seed`.
pub fn silhouette(
    data: ArrayView2<'_, f64>,
    labels: &[u32],
    k: usize,
    seed: u64,
    stream: u64,
) -> Silhouette {
    silhouette_weighted(data, Weights::NONE, labels, k, (seed, stream), false)
}

/// [`silhouette`] with record weights (see the module documentation);
/// exact when `exact` is set or up to [`EXACT_LIMIT`] records, else
/// estimated from stream `draw.1` of seed `draw.0`.
pub fn silhouette_weighted(
    data: ArrayView2<'_, f64>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
    draw: (u64, u64),
    exact: bool,
) -> Silhouette {
    exact_or_estimate(labels, k, w, (draw, exact), &|j: &Judged| j.scores(data))
}

/// Exact when asked or up to [`EXACT_LIMIT`] records, else estimated from
/// stream `draw.1` of seed `draw.0`.
fn exact_or_estimate(
    labels: &[u32],
    k: usize,
    w: Weights<'_>,
    (draw, exact): ((u64, u64), bool),
    scorer: Scorer<'_>,
) -> Silhouette {
    if exact || labels.len() <= EXACT_LIMIT {
        exact_with(labels, k, w, scorer)
    } else {
        let mut rng = Stream::new(draw.0, draw.1);
        estimate_with(labels, k, w, &mut rng, SAMPLE, scorer)
    }
}

/// A dissimilarity between records `i` and `j` that is not Euclidean over
/// rows (Gower's, say, or the root of k-prototypes' cost).
pub type Dissimilarity<'a> = &'a (dyn Fn(usize, usize) -> f64 + Sync);

/// As [`silhouette`], with `dist` in place of the Euclidean distance
/// between rows: exact up to [`EXACT_LIMIT`] of the `labels.len()`
/// records, else estimated.
pub fn silhouette_by(
    dist: Dissimilarity<'_>,
    labels: &[u32],
    k: usize,
    seed: u64,
    stream: u64,
) -> Silhouette {
    silhouette_by_weighted(dist, Weights::NONE, labels, k, (seed, stream), false)
}

/// [`silhouette_by`] with record weights, exact when `exact` is set; see
/// [`silhouette_weighted`].
pub fn silhouette_by_weighted(
    dist: Dissimilarity<'_>,
    w: Weights<'_>,
    labels: &[u32],
    k: usize,
    draw: (u64, u64),
    exact: bool,
) -> Silhouette {
    exact_or_estimate(labels, k, w, (draw, exact), &|j: &Judged| {
        j.scores_by(dist, w)
    })
}

/// As [`exact`], with `dist` in place of the Euclidean distance.
pub fn exact_by(dist: Dissimilarity<'_>, labels: &[u32], k: usize) -> Silhouette {
    silhouette_by_weighted(dist, Weights::NONE, labels, k, (0, 0), true)
}

/// The exact silhouette of every record.
pub fn exact(data: ArrayView2<'_, f64>, labels: &[u32], k: usize) -> Silhouette {
    exact_with(labels, k, Weights::NONE, &|j: &Judged| j.scores(data))
}

/// How the judged records' distance sums are obtained.
type Scorer<'a> = &'a dyn Fn(&Judged) -> Sums;

fn exact_with(labels: &[u32], k: usize, w: Weights<'_>, scorer: Scorer<'_>) -> Silhouette {
    let n = labels.len();
    let all: Vec<usize> = (0..n).collect();
    let judged = Judged::new(&all, labels, k, 1, w);
    let s = scorer(&judged);
    let full = judged.whole(&s);
    let mut per = vec![0.0; k];
    let mut n_of = vec![0.0f64; k];
    for (&i, v) in all.iter().zip(&full) {
        per[labels[i] as usize] += w.at(i) * v;
        n_of[labels[i] as usize] += w.at(i);
    }
    for (p, &m) in per.iter_mut().zip(&n_of) {
        *p /= if m > 0.0 { m } else { 1.0 };
    }
    let total = if n == 0 { 1.0 } else { w.total(n) };
    Silhouette {
        mean: (full.iter().enumerate())
            .map(|(i, v)| w.at(i) * v)
            .sum::<f64>()
            / total,
        std_error: None,
        per_segment: per,
        evaluated: n,
        values: by_segment(labels.iter().copied().zip(full.iter().copied()), k),
    }
}

/// The estimate from a stratified sample of about `sample` records; see the
/// module documentation.
pub fn estimate(
    data: ArrayView2<'_, f64>,
    labels: &[u32],
    k: usize,
    rng: &mut Stream,
    sample: usize,
) -> Silhouette {
    estimate_with(labels, k, Weights::NONE, rng, sample, &|j: &Judged| {
        j.scores(data)
    })
}

fn estimate_with(
    labels: &[u32],
    k: usize,
    w: Weights<'_>,
    rng: &mut Stream,
    sample: usize,
    scorer: Scorer<'_>,
) -> Silhouette {
    let n = labels.len();
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); k];
    for (i, &l) in labels.iter().enumerate() {
        members[l as usize].push(i);
    }
    let n_of = w.per_segment(labels, k);
    let total = w.total(n);
    let chosen: Vec<usize> = members
        .iter()
        .flat_map(|m| {
            let want = ((m.len() as f64 * sample as f64 / n as f64).round() as usize)
                .max(SAMPLE_PER_SEGMENT)
                .min(m.len());
            draw(m, want, rng)
        })
        .collect();
    let judged = Judged::new(&chosen, labels, k, GROUPS, w);
    let s = scorer(&judged);
    let weights: Vec<f64> = n_of.iter().map(|&m| m / total).collect();

    let full = judged.whole(&s);
    let (mean, per) = judged.weighted_mean(&full, None, &weights);
    let leave_outs: Vec<f64> = (0..GROUPS)
        .map(|g| {
            judged
                .weighted_mean(&judged.without(&s, g), Some(g), &weights)
                .0
        })
        .collect();
    let centre = leave_outs.iter().sum::<f64>() / GROUPS as f64;
    let spread: f64 = leave_outs.iter().map(|t| (t - centre) * (t - centre)).sum();
    let std_error = ((GROUPS as f64 - 1.0) / GROUPS as f64 * spread).sqrt();
    Silhouette {
        mean,
        std_error: Some(std_error),
        per_segment: per,
        evaluated: chosen.len(),
        values: by_segment(
            judged
                .records
                .iter()
                .map(|&i| labels[i])
                .zip(full.iter().copied()),
            k,
        ),
    }
}

/// `want` of `pool`'s records, uniformly without replacement, in the order
/// drawn (a partial Fisher-Yates shuffle).
fn draw(pool: &[usize], want: usize, rng: &mut Stream) -> Vec<usize> {
    let mut pool = pool.to_vec();
    for t in 0..want {
        let pick = t + rng.below(pool.len() - t);
        pool.swap(t, pick);
    }
    pool.truncate(want);
    pool
}

/// Sorts each segment's values from highest to lowest.
fn by_segment(values: impl Iterator<Item = (u32, f64)>, k: usize) -> Vec<Vec<f64>> {
    let mut out = vec![Vec::new(); k];
    for (l, v) in values {
        out[l as usize].push(v);
    }
    for v in out.iter_mut() {
        v.sort_by(|a, b| b.total_cmp(a));
    }
    out
}

/// The judged records, which are also the records measured against, laid
/// out for the distance kernel: sorted into (segment, group) cells, each
/// cell padded to whole blocks of [`LANES`], each block stored feature by
/// feature so the kernel's inner loop runs across lanes.
struct Judged {
    /// The judged records (indices into the data), in the order given.
    records: Vec<usize>,
    /// Group of each judged record.
    group: Vec<usize>,
    /// Segment of each judged record.
    segment: Vec<usize>,
    /// Weight of each judged record (1 without weights).
    weight: Vec<f64>,
    k: usize,
    groups: usize,
    /// Summed weight of the judged records per (segment, group) cell,
    /// `segment * groups + group` (their count without weights).
    count: Vec<f64>,
    /// Per cell, its first block and how many blocks it has.
    cells: Vec<(usize, usize)>,
    /// The references' record indices in block order; `usize::MAX` pads.
    padded: Vec<usize>,
    /// The weight of each reference in block order (0 for padding).
    reference_weight: Vec<f64>,
}

/// Per judged record, its distance sums to each (segment, group) cell.
type Sums = Vec<Vec<f64>>;

impl Judged {
    /// Deals `records` into `groups` groups in turn within each segment.
    fn new(records: &[usize], labels: &[u32], k: usize, groups: usize, w: Weights<'_>) -> Judged {
        let mut dealt = vec![0usize; k];
        let group: Vec<usize> = records
            .iter()
            .map(|&i| {
                let s = labels[i] as usize;
                let g = dealt[s] % groups;
                dealt[s] += 1;
                g
            })
            .collect();
        let mut by_cell: Vec<Vec<usize>> = vec![Vec::new(); k * groups];
        for (&i, &g) in records.iter().zip(&group) {
            by_cell[labels[i] as usize * groups + g].push(i);
        }
        let mut cells = Vec::with_capacity(k * groups);
        let mut padded = Vec::new();
        for members in &by_cell {
            let blocks = members.len().div_ceil(LANES);
            cells.push((padded.len() / LANES, blocks));
            padded.extend_from_slice(members);
            padded.resize(padded.len() + blocks * LANES - members.len(), usize::MAX);
        }
        Judged {
            records: records.to_vec(),
            segment: records.iter().map(|&i| labels[i] as usize).collect(),
            weight: records.iter().map(|&i| w.at(i)).collect(),
            group,
            k,
            groups,
            count: (by_cell.iter())
                .map(|m| m.iter().map(|&i| w.at(i)).sum())
                .collect(),
            reference_weight: (padded.iter())
                .map(|&i| if i == usize::MAX { 0.0 } else { w.at(i) })
                .collect(),
            cells,
            padded,
        }
    }

    /// Distance sums of every judged record to every cell, in parallel over
    /// the judged records (each writes its own row).
    fn scores(&self, data: ArrayView2<'_, f64>) -> Sums {
        let d = data.ncols();
        let x = data
            .as_slice()
            .expect("engine matrices are row-major and contiguous");
        // Blocks feature by feature: block b, feature f, lane l at
        // (b * d + f) * LANES + l. Padding lanes hold zeros and a zero mask.
        let blocks = self.padded.len() / LANES;
        let mut packed = vec![0.0; blocks * d * LANES];
        let mut mask = vec![0.0; blocks * LANES];
        for (slot, &i) in self.padded.iter().enumerate() {
            if i == usize::MAX {
                continue;
            }
            let (b, l) = (slot / LANES, slot % LANES);
            mask[slot] = self.reference_weight[slot];
            for f in 0..d {
                packed[(b * d + f) * LANES + l] = x[i * d + f];
            }
        }
        self.records
            .par_iter()
            .map(|&i| {
                let row = &x[i * d..(i + 1) * d];
                self.cells
                    .iter()
                    .map(|&(first, count)| {
                        cell_sum(
                            row,
                            &packed[first * d * LANES..],
                            &mask[first * LANES..],
                            count,
                        )
                    })
                    .collect()
            })
            .collect()
    }

    /// As [`Judged::scores`], with distances from `dist`: each cell's
    /// references in block order, one accumulator.
    fn scores_by(&self, dist: Dissimilarity<'_>, w: Weights<'_>) -> Sums {
        self.records
            .par_iter()
            .map(|&i| {
                self.cells
                    .iter()
                    .map(|&(first, count)| {
                        self.padded[first * LANES..(first + count) * LANES]
                            .iter()
                            .filter(|&&j| j != usize::MAX)
                            .map(|&j| w.at(j) * dist(i, j))
                            .sum()
                    })
                    .collect()
            })
            .collect()
    }

    /// Each judged record's silhouette against all cells.
    fn whole(&self, sums: &Sums) -> Vec<f64> {
        (0..self.records.len())
            .map(|r| self.score(r, &sums[r], None))
            .collect()
    }

    /// Each judged record's silhouette with group `g` left out of the
    /// measuring side (records of group `g` themselves are skipped later).
    fn without(&self, sums: &Sums, g: usize) -> Vec<f64> {
        (0..self.records.len())
            .map(|r| {
                if self.group[r] == g {
                    0.0
                } else {
                    self.score(r, &sums[r], Some(g))
                }
            })
            .collect()
    }

    /// One judged record's silhouette from its cell sums, optionally
    /// without group `skip`.
    fn score(&self, r: usize, sums: &[f64], skip: Option<usize>) -> f64 {
        let own = self.segment[r];
        let (mut a, mut b) = (f64::NAN, f64::INFINITY);
        for s in 0..self.k {
            let (mut total, mut m) = (0.0, 0.0f64);
            for g in 0..self.groups {
                if Some(g) == skip {
                    continue;
                }
                total += sums[s * self.groups + g];
                m += self.count[s * self.groups + g];
            }
            if s == own {
                if m <= 1.0 {
                    return 0.0;
                }
                a = total / (m - 1.0);
            } else if m > 0.0 {
                b = b.min(total / m);
            }
        }
        let top = a.max(b);
        if top == 0.0 || !b.is_finite() {
            0.0
        } else {
            (b - a) / top
        }
    }

    /// The size-weighted mean of the segments' mean silhouettes over judged
    /// records not in group `skip`, and the per-segment means.
    fn weighted_mean(&self, s: &[f64], skip: Option<usize>, weights: &[f64]) -> (f64, Vec<f64>) {
        let mut total = vec![0.0; self.k];
        let mut m = vec![0.0f64; self.k];
        for (r, (&v, &g)) in s.iter().zip(&self.group).enumerate() {
            if Some(g) == skip {
                continue;
            }
            let seg = self.segment[r];
            total[seg] += self.weight[r] * v;
            m[seg] += self.weight[r];
        }
        let per: Vec<f64> = total
            .iter()
            .zip(&m)
            .map(|(t, &c)| t / if c > 0.0 { c } else { 1.0 })
            .collect();
        (per.iter().zip(weights).map(|(p, w)| p * w).sum(), per)
    }
}

/// Sum of Euclidean distances from `row` to the records of `blocks`
/// consecutive blocks. Lanes accumulate separately and are added in lane
/// order at the end, so the sum is the same on every machine.
///
/// O(blocks · LANES · d); the inner loops run across lanes, which the
/// compiler turns into vector instructions.
#[inline]
fn cell_sum(row: &[f64], packed: &[f64], mask: &[f64], blocks: usize) -> f64 {
    let d = row.len();
    let mut lanes = [0.0f64; LANES];
    for b in 0..blocks {
        let block = &packed[b * d * LANES..(b + 1) * d * LANES];
        let mut acc = [0.0f64; LANES];
        for (f, &v) in row.iter().enumerate() {
            let col = &block[f * LANES..(f + 1) * LANES];
            for l in 0..LANES {
                let t = v - col[l];
                acc[l] += t * t;
            }
        }
        let m = &mask[b * LANES..(b + 1) * LANES];
        for l in 0..LANES {
            lanes[l] += acc[l].sqrt() * m[l];
        }
    }
    lanes.iter().sum()
}
