//! `kmeans ... sample N by key`: the fit a database or a cluster runs
//! where the data lives ([`crate::scale::drive`]), run here over the
//! prepared records. The sample is drawn by key rank and the refinement
//! sums exactly, so the segments do not depend on the order of the
//! records: a file sorted another way, or the same records in a table,
//! gives the same segments.
//!
//! Cost beside the in-memory sampled fit: one SHA-256 digest per record
//! and a sort of the digests (O(n log n)), and exact sums in the
//! refinement's rounds (1.23x a round with floating sums: benches/
//! exact_sums.rs).

use super::error::RunError;
use super::fit::{engine_error, Candidate};
use super::{Restarts, Step};
use crate::engine::exact::Shifts;
use crate::engine::kmeans::{self, KMeansSettings};
use crate::engine::weights::Weights;
use crate::engine::EngineError;
use crate::plan::{KMeansPlan, Plan};
use crate::scale::drive::{self, InMemory, Rounds};
use ndarray::{Array2, ArrayView2, Axis};

/// One candidate per k of `km`, from the records `x` keyed by `keys`
/// (one per row).
pub(super) fn fit(
    plan: &Plan,
    km: &KMeansPlan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    keys: &[&str],
    progress: &dyn Fn(Step),
) -> Result<Vec<Candidate>, RunError> {
    if w.is_weighted() {
        return Err(RunError::ByKey {
            reason: "records carry weights (`represents`), which the exact rounds do not take"
                .into(),
        });
    }
    let size = km.sample.unwrap_or(x.nrows()).min(x.nrows());
    let places = crate::scale::sample::drawn_places(keys, plan.seed, size);
    let sample = x.select(Axis(0), &places);
    let shifts = Shifts::of_data(x).map_err(|e| RunError::ByKey {
        reason: format!("the clustered values are out of the exact sums' range: {e}"),
    })?;
    let mut engine = InMemory {
        data: x,
        shifts: &shifts,
    };
    let driven = Driven {
        sample: sample.view(),
        shifts: &shifts,
        labelled: x,
        every_record: true,
    };
    driven.each_k(plan, km, &mut engine, |never| match never {}, progress)
}

/// A driven fit's inputs beside its engine: the sample (rows in rank
/// order), the exact sums' shifts, and the rows the candidates label:
/// every record, or (`read passes`) the sample again, the sizes then
/// coming from the engine's last round.
pub(super) struct Driven<'a> {
    pub sample: ArrayView2<'a, f64>,
    pub shifts: &'a Shifts,
    pub labelled: ArrayView2<'a, f64>,
    pub every_record: bool,
}

impl Driven<'_> {
    /// One candidate per k of `km`, refined by `engine`; `failed` words a
    /// round that failed.
    pub(super) fn each_k<R: Rounds>(
        &self,
        plan: &Plan,
        km: &KMeansPlan,
        engine: &mut R,
        failed: impl Fn(R::Error) -> RunError,
        progress: &dyn Fn(Step),
    ) -> Result<Vec<Candidate>, RunError> {
        let size = self.sample.nrows();
        super::fit::each_k(km, progress, |k| {
            // The sample is drawn already, by key.
            let settings = KMeansSettings {
                sample: None,
                ..super::fit::settings_at(plan, km, k)
            };
            let refined =
                drive::fit(self.sample, &settings, self.shifts, engine).map_err(|e| match e {
                    drive::FitError::Engine(source) => engine_error(k, source),
                    drive::FitError::Round(e) => failed(e),
                })?;
            let kept = refined
                .into_iter()
                .next()
                .ok_or_else(|| engine_error(k, EngineError::BadK { k }))?;
            self.candidate(k, kept, (km.restarts, size))
        })
    }

    /// The kept refinement as a candidate: each labelled row at its
    /// nearest centre (ties to the lower number), segments numbered by
    /// their records over every record (the engine's last round), larger
    /// first, a tie to the segment met first among the labelled rows.
    fn candidate(
        &self,
        k: usize,
        kept: drive::Refined,
        (restarts, size): (usize, usize),
    ) -> Result<Candidate, RunError> {
        let x = self.labelled;
        let d = x.ncols();
        let centres = ArrayView2::from_shape((k, d), &kept.centres)
            .map_err(|_| engine_error(k, EngineError::BadK { k }))?;
        let labels: Vec<u32> = kmeans::nearest_with_margin(x, centres)
            .into_iter()
            .map(|(label, _, _)| label)
            .collect();
        if kept.sizes.contains(&0) {
            return Err(engine_error(k, EngineError::TooFewDistinct { k }));
        }
        let (labels, order) = kmeans::canonical_by_sizes(&labels, &kept.sizes);
        let centres = Array2::from_shape_fn((k, d), |(s, j)| kept.centres[order[s] * d + j]);
        Ok(Candidate {
            k,
            labels,
            centres,
            restarts: Some(Restarts {
                at_best: kept.alike,
                of: restarts,
                converged: kept.converged,
                sampled: Some(size),
                by_key: true,
            }),
            medoids: None,
            sizes: (!self.every_record).then(|| order.iter().map(|&s| kept.sizes[s]).collect()),
        })
    }
}
