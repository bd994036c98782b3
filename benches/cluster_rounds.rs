//! What a k-means fit costs on an Apache DataFusion Ballista cluster,
//! beside the same fit in memory, in one run (the `ballista` feature):
//! `cargo bench --features ballista --bench cluster_rounds`. Writes
//! `BENCH_N` (1,000,000) seeded records of `BENCH_D` (16) features with a
//! text key as `BENCH_PARTS` (8) snappy Parquet parts, starts a trial
//! cluster on this machine (a scheduler and `BENCH_EXECUTORS` (2)
//! executors of one task slot each, processes of their own), reads the
//! parts in as many partitions as there are parts, and times, for
//! `BENCH_K` (8) segments:
//! - the range query (the shifts) and the sample query of `BENCH_SAMPLE`
//!   (20,000) records by rank;
//! - one exact round on the cluster and in memory
//!   (`engine::exact::round`), best of `BENCH_REPEATS` (3);
//! - the whole driven fit (`scale::drive::fit`, 8 restarts on the sample,
//!   3 refined), on the cluster and in memory; the two must agree bit for
//!   bit.

mod common;

use assort::engine::exact::{self, Shifts};
use assort::scale::cluster::{Cluster, TrialCluster};
use assort::scale::drive::{self, InMemory};
use assort::scale::sql::{InEngine, SqlEngine};
use common::{best_of, fit_settings, records, setting, timed, write_parquet};
use ndarray::Array2;
use std::path::Path;

fn main() {
    let (n, d, k, size, repeats) = common::shape();
    let parts = setting("BENCH_PARTS", 8);
    let executors = setting("BENCH_EXECUTORS", 2);
    let temp = tempfile::tempdir().expect("a temporary folder");
    let folder = temp.path().join("records");
    let (bytes, writing) = timed(|| write_parquet(&folder, n, d, 1 << 20, n.div_ceil(parts)));

    let node = Path::new(env!("CARGO_BIN_EXE_assort-cluster-node"));
    let trial = TrialCluster::start(node, executors, 1, temp.path()).expect("a trial cluster");
    let mut cluster = Cluster::connect("127.0.0.1", trial.scheduler, parts).expect("connected");
    cluster
        .register_parquet("records", &folder)
        .expect("the parts as a table");
    let features: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    let (largest, range) = timed(|| cluster.largest("records", &features).expect("the range"));
    let shifts = Shifts::of(&largest).expect("data in range");
    let (drawn, sampling) = timed(|| {
        cluster
            .sample("records", "id", &features, (2026, size))
            .expect("the sample")
    });
    let sample = Array2::from_shape_vec((size, d), drawn.1).expect("size x d values");
    let centres = common::first_rows(&sample, k);
    let cluster_round = best_of(repeats, || {
        std::hint::black_box(
            cluster
                .round("records", &features, &centres, &shifts)
                .expect("a round"),
        );
    });
    let mut engine = InEngine {
        engine: &mut cluster,
        source: "records".into(),
        features: features.clone(),
        shifts: &shifts,
    };
    let (there, fit_there) =
        timed(|| drive::fit(sample.view(), &fit_settings(k), &shifts, &mut engine).expect("a fit"));
    let calls: usize = there.iter().map(|r| r.rounds + 1).sum();
    drop(trial);

    let (data, _) = timed(|| records(n, d));
    let here_round = best_of(repeats, || {
        std::hint::black_box(exact::round(data.view(), &centres, &shifts));
    });
    let mut memory = InMemory {
        data: data.view(),
        shifts: &shifts,
    };
    let (here, fit_here) =
        timed(|| drive::fit(sample.view(), &fit_settings(k), &shifts, &mut memory).expect("a fit"));

    println!(
        "k-means on a Ballista cluster ({executors} executors, one slot each, {parts} partitions), {n} x {d}, k = {k}, sample {size}:"
    );
    println!(
        "  write the parts ({:.2} GB)         {writing:>9.2} s",
        bytes as f64 / 1e9
    );
    println!("  range query (shifts)              {range:>9.2} s");
    println!("  sample query, by rank             {sampling:>9.2} s");
    println!(
        "  one round, on the cluster         {cluster_round:>9.3} s  ({:.3} rounds/s)",
        1.0 / cluster_round
    );
    println!(
        "  one round, in memory              {here_round:>9.3} s  ({:.2} rounds/s)",
        1.0 / here_round
    );
    println!(
        "  cluster / memory, per round       {:>9.1}x",
        cluster_round / here_round
    );
    println!("  driven fit, on the cluster        {fit_there:>9.2} s  ({calls} rounds)");
    println!("  driven fit, in memory             {fit_here:>9.2} s");
    println!(
        "  the two fits are the same, bit for bit: {}",
        format!("{here:?}") == format!("{there:?}")
    );
}
