//! What exact sums cost a k-means round, side by side in one run:
//! `cargo bench --bench exact_sums`. The same assignment (nearest centre,
//! ties to the lower number) over the same seeded records, followed by
//! floating-point sums in fixed chunks (as the in-memory engine sums now)
//! or by the fixed-point sums of `engine::exact`. Prints the best of
//! `BENCH_REPEATS` (5) rounds of each and their ratio: the figure that
//! decides whether the in-memory engine can take exact sums too. Settings:
//! `BENCH_N` (1,000,000), `BENCH_D` (16), `BENCH_K` (8).

use assort::engine::dist2;
use assort::engine::exact::{self, Shifts};
use assort::engine::kmeans::two_smallest;
use assort::engine::rng::Stream;
use ndarray::Array2;
use rayon::prelude::*;
use std::time::Instant;

fn setting(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// A round with floating-point sums: parts of 4,096 records summed in
/// parallel, added in part order (as `Lloyd::means` does).
fn float_round(data: &Array2<f64>, centres: &[f64]) -> (Vec<f64>, Vec<u64>) {
    let d = data.ncols();
    let k = centres.len() / d;
    let rows = data.as_slice().expect("standard layout");
    let parts: Vec<(Vec<f64>, Vec<u64>)> = rows
        .par_chunks(4096 * d)
        .map(|part| {
            let (mut sums, mut counts) = (vec![0.0; k * d], vec![0u64; k]);
            for row in part.chunks_exact(d) {
                let dists = centres.chunks_exact(d).map(|c| dist2(row, c));
                let (best, _, _) = two_smallest(dists);
                let at = best as usize;
                counts[at] += 1;
                for (s, x) in sums[at * d..(at + 1) * d].iter_mut().zip(row) {
                    *s += x;
                }
            }
            (sums, counts)
        })
        .collect();
    let (mut sums, mut counts) = (vec![0.0; k * d], vec![0u64; k]);
    for (s, c) in &parts {
        sums.iter_mut().zip(s).for_each(|(a, b)| *a += b);
        counts.iter_mut().zip(c).for_each(|(a, b)| *a += b);
    }
    (sums, counts)
}

fn best_of(repeats: usize, mut f: impl FnMut()) -> f64 {
    (0..repeats)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let (n, d, k) = (
        setting("BENCH_N", 1_000_000),
        setting("BENCH_D", 16),
        setting("BENCH_K", 8),
    );
    let repeats = setting("BENCH_REPEATS", 5);
    let mut s = Stream::new(2026, 0);
    let data = Array2::from_shape_fn((n, d), |_| s.unit() * 4.0 - 2.0);
    let centres: Vec<f64> = data.rows().into_iter().take(k).flatten().copied().collect();
    let shifts = Shifts::of_data(data.view()).expect("data in range");
    let float = best_of(repeats, || {
        std::hint::black_box(float_round(&data, &centres));
    });
    let fixed = best_of(repeats, || {
        std::hint::black_box(exact::round(data.view(), &centres, &shifts));
    });
    println!("one k-means round, {n} x {d}, k = {k}, best of {repeats}:");
    println!("  floating-point sums  {:>8.1} ms", float * 1e3);
    println!("  exact sums           {:>8.1} ms", fixed * 1e3);
    println!("  exact / floating     {:>8.2}x", fixed / float);
}
