//! What a k-means fit costs where the data lives, side by side in one run:
//! `cargo bench --bench scale_rounds`. Starts a throwaway PostgreSQL
//! server (tests/common/pg.rs; `ASSORT_PG_BIN` names its programs when
//! they are not in Debian's place), loads `BENCH_N` (1,000,000) seeded
//! records of `BENCH_D` (16) features with a text key into a table, and
//! times, for `BENCH_K` (8) segments:
//! - the load (`\copy` from CSV), once;
//! - reading the whole table into assort's columns (the route of a recipe
//!   whose `input` names a table today), beside reading the same CSV,
//!   best of `BENCH_REPEATS`;
//! - the range query (the shifts) and the sample of `BENCH_SAMPLE`
//!   (20,000) records by rank, in the database;
//! - one exact round in the database (all its parallel workers) and in
//!   memory (`engine::exact::round`), best of `BENCH_REPEATS` (3);
//! - the whole driven fit (`scale::drive::fit`, 8 restarts on the sample,
//!   3 refined), in the database and in memory, once each, with the
//!   rounds each made; the two must agree bit for bit.
//!
//! The server keeps PostgreSQL's defaults (two workers per gather) but
//! for `shared_buffers`, set to a quarter of the table's size or more.

mod common;
#[path = "../tests/common/pg.rs"]
mod pg;

use assort::engine::exact::{self, Shifts};
use assort::scale::drive::{self, InMemory};
use assort::scale::postgres::{Database, Target};
use assort::scale::sql::{InEngine, SqlEngine};
use common::{best_of, fit_settings, records, timed};
use ndarray::Array2;
use std::io::Write as _;

/// Loads `data` into the table `records` (`id` text, then `x0`...) with
/// `\copy` from a CSV written here; shared buffers sized to the table
/// first. Returns the load's time.
fn load(pg: &pg::Postgres, data: &Array2<f64>) -> f64 {
    let (n, d) = data.dim();
    let csv = pg.socket_dir().join("records.csv");
    {
        let file = std::fs::File::create(&csv).expect("a scratch file");
        let mut out = std::io::BufWriter::new(file);
        for (i, row) in data.rows().into_iter().enumerate() {
            let values: Vec<String> = row.iter().map(|x| format!("{x:?}")).collect();
            writeln!(out, "C{i:07},{}", values.join(",")).expect("the scratch file is written");
        }
    }
    let columns: Vec<String> = (0..d).map(|j| format!("x{j} DOUBLE PRECISION")).collect();
    let buffers = ((n * (d * 8 + 40)) / (4 << 20)).max(32);
    pg.psql(&format!("ALTER SYSTEM SET shared_buffers = '{buffers}MB';"))
        .expect("the server takes the setting");
    pg.restart().expect("the server restarts");
    timed(|| {
        pg.psql(&format!(
            "CREATE TABLE records (id TEXT, {});\n\\copy records FROM '{}' WITH (FORMAT csv)\nVACUUM ANALYZE records;",
            columns.join(", "),
            csv.display()
        ))
        .expect("the records load")
    })
    .1
}

/// The variables that lead to the bench's server as `bench`, through a
/// service file in the returned folder.
fn service(pg: &pg::Postgres) -> (tempfile::TempDir, impl Fn(&str) -> Option<String>) {
    let dir = tempfile::tempdir().expect("a scratch folder");
    let service = dir.path().join("pg_service.conf");
    pg.service_file(&service, "bench", "");
    let service = service.display().to_string();
    (dir, move |v: &str| {
        (v == "PGSERVICEFILE").then(|| service.clone())
    })
}

