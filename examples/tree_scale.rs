//! Measures the tree engine at scale: time and peak memory for each
//! linkage on a seeded data set. `cargo run --release --example tree_scale
//! -- 20000 average` (records, linkage). Peak memory is read from
//! /proc/self/status (VmHWM), so it is reported on Linux only.

use assort::engine::rng::Stream;
use assort::engine::tree::{linkage, Linkage, Metric};
use ndarray::Array2;
use std::time::Instant;

fn peak_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib / 1024.0)
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let n: usize = args.get(1).and_then(|v| v.parse().ok()).unwrap_or(20_000);
    let link = args
        .get(2)
        .and_then(|w| Linkage::parse(w))
        .unwrap_or(Linkage::Average);
    let d = 8;
    let mut s = Stream::new(42, 0);
    let x = Array2::from_shape_fn((n, d), |_| s.unit());
    let t = Instant::now();
    let tree = linkage(x.view(), link, Metric::Euclidean).expect("valid settings");
    let secs = t.elapsed().as_secs_f64();
    println!(
        "{} linkage, {n} records x {d}: {secs:.2} s, peak memory {} MiB, top merge {:.4}",
        link.name(),
        peak_mib()
            .map(|m| format!("{m:.0}"))
            .unwrap_or_else(|| "?".into()),
        tree.merges.last().map(|m| m.height).unwrap_or(0.0)
    );
}
