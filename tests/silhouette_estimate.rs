//! The silhouette estimate on large data: checked against the exact
//! silhouette of the same 50,000 generated records, within its stated
//! standard error, and the exact blocked computation against the naive
//! oracle kept in the crate.
//!
//! Generated data (invented for this check): five overlapping Gaussian
//! groups in four dimensions, labelled by their group with 10 % of the
//! labels moved, so the silhouette is moderate and varies a lot from
//! record to record, the hard case for an estimate.

use assort::engine::criteria::silhouette_naive;
use assort::engine::rng::Stream;
use assort::engine::silhouette::{estimate, exact};
use ndarray::Array2;

fn normal(s: &mut Stream) -> f64 {
    let u = 1.0 - s.unit();
    let v = s.unit();
    (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
}

fn groups(n: usize, seed: u64) -> (Array2<f64>, Vec<u32>) {
    let mut s = Stream::new(seed, 0);
    let mut labels = Vec::with_capacity(n);
    let mut x = Array2::zeros((n, 4));
    for i in 0..n {
        // Unequal sizes: group g drawn with weight g + 1.
        let g = [0, 1, 1, 2, 2, 2, 3, 3, 3, 3, 4, 4, 4, 4, 4][s.below(15)];
        for f in 0..4 {
            x[[i, f]] = 2.5 * ((g * (f + 2)) % 5) as f64 + normal(&mut s);
        }
        labels.push(if s.unit() < 0.1 {
            (g as u32 + 1) % 5
        } else {
            g as u32
        });
    }
    (x, labels)
}

#[test]
fn the_blocked_exact_silhouette_equals_the_naive_oracle() {
    let (x, labels) = groups(700, 4);
    let fast = exact(x.view(), &labels, 5);
    let slow = silhouette_naive(x.view(), &labels);
    assert!((fast.mean - slow).abs() < 1e-12, "{} vs {slow}", fast.mean);
    assert_eq!(fast.std_error, None);
}

#[test]
fn the_estimate_on_50000_records_is_within_its_stated_error_of_the_exact_value() {
    let (x, labels) = groups(50_000, 1);
    let truth = exact(x.view(), &labels, 5).mean;
    let mut errors = Vec::new();
    let mut stated = Vec::new();
    for seed in 0..6 {
        let est = estimate(x.view(), &labels, 5, &mut Stream::new(seed, 9), 8_000);
        let se = est.std_error.expect("an estimate states its error");
        assert!(se > 0.0 && se < 0.02, "seed {seed}: implausible error {se}");
        assert!(
            (est.mean - truth).abs() <= 3.0 * se,
            "seed {seed}: estimate {} vs exact {truth}, stated error {se}",
            est.mean
        );
        errors.push(est.mean - truth);
        stated.push(se);
    }
    // The stated error is of the right size: the estimates' own spread is
    // neither far above nor far below it.
    let rms = (errors.iter().map(|e| e * e).sum::<f64>() / errors.len() as f64).sqrt();
    let mean_se = stated.iter().sum::<f64>() / stated.len() as f64;
    assert!(rms < 2.5 * mean_se, "errors {rms} against stated {mean_se}");
    assert!(rms > mean_se / 8.0, "errors {rms} against stated {mean_se}");
}

#[test]
fn the_estimate_is_repeatable_and_reads_only_a_sample() {
    let (x, labels) = groups(30_000, 2);
    let a = estimate(x.view(), &labels, 5, &mut Stream::new(3, 1), 4_000);
    let b = estimate(x.view(), &labels, 5, &mut Stream::new(3, 1), 4_000);
    assert_eq!(a, b);
    assert!(a.evaluated < 5_000, "{}", a.evaluated);
    assert_eq!(a.values.iter().map(Vec::len).sum::<usize>(), a.evaluated);
}

/// The silhouette over a dissimilarity given as a function (Gower's, or
/// k-prototypes' root cost) is the same computation: with the Euclidean
/// distance as that function it agrees with the row kernel, exact and
/// estimated from the same stream.
#[test]
fn a_silhouette_over_a_given_dissimilarity_agrees_with_the_row_kernel() {
    use assort::engine::silhouette::{exact_by, silhouette_by, EXACT_LIMIT, SAMPLE};
    let euclid = |x: &Array2<f64>, i: usize, j: usize| {
        assort::engine::dist2(x.row(i).as_slice().unwrap(), x.row(j).as_slice().unwrap()).sqrt()
    };
    let (x, labels) = groups(2_000, 11);
    let by = exact_by(&|i, j| euclid(&x, i, j), &labels, 5);
    let rows = exact(x.view(), &labels, 5);
    assert!((by.mean - rows.mean).abs() < 1e-12);
    let (x, labels) = groups(EXACT_LIMIT + 500, 12);
    let by = silhouette_by(&|i, j| euclid(&x, i, j), &labels, 5, 3, 9);
    let rows = estimate(x.view(), &labels, 5, &mut Stream::new(3, 9), SAMPLE);
    assert_eq!(by.evaluated, rows.evaluated);
    assert!((by.mean - rows.mean).abs() < 1e-12);
    assert!((by.std_error.unwrap() - rows.std_error.unwrap()).abs() < 1e-12);
}
