//! Rounds read in passes from a Parquet input (src/scale/stream.rs): the
//! third engine of the driver, for inputs larger than memory.
//!
//! - Over a folder of three parts of many row groups, read in parallel
//!   batch by batch, the sample is the one drawn in memory from the same
//!   keys, a round's exact sums are the in-memory round's, and the driven
//!   fit (restarts on the sample, the best refined by streamed rounds) is
//!   the in-memory driver's fit, bit for bit.
//! - A gap with no fill leaves its record out of a round; with a fill the
//!   record counts with the fill. A value that is not a number stops the
//!   pass naming the input and the record.
//! - Under an address-space limit smaller than the input (set with
//!   `setrlimit` in a child process), the fit completes; a whole read of
//!   the same input under the same limit fails, so the limit bites.
//!
//! Data: the Wine recognition data (UCI; tests/data/ATTRIBUTION.md), its
//! 13 measurements z-scored by the features' parameters, repeated 50
//! times. The large input of the memory test is seeded uniform numbers
//! (its values do not matter, only its size).

mod common;

use arrow_array::{ArrayRef, Float64Array, RecordBatch, StringArray};
use assort::engine::exact::{self, Shifts};
use assort::engine::kmeans::{KMeansSettings, Seeding};
use assort::plan::{FeatureKind, Transform};
use assort::run::prepare::FeatureParams;
use assort::scale::drive;
use assort::scale::sample;
use assort::scale::stream::{PassError, Passes, Streamed};
use ndarray::{Array2, Axis};
use parquet::arrow::ArrowWriter;
use parquet::file::properties::WriterProperties;
use std::path::Path;
use std::sync::Arc;

/// Writes `columns` (name, values; `None` a null) with a text key `id`
/// as `parts` Parquet files in `folder`, in row groups of `group`
/// records.
fn write_parts(
    folder: &Path,
    keys: &[String],
    columns: &[(String, Vec<Option<f64>>)],
    parts: usize,
    group: usize,
) {
    std::fs::create_dir_all(folder).unwrap();
    let n = keys.len();
    let per = n.div_ceil(parts);
    for p in 0..parts {
        let rows = (p * per)..((p + 1) * per).min(n);
        let mut fields: Vec<(String, ArrayRef)> = vec![(
            "id".into(),
            Arc::new(StringArray::from_iter_values(keys[rows.clone()].iter())),
        )];
        for (name, values) in columns {
            let array = Float64Array::from(values[rows.clone()].to_vec());
            fields.push((name.clone(), Arc::new(array)));
        }
        let batch = RecordBatch::try_from_iter(fields).unwrap();
        let props = WriterProperties::builder()
            .set_max_row_group_row_count(Some(group))
            .build();
        let file = std::fs::File::create(folder.join(format!("part-{p:03}.parquet"))).unwrap();
        let mut writer = ArrowWriter::try_new(file, batch.schema(), Some(props)).unwrap();
        writer.write(&batch).unwrap();
        writer.close().unwrap();
    }
}

/// A feature read as it is, or z-scored by `centre` and `divisor`.
fn params(column: &str, centre: f64, divisor: f64, fill: Option<f64>) -> FeatureParams {
    FeatureParams {
        column: column.into(),
        fill,
        filled: 0,
        clip: None,
        transform: Transform::None,
        centre,
        divisor,
        multiplier: 1.0,
        constant: false,
        kind: FeatureKind::Number,
    }
}

/// Wine's measurements repeated 50 times, keyed `W00000`...; with each
/// feature's z-score parameters (population standard deviation).
fn wine() -> (Vec<String>, Array2<f64>, Vec<FeatureParams>) {
    let raw = common::measurements("wine.csv");
    let (n, d) = raw.dim();
    let times = 50;
    let rows: Vec<f64> = (0..times).flat_map(|_| raw.iter().copied()).collect();
    let data = Array2::from_shape_vec((n * times, d), rows).unwrap();
    let keys = (0..n * times).map(|i| format!("W{i:05}")).collect();
    let params = (0..d)
        .map(|j| {
            let col = data.column(j);
            let mean = col.sum() / col.len() as f64;
            let var = col.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / col.len() as f64;
            params(&format!("x{j}"), mean, var.sqrt(), None)
        })
        .collect();
    (keys, data, params)
}

