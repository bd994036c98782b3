//! Restarts on a sample, the best refined on every record: k-means for
//! files of millions of records, where ten full-batch restarts per k cost
//! minutes each.
//!
//! # Method
//! 1. A seeded simple random sample of `s` records is drawn in one pass
//!    (selection sampling: record `i` is taken with probability
//!    `(s - taken) / (n - i)`, which gives exactly `s` records, every
//!    subset equally likely, in record order; D. Knuth, *The Art of Computer
//!    Programming* vol. 2, 3.4.2, Algorithm S). The same sample serves
//!    every k.
//! 2. Every restart (its own seeded stream, as in full batch) runs to
//!    convergence on the sample.
//! 3. The [`REFINED`] restarts with the lowest within-SS on the sample
//!    (ties to the lower restart number) are refined: Lloyd's iterations
//!    over every record, starting from their sample centres. The one with
//!    the lowest within-SS over every record is kept (ties to the better
//!    sample rank).
//!
//! Starting the full iterations from centres found on samples is the idea
//! of P. Bradley and U. Fayyad, "Refining initial points for k-means
//! clustering", ICML 1998; here the samples' solutions are ranked by their
//! own within-SS instead of being clustered again, and several are refined.
//!
//! # Complexity
//! O(n) to draw the sample, the restarts O(s k d) per round, then
//! [`REFINED`] refinements at O(n k d) per round (fewer with the bounds),
//! run in parallel. Memory: the sample's rows (s d values) beside the data,
//! and O(n) per refinement.
//!
//! A given start (last run's centres) is refined on every record too,
//! after the sample's best.
//!
//! # What is reported
//! `restarts_at_best` counts the restarts that reached, on the sample, the
//! same partition of the sample as the restart whose refinement was kept;
//! `best_restart` is that restart's number; rounds and convergence are the
//! refinement's.

use super::{canonical, finish, partition_hash, Problem, Restart};
use crate::engine::{rng::Stream, stop, weights::Weights, EngineError};
use rayon::prelude::*;

/// How many of the best sample restarts are refined on every record.
pub const REFINED: usize = 3;

/// The stream the sample is drawn from; restarts use `(k << 32) | r`, which
/// never sets the top bits.
const SAMPLE_STREAM: u64 = (1 << 63) | (1 << 61);

/// Fits `whole`'s settings with restarts on a sample of `s < n` records.
pub(super) fn fit(whole: &Problem<'_>, s: usize) -> Result<super::KMeansFit, EngineError> {
    let (n, d, settings) = (whole.n, whole.d, whole.settings);
    let k = settings.k;
    if k > s {
        return Err(EngineError::TooFewRecords { k, n: s });
    }
    let picked = draw(n, s, &mut Stream::new(settings.seed, SAMPLE_STREAM));
    let mut rows = Vec::with_capacity(s * d);
    for &i in &picked {
        rows.extend_from_slice(whole.row(i));
    }
    let weights = whole.w.select(&picked);
    let w = Weights::maybe(weights.as_deref());
    let sample = whole.over(&rows, w, s);

    let (tried, ranked) = ranked_restarts(&sample);
    // A given start is refined on every record directly, after the best
    // sample restarts (so ties go to them).
    let starts: Vec<(usize, Vec<f64>)> = ranked
        .iter()
        .map(|&r| (r, tried[r].2.clone()))
        .chain(whole.given_start().map(|c| (settings.restarts, c.to_vec())))
        .collect();
    let refined: Vec<Restart> = starts
        .par_iter()
        .map(|(_, c)| whole.lloyd(c.clone(), vec![0u32; n], vec![0.0; n], true))
        .collect();
    if stop::requested() {
        return Err(EngineError::Stopped);
    }
    let mut best = 0;
    for (i, run) in refined.iter().enumerate() {
        if run.inertia < refined[best].inertia {
            best = i;
        }
    }
    let restart = starts[best].0;
    let at_best = match tried.get(restart) {
        Some(kept) => tried.iter().filter(|t| t.1 == kept.1).count(),
        // The given start won; it was not run on the sample.
        None => 1,
    };
    let run = refined
        .into_iter()
        .nth(best)
        .ok_or(EngineError::BadK { k })?;
    finish(run, d, settings, restart, at_best, Some(s))
}

/// A restart run on the sample: its within-SS, the hash of its partition,
/// its centres.
type Tried = (f64, u64, Vec<f64>);

