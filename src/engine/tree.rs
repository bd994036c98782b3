//! Agglomerative clustering: the merge tree (dendrogram) of a set of
//! records, cuts of it, and its cophenetic correlation.
//!
//! # References
//! D. Müllner, "Modern hierarchical, agglomerative clustering algorithms",
//! arXiv:1109.2378, 2011. Three of its algorithms are used:
//! - **single**: the minimum spanning tree (Prim's algorithm), distances
//!   computed on the fly: O(n² d) time, O(n) memory;
//! - **complete, average, weighted** (reducible linkages): the
//!   nearest-neighbour chain over one condensed distance matrix updated by
//!   the Lance-Williams formulas: O(n²) time after the O(n² d) matrix, n(n-1)/2
//!   distances of memory;
//! - **ward**: the nearest-neighbour chain over stored cluster centroids and
//!   sizes, no matrix: O(n² d) time, O(n d) memory;
//! - **centroid, median**: the generic algorithm (a priority queue of lower
//!   bounds on each cluster's nearest neighbour) over one condensed matrix
//!   updated by the Lance-Williams formulas: O(n²) typical after the
//!   matrix, O(n³) worst case, n(n-1)/2 distances of memory.
//!
//! # Heights (the conventions of the common reference libraries)
//! ```text
//! single    d(A∪B, C) = min(d(A,C), d(B,C))
//! complete  d(A∪B, C) = max(d(A,C), d(B,C))
//! average   d(A∪B, C) = (|A| d(A,C) + |B| d(B,C)) / (|A| + |B|)
//! weighted  d(A∪B, C) = (d(A,C) + d(B,C)) / 2
//! ward      d(A, B)   = sqrt(2 |A| |B| / (|A| + |B|)) * ||c_A - c_B||
//!           (the square root of twice the increase in within-cluster
//!           sum of squares)
//! centroid  d(A, B)   = ||c_A - c_B||, c the mean of the members
//! median    d(A, B)   = ||m_A - m_B||, m of a merger the midpoint of its
//!           two parts' m (each part weighted equally)
//! ```
//! Ward, centroid and median need Euclidean geometry. Centroid and median
//! heights can decrease along the merge order (inversions);
//! [`Dendrogram::inversions`] counts them.
//!
//! # Output convention and ties
//! Merges are listed in order; merge `i` creates cluster `n + i`, records
//! being clusters `0..n`; each merge names the smaller id first. For every
//! linkage but centroid and median the merges are sorted by height (a stable
//! sort, so equal heights keep the order the algorithm found them in). A
//! nearest neighbour is the lowest-numbered among equals, and in the chain
//! the previous element wins a tie, so the result is fixed by the data alone.
//!
//! # Preconditions
//! Finite values; at least one record. Cosine and correlation distances of a
//! zero (or constant) row are taken as 1 (uncorrelated), not undefined.

// Slot loops index the condensed matrix and several per-slot arrays at
// once; an iterator over one of them would hide that symmetry.
#![allow(clippy::needless_range_loop)]

use super::matrix::Condensed;
use super::{dist2, EngineError};
use ndarray::ArrayView2;
use rayon::prelude::*;
use serde::Serialize;

/// How the distance between two clusters is defined.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Linkage {
    Single,
    Complete,
    Average,
    Weighted,
    Ward,
    Centroid,
    Median,
}

impl Linkage {
    pub const NAMES: [&'static str; 7] = [
        "single", "complete", "average", "weighted", "ward", "centroid", "median",
    ];
    pub const ALL: [Linkage; 7] = [
        Linkage::Single,
        Linkage::Complete,
        Linkage::Average,
        Linkage::Weighted,
        Linkage::Ward,
        Linkage::Centroid,
        Linkage::Median,
    ];

    pub fn parse(word: &str) -> Option<Linkage> {
        Self::NAMES
            .iter()
            .position(|n| *n == word)
            .map(|i| Self::ALL[i])
    }

    pub fn name(self) -> &'static str {
        Self::NAMES[Self::ALL.iter().position(|l| *l == self).unwrap_or(0)]
    }

    /// Whether the linkage is defined only for Euclidean distances.
    pub fn needs_euclidean(self) -> bool {
        matches!(self, Linkage::Ward | Linkage::Centroid | Linkage::Median)
    }
}

/// How the distance between two records is measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Metric {
    Euclidean,
    Manhattan,
    Cosine,
    Correlation,
}

impl Metric {
    pub const NAMES: [&'static str; 4] = ["euclidean", "manhattan", "cosine", "correlation"];

    pub fn name(self) -> &'static str {
        match self {
            Metric::Euclidean => "euclidean",
            Metric::Manhattan => "manhattan",
            Metric::Cosine => "cosine",
            Metric::Correlation => "correlation",
        }
    }

    pub fn parse(word: &str) -> Option<Metric> {
        match word {
            "euclidean" => Some(Metric::Euclidean),
            "manhattan" => Some(Metric::Manhattan),
            "cosine" => Some(Metric::Cosine),
            "correlation" => Some(Metric::Correlation),
            _ => None,
        }
    }

    /// The distance between two rows.
    #[inline]
    pub fn distance(self, a: &[f64], b: &[f64]) -> f64 {
        match self {
            Metric::Euclidean => dist2(a, b).sqrt(),
            Metric::Manhattan => a.iter().zip(b).map(|(x, y)| (x - y).abs()).sum(),
            Metric::Cosine => cosine_distance(a, b, 0.0, 0.0),
            Metric::Correlation => {
                let ma = a.iter().sum::<f64>() / a.len().max(1) as f64;
                let mb = b.iter().sum::<f64>() / b.len().max(1) as f64;
                cosine_distance(a, b, ma, mb)
            }
        }
    }
}

