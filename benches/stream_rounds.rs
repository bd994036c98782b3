//! What a k-means fit costs streamed from Parquet, beside the same fit in
//! memory, in one run: `cargo bench --bench stream_rounds`. Writes
//! `BENCH_N` (1,000,000) seeded records of `BENCH_D` (16) features with a
//! text key as Parquet parts of 10,000,000 records, in row groups of
//! `BENCH_GROUP` (1,048,576, the arrow-rs and pyarrow default) records,
//! snappy-compressed, into `BENCH_DIR` (a temporary folder unless given;
//! a folder given is kept and reused when it already holds the parts),
//! then times, for `BENCH_K` (8) segments:
//! - the range pass (the shifts) and the sample pass of `BENCH_SAMPLE`
//!   (20,000) records by rank;
//! - one exact round streamed and in memory (`engine::exact::round`),
//!   best of `BENCH_REPEATS` (3);
//! - the whole driven fit (`scale::drive::fit`, 8 restarts on the sample,
//!   3 refined), streamed and in memory, with the rounds each made; the
//!   two must agree bit for bit;
//! - the streamed side's peak resident memory (measured before the
//!   in-memory side fills memory) beside what `Passes::peak` states.
//!
//! The in-memory side needs the records in memory (`8 n d` bytes);
//! `BENCH_MEMORY=0` leaves it out (for 100,000,000 records).

mod common;

use assort::engine::exact::{self, Shifts};
use assort::plan::{FeatureKind, Transform};
use assort::run::prepare::FeatureParams;
use assort::scale::drive::{self, InMemory, Refined};
use assort::scale::stream::{Passes, Streamed};
use common::{best_of, fit_settings, records, resident_peak, setting, timed, write_parquet};
use ndarray::Array2;

/// Records per Parquet part.
const PART: usize = 10_000_000;

fn main() {
    let (n, d, k, size, repeats) = common::shape();
    let group = setting("BENCH_GROUP", 1 << 20);
    let with_memory = setting("BENCH_MEMORY", 1) == 1;
    let temp = tempfile::tempdir().expect("a temporary folder");
    let folder = std::env::var("BENCH_DIR").map_or(temp.path().join("records"), Into::into);
    let existing = std::fs::read_dir(&folder).map_or(0, |r| r.count());
    let (bytes, writing) = match existing {
        0 => timed(|| write_parquet(&folder, n, d, group, PART)),
        _ => (0, 0.0),
    };
    // The streamed side's peak, not the writer's: the writer's freed
    // memory goes back to the system, then `5` resets the peak resident
    // memory to what is resident (Linux's proc(5), /proc/pid/clear_refs).
    // SAFETY: malloc_trim only releases free memory.
    unsafe { libc::malloc_trim(0) };
    let _ = std::fs::write("/proc/self/clear_refs", "5");
    let before = resident_peak();
    let features: Vec<usize> = (1..=d).collect();
    let passes = Passes::open(&folder, "records", Some(0), &features).expect("the parts");
    assert_eq!(passes.records(), n, "the folder holds BENCH_N records");
    let params: Vec<FeatureParams> = (0..d)
        .map(|j| FeatureParams {
            column: format!("x{j}"),
            fill: None,
            filled: 0,
            clip: None,
            transform: Transform::None,
            centre: 0.0,
            divisor: 1.0,
            multiplier: 1.0,
            constant: false,
            kind: FeatureKind::Number,
        })
        .collect();
    let (largest, range) = timed(|| passes.largest(&params).expect("the range"));
    let shifts = Shifts::of(&largest).expect("data in range");
    let (drawn, sampling) = timed(|| passes.sample(2026, size).expect("the sample"));
    let values: Vec<f64> = drawn
        .iter()
        .flat_map(|r| r.2.iter().flatten().copied())
        .collect();
    let sample = Array2::from_shape_vec((size, d), values).expect("size x d values");
    let centres = common::first_rows(&sample, k);
    let streamed_round = best_of(repeats, || {
        std::hint::black_box(passes.round(&params, &centres, &shifts).expect("a round"));
    });
    let mut engine = Streamed {
        passes: &passes,
        params: &params,
        shifts: &shifts,
    };
    let (there, fit_there) =
        timed(|| drive::fit(sample.view(), &fit_settings(k), &shifts, &mut engine).expect("a fit"));
    let calls: usize = there.iter().map(|r| r.rounds + 1).sum();
    let streamed_peak = resident_peak();
    let threads = rayon::current_num_threads();

    println!(
        "k-means streamed from Parquet, {n} x {d}, k = {k}, sample {size}, {threads} threads:"
    );
    if existing == 0 {
        println!(
            "  write the parts ({:.1} GB)          {writing:>9.2} s",
            bytes as f64 / 1e9
        );
    }
    println!("  range pass (shifts)               {range:>9.2} s");
    println!("  sample pass, by rank              {sampling:>9.2} s");
    println!(
        "  one round, streamed               {streamed_round:>9.3} s  ({:.3} rounds/s)",
        1.0 / streamed_round
    );
    println!("  driven fit, streamed              {fit_there:>9.2} s  ({calls} rounds)");
    println!(
        "  resident peak, streamed side      {streamed_peak:>9} MiB  ({before} MiB before it; stated: {} MiB beyond that)",
        passes.peak(threads, size) >> 20
    );
    if with_memory {
        memory_side(
            n,
            d,
            (&centres, &shifts, &sample),
            repeats,
            streamed_round,
            &there,
        );
    }
}

/// The same round and fit in memory, beside the streamed ones.
fn memory_side(
    n: usize,
    d: usize,
    (centres, shifts, sample): (&[f64], &Shifts, &Array2<f64>),
    repeats: usize,
    streamed_round: f64,
    there: &[Refined],
) {
    let (data, generating) = timed(|| records(n, d));
    let here_round = best_of(repeats, || {
        std::hint::black_box(exact::round(data.view(), centres, shifts));
    });
    let mut memory = InMemory {
        data: data.view(),
        shifts,
    };
    let k = centres.len() / d;
    let (here, fit_here) =
        timed(|| drive::fit(sample.view(), &fit_settings(k), shifts, &mut memory).expect("a fit"));
    println!("  (records generated into memory    {generating:>9.2} s)");
    println!(
        "  one round, in memory              {here_round:>9.3} s  ({:.2} rounds/s)",
        1.0 / here_round
    );
    println!(
        "  streamed / memory, per round      {:>9.1}x",
        streamed_round / here_round
    );
    println!("  driven fit, in memory             {fit_here:>9.2} s");
    println!(
        "  the two fits are the same, bit for bit: {}",
        format!("{here:?}") == format!("{there:?}")
    );
}