/// The records prepared in memory as a round prepares them.
fn prepared(data: &Array2<f64>, params: &[FeatureParams]) -> Array2<f64> {
    Array2::from_shape_fn(data.dim(), |(i, j)| {
        let p = &params[j];
        (data[[i, j]] - p.centre) / p.divisor * p.multiplier
    })
}

fn columns_of(data: &Array2<f64>) -> Vec<(String, Vec<Option<f64>>)> {
    (0..data.ncols())
        .map(|j| {
            (
                format!("x{j}"),
                data.column(j).iter().map(|&x| Some(x)).collect(),
            )
        })
        .collect()
}

#[test]
fn a_fit_streamed_from_parquet_parts_is_the_fit_in_memory() {
    let dir = tempfile::tempdir().unwrap();
    let (keys, data, params) = wine();
    let folder = dir.path().join("wine");
    // Three parts of row groups of 700 records: 13 row groups, the last
    // of each part short.
    write_parts(&folder, &keys, &columns_of(&data), 3, 700);
    let features: Vec<usize> = (1..=data.ncols()).collect();
    let passes = Passes::open(&folder, "wine", Some(0), &features).unwrap();
    assert_eq!(passes.records(), data.nrows());

    let x = prepared(&data, &params);
    let largest = passes.largest(&params).unwrap();
    let shifts = Shifts::of(&largest).unwrap();
    assert_eq!(shifts, Shifts::of_data(x.view()).unwrap());

    let (seed, size) = (2026, 1000);
    let drawn = passes.sample(seed, size).unwrap();
    let here = sample::draw(keys.iter().map(String::as_str), seed, size);
    let there: Vec<&str> = drawn.iter().map(|d| d.1.as_str()).collect();
    assert_eq!(there, here, "the same sample, in rank order");
    let rows: Vec<usize> = here.iter().map(|k| k[1..].parse().unwrap()).collect();
    for (d, &r) in drawn.iter().zip(&rows) {
        let raw: Vec<Option<f64>> = data.row(r).iter().map(|&v| Some(v)).collect();
        assert_eq!(d.2, raw, "the sample's raw values, record {r}");
    }
    let sample = x.select(Axis(0), &rows);

    let centres: Vec<f64> = sample
        .rows()
        .into_iter()
        .take(4)
        .flatten()
        .copied()
        .collect();
    let streamed = passes.round(&params, &centres, &shifts).unwrap();
    assert_eq!(streamed, exact::round(x.view(), &centres, &shifts));

    let settings = common::four_of_eight_restarts(seed);
    let in_memory = common::fit_in_memory(x.view(), sample.view(), &settings, &shifts);
    let mut engine = Streamed {
        passes: &passes,
        params: &params,
        shifts: &shifts,
    };
    let streamed = drive::fit(sample.view(), &settings, &shifts, &mut engine).unwrap();
    assert!(in_memory[0].converged && in_memory[0].rounds > 1);
    // Debug writes each double's shortest exact digits: equal text is
    // equal bits.
    assert_eq!(format!("{streamed:?}"), format!("{in_memory:?}"));
}