/// 1 - cos(a - ma, b - mb); 1 when either vector is zero.
fn cosine_distance(a: &[f64], b: &[f64], ma: f64, mb: f64) -> f64 {
    let (mut ab, mut aa, mut bb) = (0.0, 0.0, 0.0);
    for (x, y) in a.iter().zip(b) {
        let (x, y) = (x - ma, y - mb);
        ab += x * y;
        aa += x * x;
        bb += y * y;
    }
    if aa == 0.0 || bb == 0.0 {
        return 1.0;
    }
    (1.0 - ab / (aa.sqrt() * bb.sqrt())).max(0.0)
}

/// One merge of two clusters.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Merge {
    /// The smaller of the two cluster ids.
    pub a: usize,
    pub b: usize,
    pub height: f64,
    /// Records in the new cluster.
    pub size: usize,
}

/// The merge tree of `n` records.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Dendrogram {
    pub n: usize,
    pub merges: Vec<Merge>,
}

/// Builds the merge tree of the rows of `data`.
pub fn linkage(
    data: ArrayView2<'_, f64>,
    linkage: Linkage,
    metric: Metric,
) -> Result<Dendrogram, EngineError> {
    linkage_weighted(data, Sizes::default(), linkage, metric)
}

/// What each row of a tree stands for: the records it holds (a
/// micro-segment's members; one each by default), counted in the merges,
/// and the weight the formulas take (its records' summed weight with record
/// weights; its record count by default). Whole-number weights give the
/// cuts of the repeated records: copies of a record would merge first at
/// height 0 into one cluster of that weight.
#[derive(Debug, Clone, Copy, Default)]
pub struct Sizes<'a> {
    pub counts: Option<&'a [usize]>,
    pub weights: Option<&'a [f64]>,
}

/// As [`linkage`], with what each row stands for ([`Sizes`]). The weights
/// enter Ward's and the centroid's formulas and average linkage's update;
/// single, complete, weighted and median ignore them.
pub fn linkage_weighted(
    data: ArrayView2<'_, f64>,
    stands_for: Sizes<'_>,
    linkage: Linkage,
    metric: Metric,
) -> Result<Dendrogram, EngineError> {
    let (n, d) = data.dim();
    if n == 0 {
        return Err(EngineError::TooFewRecords { k: 1, n: 0 });
    }
    if d == 0 {
        return Err(EngineError::NoFeatures);
    }
    if linkage.needs_euclidean() && metric != Metric::Euclidean {
        return Err(EngineError::NeedsEuclidean {
            linkage: linkage.name(),
        });
    }
    let rows: Vec<Vec<f64>> = data.outer_iter().map(|r| r.to_vec()).collect();
    let sizes: Vec<usize> = match stands_for.counts {
        Some(c) => c.to_vec(),
        None => vec![1; n],
    };
    let weights: Vec<f64> = match stands_for.weights {
        Some(w) => w.to_vec(),
        None => sizes.iter().map(|&s| s as f64).collect(),
    };
    let steps = match linkage {
        Linkage::Single => mst_single(&rows, metric),
        Linkage::Complete | Linkage::Average | Linkage::Weighted => {
            nn_chain_matrix(&rows, &weights, linkage, metric)
        }
        Linkage::Ward => nn_chain_ward(&rows, &weights),
        Linkage::Centroid | Linkage::Median => generic_matrix(&rows, &weights, linkage),
    };
    let sorted = !matches!(linkage, Linkage::Centroid | Linkage::Median);
    Ok(label_steps(n, &sizes, steps, sorted))
}

/// The merge tree over a dissimilarity matrix the caller computed (Gower's,
/// say): single linkage by Prim's algorithm over the matrix, complete,
/// average and weighted by the nearest-neighbour chain over it (updated in
/// place). Linkages that need Euclidean geometry are refused. O(n²) time
/// beyond the matrix.
pub fn linkage_matrix(m: Condensed, linkage: Linkage) -> Result<Dendrogram, EngineError> {
    linkage_matrix_weighted(m, None, linkage)
}

/// [`linkage_matrix`] with record weights, which average linkage's update
/// takes (the others ignore them).
pub fn linkage_matrix_weighted(
    m: Condensed,
    weights: Option<&[f64]>,
    linkage: Linkage,
) -> Result<Dendrogram, EngineError> {
    let n = m.n();
    if n == 0 {
        return Err(EngineError::TooFewRecords { k: 1, n: 0 });
    }
    if linkage.needs_euclidean() {
        return Err(EngineError::NeedsEuclidean {
            linkage: linkage.name(),
        });
    }
    let sizes = vec![1usize; n];
    let steps = match linkage {
        Linkage::Single => prim(n, |i, j| m.get(i, j), false),
        _ => {
            let mut space = MatrixSpace {
                m,
                size: weights.map_or_else(|| vec![1.0; n], <[f64]>::to_vec),
                linkage,
            };
            chain(n, &mut space)
        }
    };
    Ok(label_steps(n, &sizes, steps, true))
}

/// Active clusters above which a chain step's scan and update are split
/// across threads.
const PARALLEL_SCAN_MIN: usize = 4096;

/// A record's distance to the tree so far, and the tree record it is from.
type Link = (f64, usize);

/// A merge of the clusters held in two slots, before ids are assigned.
type Step = (usize, usize, f64);

// ------------------------------------------------------------- single --

