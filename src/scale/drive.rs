//! The driver of a k-means fit whose rounds run where the records are: a
//! database, memory, later a cluster. It holds only the sample and the
//! centres; each round is one call that returns the exact sums of
//! [`crate::engine::exact`], so every engine that forms the same doubles
//! gives the same fit, bit for bit, however it splits the records.
//!
//! # Method
//! 1. The sample is drawn by rank ([`super::sample`]): the same records in
//!    the same order on every engine, whatever the row order.
//! 2. Every restart runs to convergence on the sample, in memory, and the
//!    [`REFINED`] best (lowest within-SS on the sample) are kept
//!    ([`best_starts`]), as the in-memory sampled fit does.
//! 3. Each is refined by Lloyd's iterations over every record, one
//!    [`Rounds::round`] per iteration: new centres are the exact sums over
//!    the counts (a segment that drew no record keeps its centre), until
//!    the centres move by at most the tolerance (the sum over segments of
//!    the squared move, against the tolerance times the sample's spread)
//!    or the round cap is reached. One more round measures the final
//!    centres' within-SS and sizes.
//! 4. The refinement with the lowest within-SS is kept (ties to the
//!    better sample rank).
//!
//! This is the sampled fit of `crate::engine::kmeans` with two
//! differences that make it engine-neutral: the sample is drawn by key
//! rank rather than by record number, and the refinement sums exactly and
//! keeps an emptied segment's centre rather than refilling it from the
//! farthest record (which needs every record's distance in order).
//!
//! # Cost
//! Restarts: O(restarts · rounds · s k d) here. Refinement: [`REFINED`] ·
//! (rounds + 1) calls of O(n k d) each in the engine; k (d + 2) numbers
//! come back per call.

use crate::engine::exact::{self, RoundSums, Shifts};
use crate::engine::kmeans::{best_starts, KMeansSettings, REFINED};
use crate::engine::EngineError;
use ndarray::ArrayView2;

/// Something that runs one exact Lloyd round over every record.
pub trait Rounds {
    type Error;
    /// Places every record at its nearest of `centres` (k rows of d in one
    /// slice; ties to the lower number) and returns the exact sums.
    fn round(&mut self, centres: &[f64]) -> Result<RoundSums, Self::Error>;
}

/// The records in memory, summed in parallel parts.
pub struct InMemory<'a> {
    pub data: ArrayView2<'a, f64>,
    pub shifts: &'a Shifts,
}

impl Rounds for InMemory<'_> {
    type Error = std::convert::Infallible;
    fn round(&mut self, centres: &[f64]) -> Result<RoundSums, Self::Error> {
        Ok(exact::round(self.data, centres, self.shifts))
    }
}

/// One refinement's outcome.
#[derive(Debug, Clone, PartialEq)]
pub struct Refined {
    /// The sample restart it started from.
    pub restart: usize,
    /// How many restarts reached the same partition of the sample.
    pub alike: usize,
    /// k rows of d, in the restart's own numbering.
    pub centres: Vec<f64>,
    /// Records per segment against the final centres.
    pub sizes: Vec<u64>,
    /// The within-segment sum of squares against the final centres.
    pub within: f64,
    /// Centre updates made.
    pub rounds: usize,
    pub converged: bool,
}

/// Why a fit could not be made.
#[derive(Debug, thiserror::Error)]
pub enum FitError<E> {
    #[error(transparent)]
    Engine(#[from] EngineError),
    #[error("a round failed: {0}")]
    Round(E),
}

/// Fits `settings.k` segments: restarts on `sample` (records in rank
/// order, as rows), the best refined by `engine` over every record. The
/// tolerance is relative to the sample's spread. Returns every refinement,
/// the kept one first.
pub fn fit<R: Rounds>(
    sample: ArrayView2<'_, f64>,
    settings: &KMeansSettings,
    shifts: &Shifts,
    engine: &mut R,
) -> Result<Vec<Refined>, FitError<R::Error>> {
    let starts = best_starts(sample, settings)?;
    let limit = settings.tolerance * spread(sample);
    let mut refined = Vec::with_capacity(REFINED);
    for start in starts {
        let mut r = refine(engine, start.centres, shifts, settings.max_rounds, limit)
            .map_err(FitError::Round)?;
        r.restart = start.restart;
        r.alike = start.alike;
        refined.push(r);
    }
    // Lowest within-SS first; a tie keeps the better sample rank (a
    // stable sort).
    refined.sort_by(|a, b| a.within.total_cmp(&b.within));
    Ok(refined)
}

/// Lloyd's iterations from `centres` through `engine` (see the module
/// documentation), at most `max_rounds` updates, stopping once the centres
/// move by at most `limit`.
pub fn refine<R: Rounds>(
    engine: &mut R,
    mut centres: Vec<f64>,
    shifts: &Shifts,
    max_rounds: usize,
    limit: f64,
) -> Result<Refined, R::Error> {
    let d = shifts.features.len().max(1);
    let mut rounds = 0;
    let mut converged = false;
    while rounds < max_rounds {
        let sums = engine.round(&centres)?;
        let next = sums.centres(shifts, &centres);
        let moved: f64 = centres
            .chunks_exact(d)
            .zip(next.chunks_exact(d))
            .map(|(a, b)| crate::engine::dist2(a, b))
            .sum();
        centres = next;
        rounds += 1;
        if moved <= limit {
            converged = true;
            break;
        }
    }
    let last = engine.round(&centres)?;
    Ok(Refined {
        restart: 0,
        alike: 0,
        within: last.within(shifts),
        sizes: last.counts,
        centres,
        rounds,
        converged,
    })
}

/// The records' mean squared distance to their mean: what the tolerance
/// is relative to (as in the in-memory fit, over the sample here).
fn spread(sample: ArrayView2<'_, f64>) -> f64 {
    let (n, d) = sample.dim();
    if n == 0 {
        return 0.0;
    }
    let mean: Vec<f64> = (0..d)
        .map(|j| sample.column(j).iter().sum::<f64>() / n as f64)
        .collect();
    sample
        .rows()
        .into_iter()
        .map(|r| {
            r.iter()
                .zip(&mean)
                .map(|(x, m)| (x - m) * (x - m))
                .sum::<f64>()
        })
        .sum::<f64>()
        / n as f64
}