#[test]
fn gaps_are_left_out_or_filled_and_a_bad_value_is_located() {
    let dir = tempfile::tempdir().unwrap();
    let keys: Vec<String> = (0..6).map(|i| format!("K{i}")).collect();
    let values = vec![Some(1.0), None, Some(3.0), Some(4.0), None, Some(6.0)];
    let folder = dir.path().join("gaps");
    write_parts(&folder, &keys, &[("v".into(), values)], 2, 2);
    let passes = Passes::open(&folder, "gaps", None, &[1]).unwrap();
    let shifts = Shifts::of(&[6.0]).unwrap();
    let one_segment = [0.0];
    let dropped = passes
        .round(&[params("v", 0.0, 1.0, None)], &one_segment, &shifts)
        .unwrap();
    assert_eq!(dropped.counts, vec![4], "the two gaps are left out");
    assert_eq!(dropped.centres(&shifts, &one_segment), vec![3.5]);
    let filled = passes
        .round(&[params("v", 0.0, 1.0, Some(2.0))], &one_segment, &shifts)
        .unwrap();
    assert_eq!(filled.counts, vec![6]);
    assert_eq!(filled.centres(&shifts, &one_segment), vec![3.0]);

    // A text column read as numbers: `twice` is record 4 (0-based), in
    // the second part.
    let bad = dir.path().join("bad");
    std::fs::create_dir_all(&bad).unwrap();
    for (p, texts) in [["1", "2", "3"], ["4", "twice", "6"]].iter().enumerate() {
        let batch = RecordBatch::try_from_iter(vec![(
            "v",
            Arc::new(StringArray::from_iter_values(texts.iter())) as ArrayRef,
        )])
        .unwrap();
        let file = std::fs::File::create(bad.join(format!("part-{p}.parquet"))).unwrap();
        let mut writer = ArrowWriter::try_new(file, batch.schema(), None).unwrap();
        writer.write(&batch).unwrap();
        writer.close().unwrap();
    }
    let passes = Passes::open(&bad, "data/bad", None, &[0]).unwrap();
    let e = passes
        .round(&[params("v", 0.0, 1.0, None)], &one_segment, &shifts)
        .unwrap_err();
    assert!(
        matches!(&e, PassError::Read { shown, reason: assort::parquet::ReadError::NotANumber { record: 4, found, .. } }
            if shown == "data/bad" && found == "twice"),
        "{e:?}"
    );
    assert_eq!(e.to_string(), "data/bad: `twice` is not a number");
}

/// Records and features of the input the memory test writes: 3,000,000 ×
/// 16 doubles, 384 MB of values before the keys.
const BIG: (usize, usize) = (3_000_000, 16);

/// The address space the child may use: less than the input's values.
const LIMIT: u64 = 256 << 20;

/// Runs this test binary's ignored test `name` in a child process, under
/// an address-space limit of `LIMIT`, reading `folder`; its output, and
/// whether it succeeded.
fn child(name: &str, folder: &Path) -> (bool, String) {
    use std::os::unix::process::CommandExt;
    let mut cmd = std::process::Command::new(std::env::current_exe().unwrap());
    cmd.args([
        name,
        "--exact",
        "--ignored",
        "--nocapture",
        "--test-threads=1",
    ])
    .env("STREAM_INPUT", folder)
    .env("RAYON_NUM_THREADS", "2")
    // glibc reserves 64 MiB of address space per thread's arena.
    .env("MALLOC_ARENA_MAX", "1");
    // SAFETY: setrlimit is async-signal-safe and touches no memory of the
    // parent.
    unsafe {
        cmd.pre_exec(|| {
            let limit = libc::rlimit {
                rlim_cur: LIMIT,
                rlim_max: LIMIT,
            };
            if libc::setrlimit(libc::RLIMIT_AS, &limit) != 0 {
                return Err(std::io::Error::last_os_error());
            }
            Ok(())
        });
    }
    let out = cmd.output().unwrap();
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status.success(), text)
}