/// Prim's algorithm over the complete graph, distances on the fly.
fn mst_single(rows: &[Vec<f64>], metric: Metric) -> Vec<Step> {
    let n = rows.len();
    if n < 2 {
        return Vec::new();
    }
    // One contiguous buffer: the scan reads every remaining row once per
    // merge, so rows held as separate vectors would cost a pointer chase
    // each.
    let d = rows[0].len();
    let flat: Vec<f64> = rows.iter().flatten().copied().collect();
    let row_of = |j: usize| &flat[j * d..(j + 1) * d];
    // Euclidean candidates are compared by squared distance (the same
    // order, one square root per merge instead of one per pair).
    let squared = metric == Metric::Euclidean;
    if squared {
        return prim(n, Rows { flat: &flat, d }, true);
    }
    let dist = |i: usize, j: usize| metric.distance(row_of(i), row_of(j));
    prim(n, dist, false)
}

/// Distances Prim's sweep takes, one pair or four pairs from one record.
trait PairDistance: Sync {
    fn one(&self, i: usize, j: usize) -> f64;
    /// `one(i, j)` for each of four `j`: the same values, to the bit.
    fn four(&self, i: usize, js: [usize; 4]) -> [f64; 4] {
        js.map(|j| self.one(i, j))
    }
}

impl<F: Fn(usize, usize) -> f64 + Sync> PairDistance for F {
    fn one(&self, i: usize, j: usize) -> f64 {
        self(i, j)
    }
}

/// Squared Euclidean distances between rows of one buffer. Four pairs are
/// summed side by side, each in feature order as [`dist2`] sums (so the
/// same bits), which lets the processor overlap their additions instead of
/// waiting on one chain of them.
struct Rows<'a> {
    flat: &'a [f64],
    d: usize,
}

impl PairDistance for Rows<'_> {
    fn one(&self, i: usize, j: usize) -> f64 {
        let d = self.d;
        dist2(
            &self.flat[i * d..(i + 1) * d],
            &self.flat[j * d..(j + 1) * d],
        )
    }

    fn four(&self, i: usize, js: [usize; 4]) -> [f64; 4] {
        let d = self.d;
        let a = &self.flat[i * d..(i + 1) * d];
        let b = js.map(|j| &self.flat[j * d..(j + 1) * d]);
        let mut acc = [0.0f64; 4];
        for (f, &v) in a.iter().enumerate() {
            for l in 0..4 {
                let t = v - b[l][f];
                acc[l] += t * t;
            }
        }
        acc
    }
}

/// Prim's algorithm over `dist(i, j)`; with `squared`, the values are
/// squares of the heights. The records not yet in the tree are kept in one
/// shrinking list (a record joining is swapped out), so merge m measures
/// n - m distances, n²/2 in all; each pass updates every remaining
/// record's distance to the tree and finds the nearest in the same sweep,
/// in parallel over fixed chunks, the chunks' nearest reduced by (distance,
/// record) so ties go to the lowest record whatever the thread count.
/// O(n² d) time, O(n) memory beyond the rows.
fn prim<D: PairDistance>(n: usize, dist: D, squared: bool) -> Vec<Step> {
    const CHUNK: usize = 2048;
    let mut steps = Vec::with_capacity(n.saturating_sub(1));
    if n < 2 {
        return steps;
    }
    // `rest[p]` a record not in the tree; `best[p]`: its distance to the
    // tree and the tree record it is from.
    let mut rest: Vec<usize> = (1..n).collect();
    let mut best: Vec<Link> = vec![(f64::INFINITY, 0usize); n - 1];
    let mut current = 0;
    // (distance, record, place in `rest`): the nearer, ties to the lower
    // record.
    type Near = (f64, usize, usize);
    let nearer = |a: Near, b: Near| {
        if b.0 < a.0 || (b.0 == a.0 && b.1 < a.1) {
            b
        } else {
            a
        }
    };
    let none: Near = (f64::INFINITY, usize::MAX, usize::MAX);
    while !rest.is_empty() {
        let from = current;
        let sweep = |(c, (r, b)): (usize, (&[usize], &mut [Link]))| {
            let mut local = none;
            let mut take = |o: usize, j: usize, dd: f64, bj: &mut (f64, usize)| {
                if dd < bj.0 {
                    *bj = (dd, from);
                }
                local = nearer(local, (bj.0, j, c * CHUNK + o));
            };
            let quads = r.len() / 4;
            for q in 0..quads {
                let o = 4 * q;
                let js = [r[o], r[o + 1], r[o + 2], r[o + 3]];
                let dd = dist.four(from, js);
                for l in 0..4 {
                    take(o + l, js[l], dd[l], &mut b[o + l]);
                }
            }
            for o in 4 * quads..r.len() {
                take(o, r[o], dist.one(from, r[o]), &mut b[o]);
            }
            local
        };
        let (_, next, at) = if rest.len() >= PARALLEL_SCAN_MIN {
            (rest.par_chunks(CHUNK).zip(best.par_chunks_mut(CHUNK)))
                .enumerate()
                .map(sweep)
                .reduce(|| none, nearer)
        } else {
            (rest.chunks(CHUNK).zip(best.chunks_mut(CHUNK)))
                .enumerate()
                .map(sweep)
                .fold(none, nearer)
        };
        let (d, tree_end) = best[at];
        let height = if squared { d.sqrt() } else { d };
        steps.push((tree_end, next, height));
        rest.swap_remove(at);
        best.swap_remove(at);
        current = next;
    }
    steps
}

// ------------------------------------------------- condensed matrix --

