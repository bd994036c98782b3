//! k-means with its restarts on a sample (`kmeans ... sample N`): the best
//! sample restarts refined on every record reach the within-SS of full
//! batch on data with groups, reproducibly on any thread count, and a
//! sample as large as the data is full batch itself.
//!
//! Data: generated groups (seeded), large enough for the parallel steps,
//! and Iris (UCI, tests/data, see tests/data/ATTRIBUTION.md).

mod common;

use assort::engine::kmeans::{kmeans, KMeansFit, KMeansSettings, Seeding};
use assort::engine::rng::Stream;
use ndarray::Array2;

fn settings(k: usize, sample: Option<usize>) -> KMeansSettings {
    KMeansSettings {
        k,
        restarts: 8,
        max_rounds: 300,
        tolerance: 1e-6,
        seeding: Seeding::KMeansPlusPlus,
        seed: 11,
        sample,
        start: None,
    }
}

/// `n` records in `d` features around eight centres of unequal sizes, with
/// unit spread: groups that overlap a little, as customer data do.
fn groups(n: usize, d: usize) -> Array2<f64> {
    let mut s = Stream::new(5, 1);
    let centres: Vec<Vec<f64>> = (0..8)
        .map(|_| (0..d).map(|_| 10.0 * s.unit()).collect())
        .collect();
    let mut x = Array2::zeros((n, d));
    for i in 0..n {
        // Group g takes a share growing with g.
        let u = s.unit();
        let g = ((u * u) * 8.0) as usize;
        for f in 0..d {
            let normal =
                (-2.0 * (1.0 - s.unit()).ln()).sqrt() * (std::f64::consts::TAU * s.unit()).cos();
            x[[i, f]] = centres[g][f] + normal;
        }
    }
    x
}

#[test]
fn refined_sample_restarts_reach_the_within_ss_of_full_batch() {
    let x = groups(60_000, 6);
    for k in [4, 8, 10] {
        let full = kmeans(x.view(), &settings(k, None)).unwrap();
        let sampled = kmeans(x.view(), &settings(k, Some(5_000))).unwrap();
        assert_eq!(sampled.sampled, Some(5_000));
        assert_eq!(full.sampled, None);
        // Within 0.1 % of full batch: restarts are local optima, so the
        // refined route may land on another one, but not a worse one by
        // more than a rounding of the groups' edges.
        let excess = sampled.inertia / full.inertia - 1.0;
        assert!(
            excess < 1e-3,
            "k = {k}: sampled {} against full {} ({excess:+.2e})",
            sampled.inertia,
            full.inertia
        );
        assert!(sampled.restarts_at_best >= 1 && sampled.restarts_at_best <= 8);
    }
}

#[test]
fn the_sampled_route_is_bit_identical_on_any_thread_count() {
    let x = groups(40_000, 5);
    let fits: Vec<KMeansFit> = [1, 2, 8]
        .iter()
        .map(|&threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| kmeans(x.view(), &settings(7, Some(3_000))).unwrap())
        })
        .collect();
    common::same_fit(&fits[0], &fits[1], "1 against 2 threads");
    common::same_fit(&fits[0], &fits[2], "1 against 8 threads");
}

#[test]
fn a_sample_as_large_as_the_data_is_full_batch() {
    let x = common::measurements("iris.csv");
    let n = x.nrows();
    let full = kmeans(x.view(), &settings(3, None)).unwrap();
    for s in [n, n + 1] {
        let sampled = kmeans(x.view(), &settings(3, Some(s))).unwrap();
        common::same_fit(&full, &sampled, "sample of every record");
        assert_eq!(sampled.sampled, None);
    }
}

#[test]
fn a_sample_smaller_than_k_is_an_error_not_a_panic() {
    let x = groups(2_000, 3);
    assert!(kmeans(x.view(), &settings(20, Some(10))).is_err());
}