/// Every restart of `sample`'s settings, run on the sample in parallel:
/// each one's within-SS, partition hash and centres; and the numbers of
/// the [`REFINED`] best, lowest within-SS first (ties to the lower
/// number).
fn ranked_restarts(sample: &Problem<'_>) -> (Vec<Tried>, Vec<usize>) {
    let k = sample.settings.k;
    let tried: Vec<Tried> = (0..sample.settings.restarts)
        .into_par_iter()
        .map(|r| {
            if stop::requested() {
                return (f64::INFINITY, 0, Vec::new());
            }
            let run = sample.restart(r);
            let labels = canonical(&run.labels, k).0;
            (run.inertia, partition_hash(&labels), run.centroids)
        })
        .collect();
    let mut ranked: Vec<usize> = (0..tried.len()).collect();
    ranked.sort_by(|&a, &b| tried[a].0.total_cmp(&tried[b].0).then(a.cmp(&b)));
    ranked.truncate(REFINED);
    (tried, ranked)
}

/// A restart that is worth refining on every record: its number, its
/// centres (k rows of d, in the restart's own numbering) and its
/// within-SS on the sample.
#[derive(Debug, Clone, PartialEq)]
pub struct Start {
    pub restart: usize,
    pub centres: Vec<f64>,
    pub inertia: f64,
    /// How many restarts reached the same partition of the sample.
    pub alike: usize,
}

/// The [`REFINED`] best restarts of `settings` on `sample` (records as
/// rows, already drawn: `settings.sample` is not used), best first: the
/// first half of a sampled fit, for a driver that refines them where the
/// records live (`crate::scale`). O(restarts · rounds · s k d).
pub fn best_starts(
    sample: ndarray::ArrayView2<'_, f64>,
    settings: &super::KMeansSettings,
) -> Result<Vec<Start>, EngineError> {
    let (s, d) = sample.dim();
    let k = settings.k;
    if k == 0 || d == 0 {
        return Err(EngineError::BadK { k });
    }
    if k > s {
        return Err(EngineError::TooFewRecords { k, n: s });
    }
    let rows: Vec<f64> = sample.iter().copied().collect();
    let spread = super::Spread::of_rows(&rows, Weights::NONE, s, d);
    let problem = Problem::new(
        &rows,
        Weights::NONE,
        (s, d),
        settings,
        super::Search::Bounded,
        spread,
    );
    let (tried, ranked) = ranked_restarts(&problem);
    if stop::requested() {
        return Err(EngineError::Stopped);
    }
    Ok(ranked
        .into_iter()
        .map(|r| Start {
            restart: r,
            centres: tried[r].2.clone(),
            inertia: tried[r].0,
            alike: tried.iter().filter(|t| t.1 == tried[r].1).count(),
        })
        .collect())
}

/// `s` of the record numbers `0..n` (`s <= n`), uniformly, in ascending
/// order, in one pass (Algorithm S; see the module documentation).
pub(crate) fn draw(n: usize, s: usize, stream: &mut Stream) -> Vec<usize> {
    let mut picked = Vec::with_capacity(s);
    for i in 0..n {
        let left = s - picked.len();
        if left == 0 {
            break;
        }
        // Taken with probability left / (n - i); once left == n - i every
        // remaining record is taken (the draw is below 1).
        if ((n - i) as f64) * stream.unit() < left as f64 {
            picked.push(i);
        }
    }
    picked
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_draw_takes_exactly_s_distinct_records_in_order() {
        for (n, s) in [(10, 10), (10, 0), (1000, 37), (5, 1)] {
            let got = draw(n, s, &mut Stream::new(4, 9));
            assert_eq!(got.len(), s);
            assert!(got.windows(2).all(|w| w[0] < w[1]));
            assert!(got.iter().all(|&i| i < n));
        }
    }

    #[test]
    fn every_record_is_equally_likely_to_be_drawn() {
        // 20,000 draws of 3 from 6: each record expected 10,000 times;
        // the binomial standard deviation is about 71, so 5 of them is 355.
        let mut counts = [0usize; 6];
        let mut stream = Stream::new(1, 2);
        for _ in 0..20_000 {
            for i in draw(6, 3, &mut stream) {
                counts[i] += 1;
            }
        }
        for c in counts {
            assert!(c.abs_diff(10_000) < 355, "{counts:?}");
        }
    }
}