/// What the nearest-neighbour chain needs from a linkage: distances
/// between active clusters, and merging.
trait ChainSpace {
    /// Distance between the clusters in slots x and y.
    fn distance(&self, x: usize, y: usize) -> f64;
    /// A value ordered as the distance, cheaper to compute (Ward's
    /// squared distance); the chain compares these.
    fn key(&self, x: usize, y: usize) -> f64 {
        self.distance(x, y)
    }
    /// The distance a key stands for.
    fn height(&self, key: f64) -> f64 {
        key
    }
    /// `key(x, y)` for four `y`: the same values, to the bit.
    fn key4(&self, x: usize, ys: [usize; 4]) -> [f64; 4] {
        ys.map(|y| self.key(x, y))
    }
    /// Merges slot `a` into slot `b` (a < b); `a` is retired afterwards.
    fn merge(&mut self, alive: &[usize], a: usize, b: usize);
}

/// The nearest-neighbour chain (Müllner 2011, algorithm NN-chain-linkage):
/// follows nearest neighbours until two are each other's nearest, merges
/// them into the higher slot, and goes on from the rest of the chain. The
/// previous chain element wins a tie, then the lowest slot.
fn chain<S: ChainSpace + Sync>(n: usize, space: &mut S) -> Vec<Step> {
    // The clusters still active, ascending; scans shrink as merges proceed.
    let mut alive: Vec<usize> = (0..n).collect();
    let mut steps = Vec::with_capacity(n.saturating_sub(1));
    let mut stack: Vec<usize> = Vec::new();
    while alive.len() > 1 {
        if stack.is_empty() {
            stack.push(alive[0]);
        }
        let x = stack[stack.len() - 1];
        let prev = if stack.len() >= 2 {
            Some(stack[stack.len() - 2])
        } else {
            None
        };
        let sp: &S = space;
        let better = |p: (usize, f64), q: (usize, f64)| {
            if q.1 < p.1 || (q.1 == p.1 && q.0 < p.0) {
                q
            } else {
                p
            }
        };
        let none = (usize::MAX, f64::INFINITY);
        // The nearest to x in a run of active slots, four at a time.
        let scan = |slots: &[usize]| {
            let mut found = none;
            let quads = slots.len() / 4;
            for q in 0..quads {
                let ys = [
                    slots[4 * q],
                    slots[4 * q + 1],
                    slots[4 * q + 2],
                    slots[4 * q + 3],
                ];
                let keys = sp.key4(x, ys);
                for (&y, &k) in ys.iter().zip(&keys) {
                    if y != x {
                        found = better(found, (y, k));
                    }
                }
            }
            for &y in &slots[4 * quads..] {
                if y != x {
                    found = better(found, (y, sp.key(x, y)));
                }
            }
            found
        };
        // Threads pay off only on long scans.
        let found = if alive.len() >= PARALLEL_SCAN_MIN {
            alive.par_chunks(1024).map(scan).reduce(|| none, better)
        } else {
            scan(&alive)
        };
        let (y, key) = match prev {
            // The previous element wins ties, which keeps the chain finite.
            Some(p) if space.key(x, p) <= found.1 => (p, space.key(x, p)),
            _ => found,
        };
        let h = space.height(key);
        if Some(y) == prev {
            stack.pop();
            stack.pop();
            let (a, b) = (x.min(y), x.max(y));
            steps.push((a, b, h));
            space.merge(&alive, a, b);
            if let Ok(at) = alive.binary_search(&a) {
                alive.remove(at);
            }
        } else {
            stack.push(y);
        }
    }
    steps
}

/// Complete, average and weighted linkage over a condensed matrix, updated
/// by the Lance-Williams formulas in the module documentation.
struct MatrixSpace {
    m: Condensed,
    size: Vec<f64>,
    linkage: Linkage,
}

impl ChainSpace for MatrixSpace {
    fn distance(&self, x: usize, y: usize) -> f64 {
        self.m.get(x, y)
    }

    fn merge(&mut self, alive: &[usize], a: usize, b: usize) {
        let (sa, sb) = (self.size[a], self.size[b]);
        let m = &self.m;
        let linkage = self.linkage;
        // New distances are computed in parallel (reads only), then written
        // in order; each value depends only on its own inputs.
        let update = |&i: &usize| {
            let (da, db) = (m.get(a, i), m.get(b, i));
            let v = match linkage {
                Linkage::Complete => da.max(db),
                Linkage::Average => (sa * da + sb * db) / (sa + sb),
                _ => (da + db) / 2.0,
            };
            (i, v)
        };
        let updates: Vec<(usize, f64)> = if alive.len() >= PARALLEL_SCAN_MIN {
            alive
                .par_iter()
                .filter(|&&i| i != a && i != b)
                .map(update)
                .collect()
        } else {
            alive
                .iter()
                .filter(|&&i| i != a && i != b)
                .map(update)
                .collect()
        };
        for (i, v) in updates {
            self.m.set(b, i, v);
        }
        self.size[b] = sa + sb;
    }
}

fn nn_chain_matrix(
    rows: &[Vec<f64>],
    sizes: &[f64],
    linkage: Linkage,
    metric: Metric,
) -> Vec<Step> {
    let mut space = MatrixSpace {
        m: Condensed::from_fn(rows.len(), |i, j| metric.distance(&rows[i], &rows[j])),
        size: sizes.to_vec(),
        linkage,
    };
    chain(rows.len(), &mut space)
}

/// Ward's linkage over stored centroids and sizes: no matrix. The
/// centroids sit in one buffer, d values each, so a scan reads memory in
/// sequence; the chain compares squared distances (one square root per
/// merge, not per pair).
struct WardSpace {
    centre: Vec<f64>,
    d: usize,
    size: Vec<f64>,
}

impl WardSpace {
    fn centre(&self, x: usize) -> &[f64] {
        &self.centre[x * self.d..(x + 1) * self.d]
    }
}

impl ChainSpace for WardSpace {
    fn distance(&self, x: usize, y: usize) -> f64 {
        self.key(x, y).sqrt()
    }

