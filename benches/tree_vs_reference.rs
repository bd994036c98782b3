//! The tree engine against the reference library, side by side in one run:
//! `cargo bench --bench tree_vs_reference`. A seeded data set
//! (`BENCH_N` records, 8000 unless given, x 8 features) is written as .npy;
//! assort builds each tree, then `benches/reference_tree.py` (scipy, pinned
//! in tests/reference/requirements.txt) builds the same trees. Printed:
//! seconds, the ratio, and both top merge heights (they must agree).

use assort::engine::{rng::Stream, tree};
use ndarray::Array2;
use std::io::Write;
use std::path::Path;
use std::process::Command;
use std::time::Instant;

fn main() {
    let n: usize = std::env::var("BENCH_N")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(8000);
    let d = 8;
    let mut s = Stream::new(42, 0);
    let x = Array2::from_shape_fn((n, d), |_| s.unit());
    let linkages = [
        tree::Linkage::Single,
        tree::Linkage::Ward,
        tree::Linkage::Average,
        tree::Linkage::Centroid,
    ];
    let mut ours = Vec::new();
    for l in linkages {
        let t = Instant::now();
        let tr = tree::linkage(x.view(), l, tree::Metric::Euclidean).expect("valid settings");
        ours.push((
            l.name(),
            t.elapsed().as_secs_f64(),
            tr.merges.last().map_or(0.0, |m| m.height),
        ));
    }
    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("x.npy");
    let mut header = format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({n}, {d}), }}");
    while (10 + header.len() + 1) % 64 != 0 {
        header.push(' ');
    }
    header.push('\n');
    let mut f = std::fs::File::create(&path).expect("create");
    f.write_all(b"\x93NUMPY\x01\x00").expect("write");
    f.write_all(&(header.len() as u16).to_le_bytes())
        .expect("write");
    f.write_all(header.as_bytes()).expect("write");
    f.write_all(&x.iter().flat_map(|v| v.to_le_bytes()).collect::<Vec<u8>>())
        .expect("write");
    drop(f);
    let names: Vec<&str> = linkages.iter().map(|l| l.name()).collect();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/reference_tree.py");
    let reference = Command::new("python3")
        .arg(&script)
        .arg(&path)
        .arg(names.join(","))
        .env_remove("OPENBLAS_CORETYPE")
        .env_remove("OPENBLAS_L2_SIZE")
        .output()
        .ok()
        .filter(|o| o.status.success())
        .and_then(|o| serde_json::from_slice::<serde_json::Value>(&o.stdout).ok());
    println!("trees over {n} records x {d} features (2 threads)");
    println!(
        "{:<10} {:>10} {:>12} {:>15} {:>12} {:>12}",
        "linkage", "assort s", "reference s", "reference/ours", "top (ours)", "top (ref)"
    );
    for (name, secs, top) in ours {
        match &reference {
            Some(r) => {
                let rs = r[name]["seconds"].as_f64().unwrap_or(f64::NAN);
                let rt = r[name]["top"].as_f64().unwrap_or(f64::NAN);
                println!(
                    "{name:<10} {secs:>10.2} {rs:>12.2} {:>14.2}x {top:>12.6} {rt:>12.6}",
                    rs / secs
                );
            }
            None => println!(
                "{name:<10} {secs:>10.2} {:>12} {:>15} {top:>12.6}",
                "-", "-"
            ),
        }
    }
    if reference.is_none() {
        println!("(no reference: pip install -r tests/reference/requirements.txt)");
    }
}