/// Reading the whole table into assort's columns, and the same records
/// from the CSV: the best times of each.
fn whole_reads(
    pg: &pg::Postgres,
    env: &dyn Fn(&str) -> Option<String>,
    d: usize,
    repeats: usize,
) -> (f64, f64) {
    use assort::run::load::{self, Columns};
    let numeric: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    let cols = Columns {
        key: Some("id"),
        numeric: &numeric,
        kinds: &[],
        text: &[],
        decimal: assort::plan::DecimalMark::Point,
    };
    let source = assort::scale::source::Source {
        connection: "bench".into(),
        text: "records".into(),
    };
    let table = best_of(repeats, || {
        std::hint::black_box(load::load_source(&source, &cols, env).expect("the table reads"));
    });
    // The same records as a CSV with a header.
    let csv = pg.socket_dir().join("records_with_header.csv");
    let body = std::fs::read_to_string(pg.socket_dir().join("records.csv")).expect("the CSV");
    std::fs::write(&csv, format!("id,{}\n{body}", numeric.join(","))).expect("a scratch file");
    let file = best_of(repeats, || {
        std::hint::black_box(load::load(&csv, "records.csv", ',', &cols).expect("the CSV reads"));
    });
    (table, file)
}

/// The driven fit in memory and in the database: their times, the calls
/// of a round made, and whether the two agree bit for bit.
fn fits(
    db: &mut Database,
    data: &Array2<f64>,
    sample: &Array2<f64>,
    k: usize,
    shifts: &Shifts,
) -> (f64, f64, usize, bool) {
    let settings = fit_settings(k);
    let mut memory = InMemory {
        data: data.view(),
        shifts,
    };
    let (here, here_time) =
        timed(|| drive::fit(sample.view(), &settings, shifts, &mut memory).expect("a fit"));
    let mut engine = InEngine {
        engine: db,
        source: "records".into(),
        features: (0..data.ncols()).map(|j| format!("x{j}")).collect(),
        shifts,
    };
    let (there, there_time) =
        timed(|| drive::fit(sample.view(), &settings, shifts, &mut engine).expect("a fit"));
    let calls = here.iter().map(|r| r.rounds + 1).sum();
    let same = format!("{here:?}") == format!("{there:?}");
    (here_time, there_time, calls, same)
}

fn main() {
    let (n, d, k, size, repeats) = common::shape();
    let Some(pg) = pg::Postgres::start() else {
        eprintln!("no PostgreSQL server could be started; nothing measured");
        return;
    };
    let data = records(n, d);
    let features: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    let load = load(&pg, &data);
    let (_dir, env) = service(&pg);
    let (read_table, read_csv) = whole_reads(&pg, &env, d, repeats);
    let mut db = Target::resolve("bench", &env)
        .and_then(|t| t.connect())
        .expect("the bench connects");
    let (largest, range) = timed(|| db.largest("records", &features).expect("the range"));
    let shifts = Shifts::of(&largest).expect("data in range");
    let ((_, values), sampling) = timed(|| {
        db.sample("records", "id", &features, (2026, size))
            .expect("the sample")
    });
    let sample = Array2::from_shape_vec((size, d), values).expect("size x d values");
    let centres = common::first_rows(&sample, k);
    let there = best_of(repeats, || {
        std::hint::black_box(
            db.round("records", &features, &centres, &shifts)
                .expect("a round"),
        );
    });
    let here = best_of(repeats, || {
        std::hint::black_box(exact::round(data.view(), &centres, &shifts));
    });
    let (fit_here, fit_there, calls, same) = fits(&mut db, &data, &sample, k, &shifts);

    println!("k-means where the data lives, {n} x {d}, k = {k}, sample {size}:");
    println!("  load into PostgreSQL (\\copy)      {load:>9.2} s");
    println!("  whole table into assort           {read_table:>9.2} s");
    println!("  the same records from the CSV     {read_csv:>9.2} s");
    println!("  range query (shifts)              {range:>9.2} s");
    println!("  sample by rank, in the database   {sampling:>9.2} s");
    println!(
        "  one round, in the database        {there:>9.3} s  ({:.2} rounds/s)",
        1.0 / there
    );
    println!(
        "  one round, in memory              {here:>9.3} s  ({:.2} rounds/s)",
        1.0 / here
    );
    println!("  database / memory, per round      {:>9.1}x", there / here);
    println!("  driven fit, in the database       {fit_there:>9.2} s  ({calls} rounds)");
    println!("  driven fit, in memory             {fit_here:>9.2} s  ({calls} rounds)");
    println!("  the two fits are the same, bit for bit: {same}");
}