    fn key(&self, x: usize, y: usize) -> f64 {
        let (sx, sy) = (self.size[x], self.size[y]);
        2.0 * sx * sy / (sx + sy) * dist2(self.centre(x), self.centre(y))
    }

    fn key4(&self, x: usize, ys: [usize; 4]) -> [f64; 4] {
        // Four squared distances side by side, each in feature order as
        // `dist2` sums.
        let a = self.centre(x);
        let b = ys.map(|y| self.centre(y));
        let mut acc = [0.0f64; 4];
        for (f, &v) in a.iter().enumerate() {
            for l in 0..4 {
                let t = v - b[l][f];
                acc[l] += t * t;
            }
        }
        let sx = self.size[x];
        let mut out = [0.0; 4];
        for l in 0..4 {
            let sy = self.size[ys[l]];
            out[l] = 2.0 * sx * sy / (sx + sy) * acc[l];
        }
        out
    }

    fn height(&self, key: f64) -> f64 {
        key.sqrt()
    }

    fn merge(&mut self, _alive: &[usize], a: usize, b: usize) {
        let (sa, sb) = (self.size[a], self.size[b]);
        let d = self.d;
        for f in 0..d {
            let (u, v) = (self.centre[a * d + f], self.centre[b * d + f]);
            self.centre[b * d + f] = (sa * u + sb * v) / (sa + sb);
        }
        self.size[b] = sa + sb;
    }
}

fn nn_chain_ward(rows: &[Vec<f64>], sizes: &[f64]) -> Vec<Step> {
    let mut space = WardSpace {
        centre: rows.iter().flatten().copied().collect(),
        d: rows.first().map_or(0, Vec::len),
        size: sizes.to_vec(),
    };
    chain(rows.len(), &mut space)
}

// ------------------------------------------------------------ generic --

/// A binary min-heap over keys `0..len` with a value each, whose values can
/// be changed in place. Children of position i sit at 2i + 1 and 2i + 2;
/// equal values never swap, so the order among ties follows the positions,
/// which makes the generic algorithm's choices among equal distances fixed.
struct KeyedHeap {
    index_of: Vec<usize>,
    key_at: Vec<usize>,
    values: Vec<f64>,
    len: usize,
}

impl KeyedHeap {
    fn new(values: Vec<f64>) -> KeyedHeap {
        let len = values.len();
        let mut h = KeyedHeap {
            index_of: (0..len).collect(),
            key_at: (0..len).collect(),
            values,
            len,
        };
        for i in (0..len / 2).rev() {
            h.sift_down(i);
        }
        h
    }

    fn min(&self) -> (usize, f64) {
        (self.key_at[0], self.values[0])
    }

    fn remove_min(&mut self) {
        self.swap(0, self.len - 1);
        self.len -= 1;
        self.sift_down(0);
    }

    fn change(&mut self, key: usize, value: f64) {
        let at = self.index_of[key];
        let old = self.values[at];
        self.values[at] = value;
        if value < old {
            self.sift_up(at);
        } else {
            self.sift_down(at);
        }
    }

    fn sift_up(&mut self, mut at: usize) {
        while at > 0 {
            let parent = (at - 1) / 2;
            if self.values[parent] > self.values[at] {
                self.swap(at, parent);
                at = parent;
            } else {
                break;
            }
        }
    }

    fn sift_down(&mut self, mut at: usize) {
        loop {
            let mut child = 2 * at + 1;
            if child >= self.len {
                break;
            }
            if child + 1 < self.len && self.values[child + 1] < self.values[child] {
                child += 1;
            }
            if self.values[at] > self.values[child] {
                self.swap(at, child);
                at = child;
            } else {
                break;
            }
        }
    }

    fn swap(&mut self, i: usize, j: usize) {
        self.values.swap(i, j);
        self.key_at.swap(i, j);
        self.index_of[self.key_at[i]] = i;
        self.index_of[self.key_at[j]] = j;
    }
}

/// Müllner's generic algorithm over a condensed matrix, for centroid and
/// median linkage with the Lance-Williams updates
/// ```text
/// centroid  d(C, A∪B) = sqrt((|A| d(C,A)² + |B| d(C,B)² - |A||B| d(A,B)² / (|A|+|B|)) / (|A|+|B|))
/// median    d(C, A∪B) = sqrt(d(C,A)²/2 + d(C,B)²/2 - d(A,B)²/4)
/// ```
/// Each slot x below the last keeps a candidate neighbour above it and a
/// lower bound on its distance to every active slot above it, in a
/// [`KeyedHeap`]. The slot at the top whose bound its candidate meets
/// exactly holds a closest pair; any other is re-scanned (at most once per
/// remaining cluster, a fixed bound that guards against rounding).
fn generic_matrix(rows: &[Vec<f64>], sizes: &[f64], linkage: Linkage) -> Vec<Step> {
    let n = rows.len();
    let mut steps = Vec::with_capacity(n.saturating_sub(1));
    if n < 2 {
        return steps;
    }
    let mut d = Condensed::from_fn(rows.len(), |i, j| {
        Metric::Euclidean.distance(&rows[i], &rows[j])
    });
    // A merged-away slot has size 0; every live one is above 0.
    let mut size: Vec<f64> = sizes.to_vec();
    let nearest_above = |d: &Condensed, size: &[f64], x: usize| -> (usize, f64) {
        let mut best = (usize::MAX, f64::INFINITY);
        for j in x + 1..n {
            if size[j] > 0.0 && d.get(x, j) < best.1 {
                best = (j, d.get(x, j));
            }
        }
        best
    };
    let mut neighbour = vec![0usize; n - 1];
    let mut bound = vec![0.0; n - 1];
    for x in 0..n - 1 {
        (neighbour[x], bound[x]) = nearest_above(&d, &size, x);
    }
    let mut heap = KeyedHeap::new(bound.clone());
    for k in 0..n - 1 {
        let (mut x, mut h) = heap.min();
        let mut y = neighbour[x];
        for _ in 0..n - k {
            (x, h) = heap.min();
            y = neighbour[x];
            if h == d.get(x, y) {
                break;
            }
            (y, h) = nearest_above(&d, &size, x);
            neighbour[x] = y;
            bound[x] = h;
            heap.change(x, h);
        }
        heap.remove_min();
        steps.push((x, y, h));
        let (nx, ny) = (size[x], size[y]);
        size[y] += size[x];
        size[x] = 0.0;
        for z in 0..n {
            if size[z] == 0.0 || z == y {
                continue;
            }
            let (dx, dy) = (d.get(z, x), d.get(z, y));
            let v = match linkage {
                Linkage::Median => 0.5 * (dx * dx + dy * dy) - 0.25 * h * h,
                _ => ((nx * dx * dx + ny * dy * dy) - nx * ny * h * h / (nx + ny)) / (nx + ny),
            };
            // Rounding can leave a tiny negative where the true value is 0.
            d.set(z, y, v.max(0.0).sqrt());
        }
        for z in 0..x {
            if size[z] > 0.0 && neighbour[z] == x {
                neighbour[z] = y;
            }
        }
        for z in 0..y {
            if size[z] > 0.0 && d.get(z, y) < bound[z] {
                neighbour[z] = y;
                bound[z] = d.get(z, y);
                heap.change(z, bound[z]);
            }
        }
        if y < n - 1 {
            let (z, dz) = nearest_above(&d, &size, y);
            if z != usize::MAX {
                neighbour[y] = z;
                bound[y] = dz;
                heap.change(y, dz);
            }
        }
    }
    steps
}

