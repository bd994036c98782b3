//! Hamerly's bounds change how much work the assignment step does, never
//! its result: the bounded k-means gives the same labels, centres,
//! within-SS and round count as the exhaustive one, bit for bit, from the
//! same starts.
//!
//! Data: Iris and Wine (UCI, tests/data, see tests/data/ATTRIBUTION.md), and
//! generated sets built to tie (records on a grid, duplicated records,
//! records exactly halfway between two groups).

use assort::engine::kmeans::{kmeans_with, KMeansSettings, Search, Seeding};
use assort::engine::rng::Stream;
use assort::engine::weights::Weights;
use ndarray::Array2;

mod common;

fn settings(k: usize, seeding: Seeding, seed: u64) -> KMeansSettings {
    KMeansSettings {
        k,
        restarts: 6,
        max_rounds: 300,
        tolerance: 0.0,
        seeding,
        seed,
        sample: None,
        start: None,
    }
}

fn both(x: &Array2<f64>, s: &KMeansSettings, what: &str) {
    let bounded = kmeans_with(x.view(), Weights::NONE, s, Search::Bounded).unwrap();
    let exhaustive = kmeans_with(x.view(), Weights::NONE, s, Search::Exhaustive).unwrap();
    common::same_fit(&bounded, &exhaustive, what);
}

#[test]
fn bounded_equals_exhaustive_on_iris_and_wine() {
    for name in ["iris.csv", "wine.csv"] {
        let x = common::measurements(name);
        for k in 2..=8 {
            for seeding in [Seeding::KMeansPlusPlus, Seeding::RandomPartition] {
                both(
                    &x,
                    &settings(k, seeding, 11),
                    &format!("{name} k={k} {seeding:?}"),
                );
            }
        }
    }
}

#[test]
fn bounded_equals_exhaustive_on_a_grid_full_of_ties() {
    // Integer grid points, each three times: many records equidistant from
    // two centres, many identical records.
    let mut rows = Vec::new();
    for a in 0..12 {
        for b in 0..9 {
            for _ in 0..3 {
                rows.extend([a as f64, b as f64]);
            }
        }
    }
    let x = Array2::from_shape_vec((rows.len() / 2, 2), rows).unwrap();
    for k in [2, 3, 4, 6, 9, 12] {
        for seed in 0..4 {
            both(
                &x,
                &settings(k, Seeding::KMeansPlusPlus, seed),
                &format!("grid k={k} seed={seed}"),
            );
            both(
                &x,
                &settings(k, Seeding::RandomPartition, seed),
                &format!("grid k={k} seed={seed} random"),
            );
        }
    }
}

#[test]
fn bounded_equals_exhaustive_on_large_overlapping_groups() {
    // Large enough for the parallel step, with groups that overlap so that
    // records keep changing segment for many rounds; values rounded to a
    // coarse step so exact ties occur.
    let (n, d) = (40_000, 5);
    let mut s = Stream::new(3, 0);
    let x = Array2::from_shape_fn((n, d), |(i, f)| {
        let centre = ((i % 7) * (f + 1) % 5) as f64;
        ((centre + 2.0 * s.unit()) * 4.0).round() / 4.0
    });
    for k in [3, 7, 12] {
        let mut st = settings(k, Seeding::KMeansPlusPlus, 5);
        st.restarts = 2;
        both(&x, &st, &format!("overlapping k={k}"));
    }
}
