//! k-means rounds on an Apache DataFusion Ballista cluster
//! (src/scale/cluster.rs; the `ballista` feature, tested in CI's step of
//! its own).
//!
//! The test starts a scheduler and two executors as processes of their own
//! on this machine (`assort-cluster-node`, Ballista's scheduler and
//! executor), names a folder of eight Parquet files as a table, and has the
//! cluster read it in at least four parts. Against the same records in
//! memory:
//! - each feature's largest magnitude (the exact sums' shifts) is the same;
//! - the sample drawn on the cluster by rank is the one drawn here, the
//!   same keys in the same order with the same values;
//! - the driven fit (restarts on the sample, the three best refined by
//!   rounds on the cluster) is the fit refined in memory, bit for bit;
//! - every record is placed in the same segment;
//! - both executors took part (each wrote shuffle files).
//!
//! Data: the Wine recognition data (UCI; tests/data/ATTRIBUTION.md),
//! repeated 50 times (8,900 records keyed by their number), z-scored in
//! the query itself, so the cluster prepares the values as memory does.

mod common;

use arrow_array::{ArrayRef, Float64Array, Int64Array, RecordBatch};
use assort::engine::exact::Shifts;
use assort::scale::cluster::{free_port, Cluster, TrialCluster};
use assort::scale::sample;
use assort::scale::sql::SqlEngine;
use ndarray::{Array2, Axis};
use parquet::arrow::ArrowWriter;
use parquet::file::properties::WriterProperties;
use std::path::Path;
use std::sync::Arc;

/// Writes the records numbered from 0 (key `record`) with `data`'s columns
/// `x0`, `x1`, ... as `parts` Parquet files in `folder`, in row groups of
/// 500 records.
fn write_parts(folder: &Path, data: &Array2<f64>, parts: usize) {
    std::fs::create_dir_all(folder).unwrap();
    let n = data.nrows();
    let per = n.div_ceil(parts);
    for p in 0..parts {
        let rows = (p * per)..((p + 1) * per).min(n);
        let keys = Int64Array::from_iter_values(rows.clone().map(|i| i as i64));
        let mut fields: Vec<(String, ArrayRef)> = vec![("record".into(), Arc::new(keys))];
        for j in 0..data.ncols() {
            let values: Vec<f64> = rows.clone().map(|i| data[[i, j]]).collect();
            fields.push((format!("x{j}"), Arc::new(Float64Array::from(values))));
        }
        let batch = RecordBatch::try_from_iter(fields).unwrap();
        let props = WriterProperties::builder()
            .set_max_row_group_row_count(Some(500))
            .build();
        let file = std::fs::File::create(folder.join(format!("part-{p}.parquet"))).unwrap();
        let mut writer = ArrowWriter::try_new(file, batch.schema(), Some(props)).unwrap();
        writer.write(&batch).unwrap();
        writer.close().unwrap();
    }
}

/// The Wine data's measurements repeated `times` times.
fn wine_times(times: usize) -> Array2<f64> {
    let raw = common::measurements("wine.csv");
    let rows: Vec<f64> = (0..times).flat_map(|_| raw.iter().copied()).collect();
    Array2::from_shape_vec((raw.nrows() * times, raw.ncols()), rows).unwrap()
}

/// Files under `dir`, at any depth.
fn files_under(dir: &Path) -> usize {
    std::fs::read_dir(dir)
        .map(|entries| {
            entries
                .flatten()
                .map(|e| {
                    let path = e.path();
                    if path.is_dir() {
                        files_under(&path)
                    } else {
                        1
                    }
                })
                .sum()
        })
        .unwrap_or(0)
}

/// The number of the nearest of `centres` to `row`, ties to the lower
/// number: the placement a round makes (squared distances summed feature
/// by feature from the first).
fn nearest(row: &[f64], centres: &[f64]) -> usize {
    let d = row.len();
    let mut best = (0, f64::INFINITY);
    for (s, c) in centres.chunks_exact(d).enumerate() {
        let dist: f64 = row.iter().zip(c).map(|(x, m)| (x - m) * (x - m)).sum();
        if dist < best.1 {
            best = (s, dist);
        }
    }
    best.0
}