// ------------------------------------------------------------- labels --

/// Turns slot merges into numbered merges: sorted by height when asked
/// (stable), ids by union-find, the smaller id first.
fn label_steps(n: usize, sizes: &[usize], mut steps: Vec<Step>, sorted: bool) -> Dendrogram {
    if sorted {
        steps.sort_by(|x, y| x.2.total_cmp(&y.2));
    }
    let mut parent: Vec<usize> = (0..2 * n).collect();
    let mut size: Vec<usize> = sizes.to_vec();
    size.resize(2 * n, 0);
    fn find(parent: &mut [usize], mut x: usize) -> usize {
        while parent[x] != x {
            parent[x] = parent[parent[x]];
            x = parent[x];
        }
        x
    }
    let mut merges = Vec::with_capacity(steps.len());
    for (i, (x, y, h)) in steps.into_iter().enumerate() {
        let (rx, ry) = (find(&mut parent, x), find(&mut parent, y));
        let id = n + i;
        parent[rx] = id;
        parent[ry] = id;
        size[id] = size[rx] + size[ry];
        merges.push(Merge {
            a: rx.min(ry),
            b: rx.max(ry),
            height: h,
            size: size[id],
        });
    }
    Dendrogram { n, merges }
}

impl Dendrogram {
    /// The partition into `k` segments: the state after the first `n - k`
    /// merges (undoing the last `k - 1`), numbered canonically (by size,
    /// ties to the segment holding the lowest record). `k` is clamped to
    /// `1..=n`.
    pub fn cut(&self, k: usize) -> Vec<u32> {
        let k = k.clamp(1, self.n.max(1));
        self.partition_after(self.n - k)
    }

    /// The partition that keeps only merges at or below `height`, in merge
    /// order (a merge above the height stops the cut, so an inversion
    /// below it is not taken).
    pub fn cut_at_height(&self, height: f64) -> Vec<u32> {
        let count = self
            .merges
            .iter()
            .take_while(|m| m.height <= height)
            .count();
        self.partition_after(count)
    }

    fn partition_after(&self, merges: usize) -> Vec<u32> {
        let n = self.n;
        let mut parent: Vec<usize> = (0..n + merges).collect();
        for (i, m) in self.merges.iter().take(merges).enumerate() {
            parent[m.a] = n + i;
            parent[m.b] = n + i;
        }
        let root = |mut x: usize| {
            while parent[x] != x {
                x = parent[x];
            }
            x
        };
        let roots: Vec<usize> = (0..n).map(root).collect();
        let mut ids: Vec<usize> = roots.clone();
        ids.sort_unstable();
        ids.dedup();
        let raw: Vec<u32> = roots
            .iter()
            .map(|r| ids.binary_search(r).unwrap_or(0) as u32)
            .collect();
        super::kmeans::canonical(&raw, ids.len()).0
    }

    /// How many merges are lower than the merge before them.
    pub fn inversions(&self) -> usize {
        self.merges
            .windows(2)
            .filter(|w| w[1].height < w[0].height)
            .count()
    }

    /// Pearson correlation between the records' distances and their
    /// cophenetic distances (the height of the merge that first joins
    /// them). Two passes over all pairs (means, then centred sums): O(n² d)
    /// time, O(n) memory.
    pub fn cophenetic_correlation(&self, data: ArrayView2<'_, f64>, metric: Metric) -> f64 {
        self.cophenetic_estimate(data, metric, usize::MAX, 0, 0).0
    }

    /// The cophenetic correlation over the pairs of `sample` records drawn
    /// uniformly without replacement from stream `stream` of `seed`: an
    /// estimate whose cost, O(n + s² d), does not grow with the square of
    /// the records. Returns the correlation and the records used (all of
    /// them, exactly, when there are no more than `sample`).
    pub fn cophenetic_estimate(
        &self,
        data: ArrayView2<'_, f64>,
        metric: Metric,
        sample: usize,
        seed: u64,
        stream: u64,
    ) -> (f64, usize) {
        let standard = data.as_standard_layout();
        let rows: Vec<&[f64]> = standard
            .as_slice()
            .expect("a standard-layout array is one slice")
            .chunks_exact(data.ncols().max(1))
            .collect();
        let dist = |i: usize, j: usize| metric.distance(rows[i], rows[j]);
        self.cophenetic_estimate_by(&dist, sample, seed, stream)
    }

