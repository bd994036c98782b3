//! What the benches share: settings from the environment, timing, the
//! process's peak memory, and the seeded records of the scale benches.

#![allow(dead_code)] // each bench uses its own part

use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray};
use assort::engine::rng::Stream;
use parquet::arrow::ArrowWriter;
use parquet::basic::Compression;
use parquet::file::properties::WriterProperties;
use std::path::Path;
use std::sync::Arc;
use std::time::Instant;

/// The whole number in the variable `name`, else `default`.
pub fn setting(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// The scale benches' shape: records `BENCH_N` (1,000,000), features
/// `BENCH_D` (16), segments `BENCH_K` (8), sample `BENCH_SAMPLE`
/// (20,000), repeats `BENCH_REPEATS` (3).
pub fn shape() -> (usize, usize, usize, usize, usize) {
    (
        setting("BENCH_N", 1_000_000),
        setting("BENCH_D", 16),
        setting("BENCH_K", 8),
        setting("BENCH_SAMPLE", 20_000),
        setting("BENCH_REPEATS", 3),
    )
}

/// `f`'s value and its wall time in seconds.
pub fn timed<T>(f: impl FnOnce() -> T) -> (T, f64) {
    let t = Instant::now();
    let out = f();
    (out, t.elapsed().as_secs_f64())
}

/// The best wall time of `repeats` calls of `f`.
pub fn best_of(repeats: usize, mut f: impl FnMut()) -> f64 {
    (0..repeats)
        .map(|_| timed(&mut f).1)
        .fold(f64::INFINITY, f64::min)
}

/// The seeded records of the scale benches, row after row, in eight
/// Gaussian-ish groups (sums of uniforms around spread-out means).
pub struct Records {
    s: Stream,
    means: Vec<f64>,
    d: usize,
    pub next: usize,
}

impl Records {
    pub fn new(d: usize) -> Records {
        let mut s = Stream::new(2026, 7);
        let means = (0..8 * d).map(|_| s.unit() * 8.0 - 4.0).collect();
        Records {
            s,
            means,
            d,
            next: 0,
        }
    }

    pub fn row(&mut self, out: &mut Vec<f64>) {
        let i = self.next;
        self.next += 1;
        for j in 0..self.d {
            let noise = (0..4).map(|_| self.s.unit()).sum::<f64>() - 2.0;
            out.push(self.means[(i % 8) * self.d + j] + noise);
        }
    }
}

/// `n` records of [`Records`] in memory, keyed (where a bench keys them)
/// `C000000001`...
pub fn records(n: usize, d: usize) -> ndarray::Array2<f64> {
    let mut gen = Records::new(d);
    let mut values = Vec::with_capacity(n * d);
    for _ in 0..n {
        gen.row(&mut values);
    }
    ndarray::Array2::from_shape_vec((n, d), values).expect("n x d values")
}

/// The first `k` rows of `sample` in one slice: the centres a bench's
/// single round is timed at.
pub fn first_rows(sample: &ndarray::Array2<f64>, k: usize) -> Vec<f64> {
    sample
        .rows()
        .into_iter()
        .take(k)
        .flatten()
        .copied()
        .collect()
}

/// This process's peak resident memory so far, in MiB (`VmHWM`).
pub fn resident_peak() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|v| v.parse::<u64>().ok())
        .map_or(0, |kib| kib >> 10)
}

/// The fit the scale benches time: 8 restarts on the sample, at most
/// 100 rounds, tolerance 1e-4, k-means++, seed 2026.
pub fn fit_settings(k: usize) -> assort::engine::kmeans::KMeansSettings {
    assort::engine::kmeans::KMeansSettings {
        k,
        restarts: 8,
        max_rounds: 100,
        tolerance: 1e-4,
        seeding: assort::engine::kmeans::Seeding::KMeansPlusPlus,
        seed: 2026,
        sample: None,
        start: None,
    }
}

/// Writes `n` records of [`Records`] (text keys `C000000000`..., features
/// `x0`, `x1`, ...) into `folder` as snappy Parquet parts of `part`
/// records in row groups of `group`, a million at a time. Returns the
/// bytes written.
pub fn write_parquet(folder: &Path, n: usize, d: usize, group: usize, part: usize) -> u64 {
    std::fs::create_dir_all(folder).expect("the bench's folder");
    let mut gen = Records::new(d);
    let props = WriterProperties::builder()
        .set_max_row_group_row_count(Some(group))
        .set_compression(Compression::SNAPPY)
        .build();
    let mut bytes = 0;
    for p in 0..n.div_ceil(part) {
        let path = folder.join(format!("part-{p:05}.parquet"));
        let file = std::fs::File::create(&path).expect("a part");
        let mut writer: Option<ArrowWriter<std::fs::File>> = None;
        let end = ((p + 1) * part).min(n);
        while gen.next < end {
            let first = gen.next;
            let rows = (end - first).min(1 << 20);
            let mut values = Vec::with_capacity(rows * d);
            for _ in 0..rows {
                gen.row(&mut values);
            }
            let mut fields: Vec<(String, ArrayRef)> = vec![(
                "id".into(),
                Arc::new(StringArray::from_iter_values(
                    (first..first + rows).map(|i| format!("C{i:09}")),
                )),
            )];
            for j in 0..d {
                let column: Vec<f64> = (0..rows).map(|i| values[i * d + j]).collect();
                fields.push((format!("x{j}"), Arc::new(Float64Array::from(column))));
            }
            let batch = RecordBatch::try_from_iter(fields).expect("a batch");
            let w = writer.get_or_insert_with(|| {
                ArrowWriter::try_new(
                    file.try_clone().expect("the part"),
                    batch.schema(),
                    Some(props.clone()),
                )
                .expect("a writer")
            });
            w.write(&batch).expect("written");
        }
        if let Some(w) = writer {
            w.close().expect("closed");
        }
        bytes += std::fs::metadata(&path).map_or(0, |m| m.len());
    }
    bytes
}