#[test]
fn rounds_on_a_ballista_cluster_give_the_fit_and_the_segments_made_in_memory() {
    let data = wine_times(50);
    let (n, d) = data.dim();
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("wine");
    write_parts(&folder, &data, 8);

    // z-scores (population standard deviation), in SQL and here alike:
    // (x - mean) / sd, with the same two doubles.
    let params: Vec<(f64, f64)> = (0..d)
        .map(|j| {
            let col = data.column(j);
            let mean = col.sum() / n as f64;
            let var = col.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n as f64;
            (mean, var.sqrt())
        })
        .collect();
    let features: Vec<String> = (params.iter().enumerate())
        .map(|(j, (m, s))| {
            format!("((x{j} - CAST({m:?} AS DOUBLE PRECISION)) / CAST({s:?} AS DOUBLE PRECISION))")
        })
        .collect();
    let prepared =
        Array2::from_shape_fn((n, d), |(i, j)| (data[[i, j]] - params[j].0) / params[j].1);

    // A scheduler and two executors, each a process of its own, each
    // executor running one task at a time.
    let node = Path::new(env!("CARGO_BIN_EXE_assort-cluster-node"));
    let trial = TrialCluster::start(node, 2, 1, dir.path()).unwrap();
    let scheduler = trial.scheduler;
    let mut cluster = Cluster::connect("127.0.0.1", scheduler, 4).unwrap();
    cluster.register_parquet("wine", &folder).unwrap();
    let count = cluster
        .read("SELECT COUNT(*) FROM wine", "counting")
        .unwrap();
    assert_eq!(count, vec![vec![Some(n.to_string())]]);

    // The shifts.
    let largest = cluster.largest("wine", &features).unwrap();
    let here_largest: Vec<f64> = (0..d)
        .map(|j| prepared.column(j).iter().fold(0f64, |m, x| m.max(x.abs())))
        .collect();
    assert_eq!(largest, here_largest, "each feature's largest magnitude");
    let shifts = Shifts::of(&largest).unwrap();

    // The sample.
    let (seed, size) = (2026, 1000);
    let keys: Vec<String> = (0..n).map(|i| i.to_string()).collect();
    let drawn = sample::draw(keys.iter().map(String::as_str), seed, size);
    let picked: Vec<usize> = drawn.iter().map(|k| k.parse().unwrap()).collect();
    let here_sample = prepared.select(Axis(0), &picked);
    let (sampled, values) = cluster
        .sample("wine", "record", &features, (seed, size))
        .unwrap();
    assert_eq!(sampled, drawn, "the same sample, in rank order");
    let there_sample = Array2::from_shape_vec((size, d), values).unwrap();
    assert_eq!(there_sample, here_sample, "the same values");

    // The fit.
    let settings = common::four_of_eight_restarts(seed);
    let here = common::fit_in_memory(prepared.view(), here_sample.view(), &settings, &shifts);
    assert_eq!(here.len(), 3, "the three best restarts are refined");
    assert_eq!(here[0].sizes.iter().sum::<u64>(), n as u64);
    common::same_fit_in(
        &mut cluster,
        "wine",
        &features,
        there_sample.view(),
        &settings,
        &shifts,
        &here,
        "rounds on the cluster",
    );

    // The segments.
    let centres = &here[0].centres;
    let mut placed = cluster
        .assign("wine", "record", &features, centres)
        .unwrap();
    placed.sort_by_key(|(k, _)| k.parse::<usize>().unwrap());
    let here_placed: Vec<(String, usize)> = (0..n)
        .map(|i| {
            (
                i.to_string(),
                nearest(prepared.row(i).as_slice().unwrap(), centres),
            )
        })
        .collect();
    assert_eq!(placed, here_placed, "every record in the same segment");

    // The work was split: the scan runs in at least four parts, and both
    // executors ran some of them.
    let round = assort::scale::round::round_query(
        "wine",
        &features,
        centres,
        &shifts,
        assort::scale::sample::Dialect::DataFusion,
    );
    let plan = cluster.plan(&round).unwrap();
    let groups: usize = plan
        .split("ResolvedStage[stage_id=1.0, partitions=")
        .nth(1)
        .map(|rest| {
            rest.chars()
                .take_while(char::is_ascii_digit)
                .collect::<String>()
        })
        .and_then(|g| g.parse().ok())
        .unwrap_or_else(|| panic!("no first stage in the plan:\n{plan}"));
    assert!(groups >= 4, "the folder is read in {groups} parts:\n{plan}");
    for work in &trial.work_dirs {
        assert!(files_under(work) > 0, "{} ran no task", work.display());
    }
}

/// A scheduler nobody runs: the message names the cluster's address and
/// the step.
#[test]
fn a_cluster_that_cannot_be_reached_is_named() {
    let port = free_port().unwrap();
    let error = match Cluster::connect("127.0.0.1", port, 4) {
        Err(e) => e.to_string(),
        Ok(mut c) => c.read("SELECT 1", "a first query").unwrap_err().to_string(),
    };
    assert!(
        error.contains(&format!("the cluster at 127.0.0.1:{port}")),
        "{error}"
    );
}