    /// As [`Dendrogram::cophenetic_estimate`], with the leaves' distances
    /// given by `dist(i, j)` (a dissimilarity matrix, say).
    pub fn cophenetic_estimate_by(
        &self,
        dist: &(dyn Fn(usize, usize) -> f64 + Sync),
        sample: usize,
        seed: u64,
        stream: u64,
    ) -> (f64, usize) {
        if self.n <= sample {
            return (self.cophenetic_over(dist, None), self.n);
        }
        let mut rng = super::rng::Stream::new(seed, stream);
        let mut pool: Vec<usize> = (0..self.n).collect();
        for t in 0..sample {
            let pick = t + rng.below(self.n - t);
            pool.swap(t, pick);
        }
        let mut chosen = vec![false; self.n];
        pool[..sample].iter().for_each(|&i| chosen[i] = true);
        (self.cophenetic_over(dist, Some(&chosen)), sample)
    }

    /// The correlation over the pairs of the `chosen` leaves (all leaves
    /// when `None`).
    fn cophenetic_over(
        &self,
        dist: &(dyn Fn(usize, usize) -> f64 + Sync),
        chosen: Option<&[bool]>,
    ) -> f64 {
        let leaves = chosen.map_or(self.n, |c| c.iter().filter(|&&b| b).count());
        let count = (leaves * leaves.saturating_sub(1) / 2) as f64;
        let [sx, sy, _] = self.pair_sums(dist, chosen, &|x, y| [x, y, 0.0]);
        let (mx, my) = (sx / count, sy / count);
        let [sxy, sxx, syy] = self.pair_sums(dist, chosen, &|x, y| {
            [
                (x - mx) * (y - my),
                (x - mx) * (x - mx),
                (y - my) * (y - my),
            ]
        });
        if sxx == 0.0 || syy == 0.0 {
            return f64::NAN;
        }
        sxy / (sxx.sqrt() * syy.sqrt())
    }

    /// Sums `f(distance, cophenetic distance)` over all pairs of the chosen
    /// records, merge by merge; each merge's pairs are summed in parallel
    /// by row and the parts added in a fixed order.
    fn pair_sums(
        &self,
        dist: &(dyn Fn(usize, usize) -> f64 + Sync),
        chosen: Option<&[bool]>,
        f: &(dyn Fn(f64, f64) -> [f64; 3] + Sync),
    ) -> [f64; 3] {
        let n = self.n;
        let mut members: Vec<Vec<usize>> = (0..n)
            .map(|i| {
                if chosen.is_none_or(|c| c[i]) {
                    vec![i]
                } else {
                    Vec::new()
                }
            })
            .collect();
        members.resize(n + self.merges.len(), Vec::new());
        let mut total = [0.0; 3];
        for (i, m) in self.merges.iter().enumerate() {
            let left = std::mem::take(&mut members[m.a]);
            let right = std::mem::take(&mut members[m.b]);
            let parts: Vec<[f64; 3]> = left
                .par_iter()
                .map(|&x| {
                    let mut s = [0.0; 3];
                    for &y in &right {
                        let v = f(dist(x, y), m.height);
                        for (acc, add) in s.iter_mut().zip(v) {
                            *acc += add;
                        }
                    }
                    s
                })
                .collect();
            for p in parts {
                for (acc, add) in total.iter_mut().zip(p) {
                    *acc += add;
                }
            }
            let mut joined = left;
            joined.extend(right);
            members[n + i] = joined;
        }
        total
    }

    /// The tree in Newick format, leaves named by `names`. Branch lengths
    /// are height differences (a negative one, below an inversion, is
    /// written as 0). Built without recursion, so deep trees are safe.
    pub fn newick(&self, names: &[String]) -> String {
        let n = self.n;
        if n == 0 {
            return ";".into();
        }
        let height = |id: usize| {
            if id < n {
                0.0
            } else {
                self.merges[id - n].height
            }
        };
        let mut text: Vec<String> = Vec::with_capacity(n + self.merges.len());
        for i in 0..n {
            text.push(newick_name(names.get(i).map(String::as_str).unwrap_or("")));
        }
        for (i, m) in self.merges.iter().enumerate() {
            let h = m.height;
            let left = std::mem::take(&mut text[m.a]);
            let right = std::mem::take(&mut text[m.b]);
            let len = |id: usize| (h - height(id)).max(0.0);
            text.push(format!("({left}:{},{right}:{})", len(m.a), len(m.b)));
            debug_assert_eq!(text.len(), n + i + 1);
        }
        let root = text.pop().unwrap_or_default();
        format!("{root};")
    }
}

/// A leaf name quoted for Newick when it holds special characters.
fn newick_name(name: &str) -> String {
    if name
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-' || c == '.')
    {
        name.to_string()
    } else {
        format!("'{}'", name.replace('\'', "''"))
    }
}

