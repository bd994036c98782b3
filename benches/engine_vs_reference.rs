//! The engine against the reference library, side by side in one run.
//!
//! `cargo bench --bench engine_vs_reference` generates a seeded data set,
//! times assort's k-means (restarts in parallel) and exact silhouette, then
//! runs `benches/reference_kmeans.py` (scikit-learn, pinned in
//! tests/reference/requirements.txt) on the same data and prints the ratios.
//! Each timing is the best of several repetitions; the machine is shared and
//! noisy, so read ratios, not seconds. Settings: environment variables
//! `BENCH_N` (records, 100000), `BENCH_D` (features, 10), `BENCH_K` (8),
//! `BENCH_RESTARTS` (10), `BENCH_SIL_N` (records for the silhouette, 10000),
//! `BENCH_REPEATS` (3).

use assort::engine::{criteria, kmeans, rng::Stream};
use ndarray::Array2;
use std::io::Write;
use std::path::Path;
use std::process::Command;
use std::time::Instant;

fn setting(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// Records around `groups` centres, with unit-width uniform noise.
fn data(n: usize, d: usize, groups: usize) -> Array2<f64> {
    let mut s = Stream::new(2026, 0);
    let centres: Vec<Vec<f64>> = (0..groups)
        .map(|_| (0..d).map(|_| s.unit() * 6.0).collect())
        .collect();
    Array2::from_shape_fn((n, d), |(i, f)| {
        centres[(i * 7919) % groups][f] + 2.0 * s.unit()
    })
}

/// Writes a little-endian float64 or int64 array in NumPy's `.npy` format.
fn write_npy(path: &Path, descr: &str, shape: &[usize], bytes: &[u8]) {
    let shape_txt = match shape {
        [n] => format!("({n},)"),
        _ => format!(
            "({})",
            shape
                .iter()
                .map(|s| s.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    let mut header =
        format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {shape_txt}, }}");
    while (10 + header.len() + 1) % 64 != 0 {
        header.push(' ');
    }
    header.push('\n');
    let mut f = std::fs::File::create(path).unwrap();
    f.write_all(b"\x93NUMPY\x01\x00").unwrap();
    f.write_all(&(header.len() as u16).to_le_bytes()).unwrap();
    f.write_all(header.as_bytes()).unwrap();
    f.write_all(bytes).unwrap();
}

fn best_of<T>(repeats: usize, mut f: impl FnMut() -> T) -> (f64, T) {
    let mut best = f64::INFINITY;
    let mut out = None;
    for _ in 0..repeats {
        let t = Instant::now();
        let r = f();
        best = best.min(t.elapsed().as_secs_f64());
        out = Some(r);
    }
    (best, out.expect("at least one repetition"))
}

fn main() {
    let (n, d, k) = (
        setting("BENCH_N", 100_000),
        setting("BENCH_D", 10),
        setting("BENCH_K", 8),
    );
    let restarts = setting("BENCH_RESTARTS", 10);
    let sil_n = setting("BENCH_SIL_N", 10_000).min(n);
    let repeats = setting("BENCH_REPEATS", 3).max(1);
    // scikit-learn's `tol` scales the mean feature variance; assort's
    // `tolerance` scales their sum, so divide by d for the same threshold.
    let sklearn_tol = 1e-4;
    let x = data(n, d, k);
    println!("data: {n} records x {d} features, k = {k}, {restarts} restarts, silhouette on {sil_n} records, best of {repeats}");
    println!("threads: {} (rayon)", rayon::current_num_threads());

    let settings = kmeans::KMeansSettings {
        k,
        restarts,
        max_rounds: 300,
        tolerance: sklearn_tol / d as f64,
        seeding: kmeans::Seeding::KMeansPlusPlus,
        seed: 1,
        sample: None,
        start: None,
    };
    let (km_time, fit) = best_of(repeats, || kmeans::kmeans(x.view(), &settings).unwrap());
    let xs = x.slice(ndarray::s![..sil_n, ..]).to_owned();
    let ls = &fit.labels[..sil_n];
    let kk = *ls.iter().max().unwrap() as usize + 1;
    let (sil_time, sil) = best_of(repeats, || criteria::silhouette(xs.view(), ls, kk, 0, 0));

    let dir = tempfile::tempdir().unwrap();
    let data_path = dir.path().join("x.npy");
    let labels_path = dir.path().join("labels.npy");
    write_npy(
        &data_path,
        "<f8",
        &[n, d],
        &x.iter().flat_map(|v| v.to_le_bytes()).collect::<Vec<u8>>(),
    );
    write_npy(
        &labels_path,
        "<i8",
        &[sil_n],
        &ls.iter()
            .flat_map(|&l| i64::from(l).to_le_bytes())
            .collect::<Vec<u8>>(),
    );

    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/reference_kmeans.py");
    let output = Command::new("python3")
        .arg(&script)
        .arg(&data_path)
        .arg(&labels_path)
        .args([
            k.to_string(),
            restarts.to_string(),
            sklearn_tol.to_string(),
            sil_n.to_string(),
            repeats.to_string(),
        ])
        // Older OpenBLAS builds need these on some processors; they slow a
        // current numpy, so the reference runs without them.
        .env_remove("OPENBLAS_CORETYPE")
        .env_remove("OPENBLAS_L2_SIZE")
        .output();
    let reference = match output {
        Ok(o) if o.status.success() => serde_json::from_slice::<serde_json::Value>(&o.stdout).ok(),
        Ok(o) => {
            eprintln!(
                "reference run failed:\n{}",
                String::from_utf8_lossy(&o.stderr)
            );
            None
        }
        Err(e) => {
            eprintln!("python3 not available: {e}");
            None
        }
    };
    println!();
    println!(
        "{:<22} {:>12} {:>12} {:>14}",
        "task", "assort s", "reference s", "reference/ours"
    );
    match reference {
        Some(r) => {
            let rk = r["kmeans_seconds"].as_f64().unwrap_or(f64::NAN);
            let rs = r["silhouette_seconds"].as_f64().unwrap_or(f64::NAN);
            println!(
                "{:<22} {:>12.3} {:>12.3} {:>13.2}x",
                "k-means (all restarts)",
                km_time,
                rk,
                rk / km_time
            );
            println!(
                "{:<22} {:>12.3} {:>12.3} {:>13.2}x",
                "silhouette (exact)",
                sil_time,
                rs,
                rs / sil_time
            );
            println!();
            println!(
                "within-cluster SS: assort {:.6}, reference {:.6}",
                fit.inertia,
                r["kmeans_inertia"].as_f64().unwrap_or(f64::NAN)
            );
            println!(
                "silhouette of assort's labels: assort {:.12}, reference {:.12}",
                sil.mean,
                r["silhouette"].as_f64().unwrap_or(f64::NAN)
            );
            println!(
                "reference: scikit-learn {}, thread pools {}",
                r["sklearn"], r["threadpools"]
            );
        }
        None => {
            println!(
                "{:<22} {:>12.3} {:>12} {:>14}",
                "k-means (all restarts)", km_time, "-", "-"
            );
            println!(
                "{:<22} {:>12.3} {:>12} {:>14}",
                "silhouette (exact)", sil_time, "-", "-"
            );
            println!(
                "(no reference: pip install -r tests/reference/requirements.txt threadpoolctl)"
            );
        }
    }
}
