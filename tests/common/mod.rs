//! Helpers shared by the integration tests that read the public data sets
//! in tests/data (Iris and Wine, UCI; see tests/data/ATTRIBUTION.md), and
//! the end-to-end harness ([`case`]).
#![allow(dead_code)] // each test crate uses its own part of these helpers

pub mod case;
pub mod kinds;
pub mod passes;
pub mod pg;

use ndarray::Array2;
use std::path::Path;

/// The measurements of a data file whose last column is the class: every
/// other column, as records by features.
pub fn measurements(name: &str) -> Array2<f64> {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/data")
            .join(name),
    )
    .unwrap();
    let rows: Vec<Vec<f64>> = text
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            f[..f.len() - 1]
                .iter()
                .map(|v| v.parse().unwrap())
                .collect()
        })
        .collect();
    let d = rows[0].len();
    Array2::from_shape_vec((rows.len(), d), rows.into_iter().flatten().collect()).unwrap()
}

/// Two k-means fits are the same bit for bit: labels, within-SS, rounds,
/// the best restart and how many reached it, centres.
#[track_caller]
pub fn same_fit(
    a: &assort::engine::kmeans::KMeansFit,
    b: &assort::engine::kmeans::KMeansFit,
    what: &str,
) {
    assert_eq!(a.labels, b.labels, "{what}: labels");
    assert_eq!(
        a.inertia.to_bits(),
        b.inertia.to_bits(),
        "{what}: within-SS"
    );
    assert_eq!(a.rounds, b.rounds, "{what}: rounds");
    assert_eq!(a.best_restart, b.best_restart, "{what}: best restart");
    assert_eq!(
        a.restarts_at_best, b.restarts_at_best,
        "{what}: restarts at best"
    );
    let bits = |f: &assort::engine::kmeans::KMeansFit| {
        f.centroids.iter().map(|v| v.to_bits()).collect::<Vec<_>>()
    };
    assert_eq!(bits(a), bits(b), "{what}: centres");
}

/// The driven fit the engine tests share: k = 4, 8 restarts by k-means++
/// on the sample, rounds capped at 100, tolerance 1e-4.
pub fn four_of_eight_restarts(seed: u64) -> assort::engine::kmeans::KMeansSettings {
    assort::engine::kmeans::KMeansSettings {
        k: 4,
        restarts: 8,
        max_rounds: 100,
        tolerance: 1e-4,
        seeding: assort::engine::kmeans::Seeding::KMeansPlusPlus,
        seed,
        sample: None,
        start: None,
    }
}

/// The driver's fit over `data` in memory, from `sample`: the fit every
/// engine's must equal, bit for bit.
pub fn fit_in_memory(
    data: ndarray::ArrayView2<'_, f64>,
    sample: ndarray::ArrayView2<'_, f64>,
    settings: &assort::engine::kmeans::KMeansSettings,
    shifts: &assort::engine::exact::Shifts,
) -> Vec<assort::scale::drive::Refined> {
    let mut memory = assort::scale::drive::InMemory { data, shifts };
    assort::scale::drive::fit(sample, settings, shifts, &mut memory).unwrap()
}

/// The driver's fit with its rounds run by `engine` over `source` (whose
/// prepared features are the SQL expressions `features`) is `here`, the
/// fit in memory, bit for bit: every refinement's centres, sizes,
/// within-SS and rounds.
#[track_caller]
#[allow(clippy::too_many_arguments)]
pub fn same_fit_in<E: assort::scale::sql::SqlEngine>(
    engine: &mut E,
    source: &str,
    features: &[String],
    sample: ndarray::ArrayView2<'_, f64>,
    settings: &assort::engine::kmeans::KMeansSettings,
    shifts: &assort::engine::exact::Shifts,
    here: &[assort::scale::drive::Refined],
    what: &str,
) where
    E::Error: std::fmt::Debug,
{
    let mut rounds = assort::scale::sql::InEngine {
        engine,
        source: source.to_string(),
        features: features.to_vec(),
        shifts,
    };
    let there = assort::scale::drive::fit(sample, settings, shifts, &mut rounds).unwrap();
    // Debug writes each double's shortest exact digits (and the sign of a
    // zero): equal text is equal bits.
    assert_eq!(
        format!("{there:?}"),
        format!("{here:?}"),
        "{what}: every refinement, bit for bit"
    );
}