/// The slow, obvious agglomeration the fast algorithms are tested
/// against: a full matrix, every step a scan for the closest active pair
/// (lowest slots among ties), Lance-Williams updates for every linkage
/// (Ward's and the centroid's in their squared-distance forms). O(n³) time,
/// O(n²) memory; for tests only. Merge order is the order found, not
/// sorted.
pub fn linkage_naive(data: ArrayView2<'_, f64>, linkage: Linkage, metric: Metric) -> Dendrogram {
    let rows: Vec<Vec<f64>> = data.outer_iter().map(|r| r.to_vec()).collect();
    let n = rows.len();
    let mut d = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..n {
            d[i][j] = metric.distance(&rows[i], &rows[j]);
        }
    }
    let mut size = vec![1.0; n];
    let mut active = vec![true; n];
    let mut steps = Vec::new();
    for _ in 1..n {
        let mut best = (0, 0, f64::INFINITY);
        for i in 0..n {
            for j in i + 1..n {
                if active[i] && active[j] && d[i][j] < best.2 {
                    best = (i, j, d[i][j]);
                }
            }
        }
        let (a, b, h) = best;
        steps.push((a, b, h));
        let (sa, sb) = (size[a], size[b]);
        for c in 0..n {
            if !active[c] || c == a || c == b {
                continue;
            }
            let (da, db, sc) = (d[a][c], d[b][c], size[c]);
            let v = match linkage {
                Linkage::Single => da.min(db),
                Linkage::Complete => da.max(db),
                Linkage::Average => (sa * da + sb * db) / (sa + sb),
                Linkage::Weighted => (da + db) / 2.0,
                Linkage::Ward => (((sa + sc) * da * da + (sb + sc) * db * db - sc * h * h)
                    / (sa + sb + sc))
                    .max(0.0)
                    .sqrt(),
                Linkage::Centroid => ((sa * da * da + sb * db * db - sa * sb * h * h / (sa + sb))
                    / (sa + sb))
                    .max(0.0)
                    .sqrt(),
                Linkage::Median => (0.5 * (da * da + db * db) - 0.25 * h * h).max(0.0).sqrt(),
            };
            d[b][c] = v;
            d[c][b] = v;
        }
        size[b] = sa + sb;
        active[a] = false;
    }
    let sorted = !matches!(linkage, Linkage::Centroid | Linkage::Median);
    label_steps(n, &vec![1; n], steps, sorted)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn a_tree_over_a_matrix_is_the_tree_over_the_rows_it_came_from() {
        let x = array![
            [0.0, 1.0],
            [1.5, 0.2],
            [10.0, 3.0],
            [11.0, 2.5],
            [30.0, 0.0],
            [4.0, 4.0],
            [12.5, 1.0]
        ];
        let n = x.nrows();
        for l in [
            Linkage::Single,
            Linkage::Complete,
            Linkage::Average,
            Linkage::Weighted,
        ] {
            let rows = linkage(x.view(), l, Metric::Manhattan).unwrap();
            let m = Condensed::from_fn(n, |i, j| {
                Metric::Manhattan
                    .distance(x.row(i).as_slice().unwrap(), x.row(j).as_slice().unwrap())
            });
            assert_eq!(linkage_matrix(m, l).unwrap().merges, rows.merges, "{l:?}");
        }
        let m = Condensed::from_fn(n, |_, _| 1.0);
        assert!(linkage_matrix(m, Linkage::Ward).is_err());
    }

    #[test]
    fn a_small_tree_cuts_into_its_obvious_groups() {
        let x = array![[0.0], [1.0], [10.0], [11.0], [30.0]];
        let t = linkage(x.view(), Linkage::Average, Metric::Euclidean).unwrap();
        assert_eq!(t.merges.len(), 4);
        assert_eq!(
            t.merges[0],
            Merge {
                a: 0,
                b: 1,
                height: 1.0,
                size: 2
            }
        );
        assert_eq!(
            t.merges[1],
            Merge {
                a: 2,
                b: 3,
                height: 1.0,
                size: 2
            }
        );
        assert_eq!(t.cut(3), vec![0, 0, 1, 1, 2]);
        assert_eq!(t.cut(1), vec![0; 5]);
        assert_eq!(t.cut(5), vec![0, 1, 2, 3, 4]);
        assert_eq!(t.cut_at_height(1.0), vec![0, 0, 1, 1, 2]);
    }

    #[test]
    fn newick_writes_branch_lengths_and_quotes_odd_names() {
        let x = array![[0.0], [2.0], [5.0]];
        let t = linkage(x.view(), Linkage::Single, Metric::Euclidean).unwrap();
        let names = vec!["a".to_string(), "b c".to_string(), "d".to_string()];
        assert_eq!(t.newick(&names), "(d:3,(a:2,'b c':2):1);");
    }

    #[test]
    fn ward_refuses_other_distances() {
        let x = array![[0.0, 1.0], [1.0, 0.0]];
        let e = linkage(x.view(), Linkage::Ward, Metric::Manhattan).unwrap_err();
        assert_eq!(e, EngineError::NeedsEuclidean { linkage: "ward" });
    }

    #[test]
    fn centroid_linkage_reports_its_inversions() {
        // Worked by hand: an equilateral triangle of side 2 merges two
        // corners at 2, then the third corner sits sqrt(3) from their
        // midpoint: a lower second merge.
        let x = array![[0.0, 0.0], [2.0, 0.0], [1.0, 3f64.sqrt()]];
        let t = linkage(x.view(), Linkage::Centroid, Metric::Euclidean).unwrap();
        assert!((t.merges[0].height - 2.0).abs() < 1e-12);
        assert!((t.merges[1].height - 3f64.sqrt()).abs() < 1e-12);
        assert_eq!(t.inversions(), 1);
    }

    #[test]
    fn one_record_makes_an_empty_tree() {
        let x = array![[4.0, 2.0]];
        for l in Linkage::ALL {
            let t = linkage(x.view(), l, Metric::Euclidean).unwrap();
            assert!(t.merges.is_empty());
            assert_eq!(t.cut(1), vec![0]);
        }
    }
}