/// The Wine recipe over `folder` read in passes, writing into `out`, with
/// `cluster` after its input (` cluster trial`, or nothing).
fn wine_recipe(folder: &str, cluster: &str, out: &str, d: usize) -> String {
    let features: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    format!(
        r#"recipe "wine in passes" records "wines"
seed 2026
input "{folder}" key record read passes{cluster}
features {}
transform x3 clip 0.01..0.99
scale zscore
kmeans k 2..4 restarts 8 sample 1000 by key
choose k by silhouette
save assignments "{out}/segments.csv"
save centroids "{out}/centres.csv"
save profiles "{out}/profiles.csv"
save model "{out}/model.json"
"#,
        features.join(", ")
    )
}

/// Runs assort in `dir` with `args` and the variables `env`.
fn assort(dir: &Path, args: &[&str], env: &[(&str, String)]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_assort"))
        .args(args)
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .envs(env.iter().map(|(k, v)| (k, v)))
        .output()
        .unwrap()
}

/// A recipe pointed at a cluster (`input "wine" key record read passes
/// cluster trial`, the scheduler's address in `ASSORT_CLUSTER_TRIAL`): its
/// rounds run on a scheduler and two executors, processes of their own,
/// and it writes the assignments, centres, profiles and model the same
/// recipe writes with its rounds here, byte for byte (the model's record
/// of the recipe's own digest aside). Without the variable, or with an
/// address where nothing answers, it stops before its first pass, naming
/// them, and writes nothing.
#[test]
fn a_recipe_pointed_at_a_cluster_writes_what_it_writes_here() {
    let data = wine_times(50);
    let d = data.ncols();
    let dir = tempfile::tempdir().unwrap();
    write_parts(&dir.path().join("wine"), &data, 8);
    std::fs::write(
        dir.path().join("here.assort"),
        wine_recipe("wine", "", "here", d),
    )
    .unwrap();
    std::fs::write(
        dir.path().join("there.assort"),
        wine_recipe("wine", " cluster trial", "there", d),
    )
    .unwrap();

    let unset = assort(dir.path(), &["run", "there.assort"], &[]);
    let said = String::from_utf8_lossy(&unset.stderr);
    assert!(!unset.status.success());
    assert!(said.contains("ASSORT_CLUSTER_TRIAL"), "{said}");
    assert!(!dir.path().join("there").exists(), "nothing is written");
    // An address where nothing answers stops the run before its first
    // pass, naming the address.
    let nobody = format!("127.0.0.1:{}", free_port().unwrap());
    let gone = assort(
        dir.path(),
        &["run", "there.assort"],
        &[("ASSORT_CLUSTER_TRIAL", nobody.clone())],
    );
    let said = String::from_utf8_lossy(&gone.stderr);
    assert!(!gone.status.success());
    assert!(
        said.contains(&format!("nothing answers at {nobody}")),
        "{said}"
    );
    assert!(!dir.path().join("there").exists(), "nothing is written");

    let node = Path::new(env!("CARGO_BIN_EXE_assort-cluster-node"));
    let trial = TrialCluster::start(node, 2, 1, dir.path()).unwrap();
    let at = [(
        "ASSORT_CLUSTER_TRIAL",
        format!("127.0.0.1:{}", trial.scheduler),
    )];
    for recipe in ["here.assort", "there.assort"] {
        let run = assort(dir.path(), &["run", recipe], &at);
        assert!(
            run.status.success(),
            "{recipe}: {}",
            String::from_utf8_lossy(&run.stderr)
        );
    }
    for file in ["segments.csv", "centres.csv", "profiles.csv", "model.json"] {
        let read = |side: &str| {
            let text = std::fs::read_to_string(dir.path().join(side).join(file)).unwrap();
            text.lines()
                .filter(|l| !l.contains("recipe_sha256"))
                .collect::<Vec<_>>()
                .join("\n")
        };
        let (here, there) = (read("here"), read("there"));
        assert!(here.len() > 100, "{file} is written");
        if here != there {
            let (a, b) = (here.lines().zip(there.lines()))
                .find(|(a, b)| a != b)
                .unwrap_or_default();
            panic!("{file} differs with the rounds on the cluster:\n{a}\n{b}");
        }
    }
    for work in &trial.work_dirs {
        assert!(files_under(work) > 0, "{} ran no task", work.display());
    }
}
