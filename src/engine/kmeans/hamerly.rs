//! The assignment step with Hamerly's bounds: the same labels as the
//! exhaustive step, with most distance computations skipped.
//!
//! # Reference
//! G. Hamerly, "Making k-means even faster", SIAM International Conference
//! on Data Mining, 2010. Each record keeps an upper bound `u` on the
//! distance to its own centre and a lower bound `l` on the distance to
//! every other centre. After the centres move by `δ_j`, `u += δ_own` and
//! `l -= max_{j ≠ own} δ_j` keep them valid. With `s_own` half the distance
//! from the own centre to the nearest other centre, a record whose
//! `u < max(s_own, l)` cannot have a nearer centre and is skipped; else `u`
//! is made exact and the test repeated; else every centre is measured.
//!
//! # Complexity
//! O(n + k² d) per round for the bounds and the centre gaps, plus O(k d)
//! for each record not skipped; O(n) memory for the bounds.
//!
//! # Same labels as the exhaustive step
//! A record is skipped only when the bounds prove its own centre strictly
//! nearer than every other. Rounding cannot break that proof: every bound
//! is widened by a relative margin of [`MARGIN`] at each update, far above
//! the few units in the last place a distance carries, so a record whose
//! centres are nearly tied is always measured, and measured records are
//! labelled by the exhaustive rule (nearest by squared distance, ties to
//! the lowest centre number). Tests check the labels, centres and within-SS
//! against the exhaustive step, bit for bit.

use super::super::dist2;
use rayon::prelude::*;

/// Relative widening of every bound at every update.
const MARGIN: f64 = 1e-9;

/// Records per chunk of the parallel step; fixed, so the work split never
/// depends on the thread count.
const CHUNK: usize = 4096;

/// Records above which the step is split across threads.
const PARALLEL_MIN: usize = 16_384;

/// Each record's bounds; invalid until the first exhaustive step.
pub(super) struct Bounds {
    upper: Vec<f64>,
    lower: Vec<f64>,
    valid: bool,
}

impl Bounds {
    pub(super) fn new(n: usize) -> Bounds {
        Bounds {
            upper: vec![f64::INFINITY; n],
            lower: vec![0.0; n],
            valid: false,
        }
    }

    /// Forgets the bounds (labels were changed outside the step); the next
    /// step measures every record.
    pub(super) fn invalidate(&mut self) {
        self.valid = false;
    }
}

/// What the step needs about the centres: their number, how far each moved
/// since the bounds were set, and half the gap to the nearest other.
struct Centres {
    /// `moved[j]`, widened; zero on the first step.
    moved: Vec<f64>,
    /// The largest and second-largest movement, and the centre of the
    /// largest.
    top: (f64, f64, usize),
    /// Half the distance to the nearest other centre, narrowed.
    half_gap: Vec<f64>,
}

impl Centres {
    fn new(c: &[f64], previous: &[f64], d: usize) -> Centres {
        let k = c.len() / d;
        let row = |j: usize| &c[j * d..(j + 1) * d];
        let moved: Vec<f64> = (0..k)
            .map(|j| dist2(row(j), &previous[j * d..(j + 1) * d]).sqrt() * (1.0 + MARGIN))
            .collect();
        let mut top = (0.0, 0.0, usize::MAX);
        for (j, &m) in moved.iter().enumerate() {
            if m > top.0 {
                top = (m, top.0, j);
            } else if m > top.1 {
                top.1 = m;
            }
        }
        let half_gap = (0..k)
            .map(|j| {
                let nearest = (0..k)
                    .filter(|&o| o != j)
                    .map(|o| dist2(row(j), row(o)))
                    .fold(f64::INFINITY, f64::min);
                0.5 * nearest.sqrt() * (1.0 - MARGIN)
            })
            .collect();
        Centres {
            moved,
            top,
            half_gap,
        }
    }

    /// The largest movement of any centre other than `own`.
    fn moved_other(&self, own: usize) -> f64 {
        if own == self.top.2 {
            self.top.1
        } else {
            self.top.0
        }
    }
}

/// Labels every record with its nearest centre, as the exhaustive step
/// would; returns how many labels changed. `previous` holds the centres the
/// bounds were last updated against (ignored while the bounds are invalid).
pub(super) fn assign(
    x: &[f64],
    d: usize,
    centroids: &[f64],
    previous: &[f64],
    labels: &mut [u32],
    bounds: &mut Bounds,
) -> usize {
    let centres = Centres::new(centroids, previous, d);
    let fresh = !bounds.valid;
    bounds.valid = true;
    let work = |start: usize, ls: &mut [u32], us: &mut [f64], lo: &mut [f64]| {
        let mut changed = 0;
        for (off, ((l, u), low)) in ls
            .iter_mut()
            .zip(us.iter_mut())
            .zip(lo.iter_mut())
            .enumerate()
        {
            let i = start + off;
            let row = &x[i * d..(i + 1) * d];
            if !fresh {
                let own = *l as usize;
                *u = (*u + centres.moved[own]) * (1.0 + MARGIN);
                *low = (*low - centres.moved_other(own)) * (1.0 - MARGIN);
                let limit = centres.half_gap[own].max(*low);
                if *u < limit {
                    continue;
                }
                *u = dist2(row, &centroids[own * d..(own + 1) * d]).sqrt() * (1.0 + MARGIN);
                if *u < limit {
                    continue;
                }
            }
            let (best, d1, d2) = super::nearest_two(row, centroids, d);
            changed += usize::from(*l != best);
            *l = best;
            *u = d1.sqrt() * (1.0 + MARGIN);
            *low = d2.sqrt() * (1.0 - MARGIN);
        }
        changed
    };
    let n = labels.len();
    if n >= PARALLEL_MIN {
        labels
            .par_chunks_mut(CHUNK)
            .zip(bounds.upper.par_chunks_mut(CHUNK))
            .zip(bounds.lower.par_chunks_mut(CHUNK))
            .enumerate()
            .map(|(c, ((ls, us), lo))| work(c * CHUNK, ls, us, lo))
            .sum()
    } else {
        work(0, labels, &mut bounds.upper, &mut bounds.lower)
    }
}