#[test]
fn a_fit_streams_an_input_larger_than_its_memory_limit() {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("big");
    let (n, d) = BIG;
    let keys: Vec<String> = (0..n).map(|i| format!("M{i:08}")).collect();
    let mut state = 0x9e37_79b9_7f4a_7c15_u64;
    let columns: Vec<(String, Vec<Option<f64>>)> = (0..d)
        .map(|j| {
            let values = (0..n)
                .map(|_| {
                    // SplitMix64 (Steele, Lea and Flood, 2014), to [0, 1).
                    state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
                    let mut z = state;
                    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
                    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
                    Some(((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64)
                })
                .collect();
            (format!("x{j}"), values)
        })
        .collect();
    write_parts(&folder, &keys, &columns, 4, 250_000);
    drop((keys, columns));
    let bytes: u64 = std::fs::read_dir(&folder)
        .unwrap()
        .map(|e| e.unwrap().metadata().unwrap().len())
        .sum();
    assert!(
        bytes > LIMIT,
        "the input ({bytes} bytes) is larger than the limit"
    );

    let (ok, text) = child("streamed_child", &folder);
    assert!(ok, "the streamed fit completes under the limit:\n{text}");
    assert!(text.contains(&format!("records {n}")), "{text}");
    // The memory figures, for the log.
    for line in text.lines().filter(|l| l.contains("MiB")) {
        eprintln!("{line}");
    }
    let (ok, text) = child("whole_read_child", &folder);
    assert!(!ok, "a whole read fails under the same limit:\n{text}");
}

/// The child of the memory test: draws the sample, measures the range and
/// fits 4 segments with streamed rounds; prints the records the final
/// round counted, and fails if it held more memory than the passes state
/// (beyond what the program held before the first pass).
#[test]
#[ignore = "run by a_fit_streams_an_input_larger_than_its_memory_limit"]
fn streamed_child() {
    let folder = std::env::var("STREAM_INPUT").unwrap();
    let (_, d) = BIG;
    let features: Vec<usize> = (1..=d).collect();
    let passes = Passes::open(Path::new(&folder), "big", Some(0), &features).unwrap();
    let params: Vec<FeatureParams> = (0..d)
        .map(|j| params(&format!("x{j}"), 0.5, 0.25, None))
        .collect();
    let baseline = resident_peak();
    let shifts = Shifts::of(&passes.largest(&params).unwrap()).unwrap();
    let drawn = passes.sample(7, 20_000).unwrap();
    let rows: Vec<f64> = drawn
        .iter()
        .flat_map(|(_, _, v)| {
            v.iter()
                .zip(&params)
                .map(|(x, p)| (x.unwrap() - p.centre) / p.divisor)
        })
        .collect();
    let sample = Array2::from_shape_vec((drawn.len(), d), rows).unwrap();
    let settings = KMeansSettings {
        k: 4,
        restarts: 4,
        max_rounds: 3,
        tolerance: 1e-4,
        seeding: Seeding::KMeansPlusPlus,
        seed: 7,
        sample: None,
        start: None,
    };
    let mut engine = Streamed {
        passes: &passes,
        params: &params,
        shifts: &shifts,
    };
    let fit = drive::fit(sample.view(), &settings, &shifts, &mut engine).unwrap();
    println!("records {}", fit[0].sizes.iter().sum::<u64>());
    let stated = (passes.peak(2, 20_000) >> 20) as u64;
    println!("stated {stated} MiB beyond {} MiB", baseline >> 10);
    let peak = resident_peak();
    println!("resident peak {} MiB", peak >> 10);
    assert!(
        peak - baseline <= stated << 10,
        "held {} KiB beyond the program, stated {stated} MiB",
        peak - baseline
    );
}

/// The most memory this process has held resident since it started, in
/// KiB (`VmHWM`: unlike getrusage's, it does not count the parent's
/// memory before the child's exec).
fn resident_peak() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap();
    let line = status.lines().find(|l| l.starts_with("VmHWM:")).unwrap();
    line.split_whitespace().nth(1).unwrap().parse().unwrap()
}

/// The other child: reads the same input whole, as a recipe reading
/// whole does.
#[test]
#[ignore = "run by a_fit_streams_an_input_larger_than_its_memory_limit"]
fn whole_read_child() {
    use assort::parquet::{read, As};
    let folder = std::env::var("STREAM_INPUT").unwrap();
    let wanted: Vec<(usize, As)> = (1..=BIG.1).map(|c| (c, As::Numbers)).collect();
    let columns = read(Path::new(&folder), &wanted, None).unwrap();
    println!("read {} columns", columns.len());
}
