//! The evidence for k on simulated data whose answer is known by
//! construction: well-separated blobs, and clouds with no structure.

use assort::engine::evidence::{bootstrap_stability, gap_choice, gap_statistic, Recluster};
use assort::engine::kmeans::{kmeans_weighted, KMeansSettings, Seeding};
use assort::engine::rng::Stream;
use assort::engine::weights::Weights;
use ndarray::{Array2, ArrayView2};

fn normal(s: &mut Stream) -> f64 {
    let u1 = 1.0 - s.unit();
    let u2 = s.unit();
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

/// `per` records around each centre, unit spread.
fn blobs(centres: &[[f64; 2]], per: usize, seed: u64) -> Array2<f64> {
    let mut s = Stream::new(seed, 0);
    Array2::from_shape_fn((centres.len() * per, 2), |(i, f)| {
        centres[i / per][f] + normal(&mut s)
    })
}

fn kmeans_at(data: ArrayView2<'_, f64>, w: Weights<'_>, ks: &[usize], seed: u64) -> Vec<Vec<u32>> {
    ks.iter()
        .map(|&k| {
            let settings = KMeansSettings {
                k,
                restarts: 5,
                max_rounds: 300,
                tolerance: 0.0,
                seeding: Seeding::KMeansPlusPlus,
                seed,
                sample: None,
                start: None,
            };
            kmeans_weighted(data, w, &settings)
                .map(|f| f.labels)
                .unwrap_or_else(|_| vec![0; data.nrows()])
        })
        .collect()
}

const RECLUSTER: &Recluster<'static> = &kmeans_at;

#[test]
fn the_gap_statistic_finds_three_well_separated_blobs() {
    // Unequal spacing: the square box of an equilateral layout can split in
    // two as well as the data does, which hides k = 2 -> 3 from the rule.
    let x = blobs(&[[0.0, 0.0], [10.0, 0.0], [30.0, 4.0]], 60, 1);
    let gaps = gap_statistic(
        (x.view(), Weights::NONE),
        &[2, 3, 4, 5, 6],
        20,
        7,
        RECLUSTER,
    );
    assert_eq!(gaps[0].k, 1);
    assert_eq!(gap_choice(&gaps), Some(3), "{gaps:?}");
}

#[test]
fn the_gap_statistic_finds_no_structure_in_one_gaussian_cloud() {
    let x = blobs(&[[0.0, 0.0]], 200, 2);
    let gaps = gap_statistic((x.view(), Weights::NONE), &[2, 3, 4, 5], 20, 7, RECLUSTER);
    assert_eq!(gap_choice(&gaps), Some(1), "{gaps:?}");
}

#[test]
fn separated_blobs_are_stable_and_a_cut_uniform_cloud_is_not() {
    let x = blobs(&[[0.0, 0.0], [12.0, 0.0], [6.0, 10.0], [18.0, 10.0]], 50, 3);
    let labels = kmeans_at(x.view(), Weights::NONE, &[4], 11);
    let firm = bootstrap_stability((x.view(), Weights::NONE), &[4], &labels, 20, 5, RECLUSTER);
    assert!(firm[0].mean_ari > 0.95, "{firm:?}");
    assert!(firm[0].jaccard.iter().all(|&j| j > 0.9), "{firm:?}");

    // A uniform disc: no direction is special, so where four segments fall
    // is arbitrary and moves from resample to resample.
    let mut s = Stream::new(4, 0);
    let mut cloud = Array2::zeros((200, 2));
    for i in 0..200 {
        let (r, t) = (10.0 * s.unit().sqrt(), std::f64::consts::TAU * s.unit());
        cloud[[i, 0]] = r * t.cos();
        cloud[[i, 1]] = r * t.sin();
    }
    let labels = kmeans_at(cloud.view(), Weights::NONE, &[4], 11);
    let loose = bootstrap_stability(
        (cloud.view(), Weights::NONE),
        &[4],
        &labels,
        20,
        5,
        RECLUSTER,
    );
    assert!(
        loose[0].mean_ari < firm[0].mean_ari - 0.15,
        "firm {} vs loose {}",
        firm[0].mean_ari,
        loose[0].mean_ari
    );
}

#[test]
fn evidence_is_repeatable() {
    let x = blobs(&[[0.0, 0.0], [8.0, 0.0]], 40, 9);
    let a = gap_statistic((x.view(), Weights::NONE), &[2, 3], 5, 1, RECLUSTER);
    let b = gap_statistic((x.view(), Weights::NONE), &[2, 3], 5, 1, RECLUSTER);
    assert_eq!(a, b);
}
