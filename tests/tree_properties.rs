//! The tree algorithms against the naive oracle kept in the crate, on
//! generated data, and the invariants every tree keeps.

use assort::engine::rng::Stream;
use assort::engine::tree::{linkage, linkage_naive, Linkage, Metric};
use ndarray::Array2;

/// Continuous random draws: all distances distinct with probability 1, the
/// precondition under which the result is unique (ties are not compared).
fn generated(seed: u64, n: usize, d: usize) -> Array2<f64> {
    let mut s = Stream::new(seed, 7);
    Array2::from_shape_fn((n, d), |_| s.unit() * 10.0)
}

#[test]
fn fast_algorithms_agree_with_the_naive_oracle() {
    for case in 0..40u64 {
        let mut s = Stream::new(case, 0);
        let n = 2 + s.below(40);
        let d = 1 + s.below(4);
        let x = generated(case, n, d);
        for link in Linkage::ALL {
            let metrics: &[Metric] = if link.needs_euclidean() {
                &[Metric::Euclidean]
            } else {
                &[Metric::Euclidean, Metric::Manhattan, Metric::Cosine]
            };
            for &metric in metrics {
                let fast = linkage(x.view(), link, metric).unwrap();
                let slow = linkage_naive(x.view(), link, metric);
                for (i, (f, o)) in fast.merges.iter().zip(&slow.merges).enumerate() {
                    let close = (f.height - o.height).abs() <= 1e-9 * o.height.abs().max(1e-9);
                    assert!(
                        close,
                        "case {case} {link:?} {metric:?}: merge {i} height {} vs oracle {}",
                        f.height, o.height
                    );
                    assert_eq!(
                        (f.a, f.b, f.size),
                        (o.a, o.b, o.size),
                        "case {case} {link:?} {metric:?}: merge {i}"
                    );
                }
            }
        }
    }
}

#[test]
fn reducible_linkages_never_lower_a_merge() {
    for case in 0..30u64 {
        let x = generated(100 + case, 60, 3);
        for link in [
            Linkage::Single,
            Linkage::Complete,
            Linkage::Average,
            Linkage::Weighted,
            Linkage::Ward,
        ] {
            let t = linkage(x.view(), link, Metric::Euclidean).unwrap();
            assert_eq!(t.inversions(), 0, "case {case} {link:?}");
            assert!(t.merges.windows(2).all(|w| w[0].height <= w[1].height));
        }
    }
}

#[test]
fn every_cut_is_a_partition_of_all_records() {
    let x = generated(5, 50, 2);
    for link in Linkage::ALL {
        let t = linkage(x.view(), link, Metric::Euclidean).unwrap();
        assert_eq!(t.merges.last().unwrap().size, 50);
        for k in 1..=50 {
            let labels = t.cut(k);
            assert_eq!(labels.len(), 50);
            let mut seen = vec![0usize; k];
            for &l in &labels {
                assert!((l as usize) < k, "{link:?} k {k}: label {l}");
                seen[l as usize] += 1;
            }
            assert!(
                seen.iter().all(|&c| c > 0),
                "{link:?} k {k}: an empty segment"
            );
            assert!(
                seen.windows(2).all(|w| w[0] >= w[1]),
                "{link:?} k {k}: not numbered by size"
            );
        }
    }
}

#[test]
fn trees_do_not_depend_on_the_thread_count() {
    let x = generated(9, 300, 4);
    for link in Linkage::ALL {
        let build = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| {
                let t = linkage(x.view(), link, Metric::Euclidean).unwrap();
                let c = t.cophenetic_correlation(x.view(), Metric::Euclidean);
                (t, c.to_bits())
            })
        };
        let one = build(1);
        assert!(build(4) == one, "{link:?}");
    }
}

#[test]
fn the_sampled_cophenetic_correlation_is_close_to_the_exact_one() {
    // Generated data (invented): the estimate over the pairs of 1,000 of
    // 4,000 leaves against the exact value over all 8 million pairs.
    let x = generated(12, 4_000, 3);
    for link in [Linkage::Single, Linkage::Ward, Linkage::Average] {
        let t = linkage(x.view(), link, Metric::Euclidean).unwrap();
        let exact = t.cophenetic_correlation(x.view(), Metric::Euclidean);
        let (est, used) = t.cophenetic_estimate(x.view(), Metric::Euclidean, 1_000, 3, 0);
        assert_eq!(used, 1_000);
        assert!((est - exact).abs() < 0.03, "{link:?}: {est} vs {exact}");
        let (all, used) = t.cophenetic_estimate(x.view(), Metric::Euclidean, 5_000, 3, 0);
        assert_eq!((all.to_bits(), used), (exact.to_bits(), 4_000));
    }
}
