//! Segments where the data lives, in a real PostgreSQL server.
//!
//! - A k-means round run as one SQL query gives the same exact sums
//!   (`engine::exact`) as the round in memory: in one table, and in a table
//!   split into four partitions read by parallel workers (the plan is
//!   checked to have launched them). Ten Lloyd rounds driven by the
//!   database's sums land on the same centres, bit for bit, as ten rounds
//!   in memory, and the within-segment sums of squares agree.
//! - A connection named in a service file reads only: queries that would
//!   write are refused and change nothing; failures name the connection.
//! - The seeded sample drawn in the database is the one drawn here.
//!
//! Data: the Wine recognition data (UCI; tests/data/ATTRIBUTION.md), its
//! 13 measurements z-scored here as the prepared features, and again
//! unscaled (proline reaches 1,680, the smallest measurement 0.13: shifts
//! far apart), repeated 50 times so that the partitions and workers have
//! rows to share. The server is a throwaway cluster (tests/common/pg.rs).

mod common;

use assort::engine::exact::{self, RoundSums, Shifts};
use assort::scale::round::{parse_round, round_query};
use assort::scale::sample::Dialect;
use assort::scale::sql::SqlEngine;
use common::pg::Postgres;
use ndarray::Array2;

/// Wine's measurements repeated `times` times, z-scored (population
/// standard deviation) when `standardise`.
fn wine(times: usize, standardise: bool) -> Array2<f64> {
    let raw = common::measurements("wine.csv");
    let mut data = raw.clone();
    if standardise {
        for mut col in data.columns_mut() {
            let n = col.len() as f64;
            let mean = col.sum() / n;
            let sd = (col.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n).sqrt();
            col.mapv_inplace(|x| (x - mean) / sd);
        }
    }
    let (n, d) = data.dim();
    let rows: Vec<f64> = (0..times).flat_map(|_| data.iter().copied()).collect();
    Array2::from_shape_vec((n * times, d), rows).unwrap()
}

/// The records as a PostgreSQL table `name` (`id`, then `x0`...), every
/// double written with all its digits; `partitions` > 1 splits it by a
/// hash of `id`.
fn load(pg: &Postgres, name: &str, data: &Array2<f64>, partitions: usize) {
    let d = data.ncols();
    let cols: Vec<String> = (0..d).map(|j| format!("x{j} DOUBLE PRECISION")).collect();
    let mut sql = format!("CREATE TABLE {name} (id INTEGER, {})", cols.join(", "));
    if partitions > 1 {
        sql.push_str(" PARTITION BY HASH (id);\n");
        for p in 0..partitions {
            sql.push_str(&format!(
                "CREATE TABLE {name}_{p} PARTITION OF {name} FOR VALUES WITH (MODULUS {partitions}, REMAINDER {p});\n"
            ));
        }
    } else {
        sql.push_str(";\n");
    }
    let rows: Vec<String> = data
        .rows()
        .into_iter()
        .enumerate()
        .map(|(i, r)| {
            // NaN stands for a gap.
            let v: Vec<String> = r
                .iter()
                .map(|x| match x.is_nan() {
                    true => "NULL".to_string(),
                    false => format!("{x:?}"),
                })
                .collect();
            format!("({i}, {})", v.join(", "))
        })
        .collect();
    sql.push_str(&format!(
        "INSERT INTO {name} VALUES\n{};\nANALYZE {name};\n",
        rows.join(",\n")
    ));
    pg.psql(&sql).unwrap();
}

/// Settings under which PostgreSQL plans parallel workers even for a
/// small table, and aggregates each partition by itself.
const PARALLEL: &str = "SET max_parallel_workers_per_gather = 2;\n\
    SET parallel_setup_cost = 0;\nSET parallel_tuple_cost = 0;\n\
    SET min_parallel_table_scan_size = 0;\nSET enable_partitionwise_aggregate = on;\n";

/// One round in the database, its rows read back as sums.
fn round_in(
    pg: &Postgres,
    table: &str,
    d: usize,
    centres: &[f64],
    shifts: &Shifts,
    settings: &str,
) -> RoundSums {
    let features: Vec<String> = (0..d).map(|j| format!("x{j}")).collect();
    let query = round_query(table, &features, centres, shifts, Dialect::Postgres);
    let rows = pg.psql(&format!("{settings}{query};")).unwrap();
    let rows: Vec<Vec<String>> = rows
        .iter()
        .skip(1)
        .map(|r| r.iter().map(str::to_string).collect())
        .collect();
    parse_round(&rows, centres.len() / d, d).unwrap()
}

/// The shifts of `data`, its first `k` records as centres, and its
/// features as the loaded tables name them.
fn start_of(data: &Array2<f64>, k: usize) -> (Shifts, Vec<f64>, Vec<String>) {
    let shifts = Shifts::of_data(data.view()).unwrap();
    let centres = data.rows().into_iter().take(k).flatten().copied().collect();
    let features = (0..data.ncols()).map(|j| format!("x{j}")).collect();
    (shifts, centres, features)
}

/// Ten rounds from the first `k` records as centres, in memory and in
/// `table`: the same sums at every round, so the same centres.
fn ten_rounds_agree(pg: &Postgres, table: &str, data: &Array2<f64>, k: usize, settings: &str) {
    let d = data.ncols();
    let (shifts, mut centres, _) = start_of(data, k);
    for round in 0..10 {
        let here = exact::round(data.view(), &centres, &shifts);
        let there = round_in(pg, table, d, &centres, &shifts, settings);
        assert_eq!(here, there, "{table}: round {round}");
        assert_eq!(here.counts.iter().sum::<u64>(), data.nrows() as u64);
        centres = here.centres(&shifts, &centres);
    }
}

#[test]
fn a_round_in_postgresql_sums_exactly_as_in_memory_in_one_table_or_four_partitions() {
    let Some(pg) = Postgres::start() else {
        return;
    };
    let scaled = wine(50, true);
    let unscaled = wine(50, false);
    load(&pg, "wine_z", &scaled, 1);
    load(&pg, "wine_raw", &unscaled, 1);
    load(&pg, "wine_parts", &scaled, 4);
    ten_rounds_agree(&pg, "wine_z", &scaled, 3, "");
    ten_rounds_agree(&pg, "wine_raw", &unscaled, 4, "");
    ten_rounds_agree(&pg, "wine_parts", &scaled, 3, PARALLEL);

    // The partitioned round really ran on workers.
    let (shifts, centres, features) = start_of(&scaled, 3);
    let plan = pg
        .psql(&format!(
            "{PARALLEL}EXPLAIN (ANALYZE, COSTS OFF) {};",
            round_query(
                "wine_parts",
                &features,
                &centres,
                &shifts,
                Dialect::Postgres
            )
        ))
        .unwrap();
    let plan: Vec<String> = plan.iter().map(|r| r.iter().collect::<String>()).collect();
    let launched: usize = plan
        .iter()
        .filter_map(|l| l.trim().strip_prefix("Workers Launched: "))
        .filter_map(|n| n.trim().parse::<usize>().ok())
        .sum();
    assert!(launched > 0, "no parallel worker ran:\n{}", plan.join("\n"));
}

/// A server, and a service file in a temporary folder naming it `[coop]`
/// (and an unreachable `[other]`), with the variables that point at that
/// file as the environment a run would read (a map: the process's own is
/// left alone). `None` where the server cannot start (see `Postgres`).
fn coop() -> Option<(Postgres, tempfile::TempDir, impl Fn(&str) -> Option<String>)> {
    let pg = Postgres::start()?;
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("pg_service.conf");
    pg.service_file(&file, "coop", "[other]\nhost=/nowhere\nuser=someone\n");
    let env = move |var: &str| (var == "PGSERVICEFILE").then(|| file.display().to_string());
    Some((pg, dir, env))
}

/// Through the client library, a connection named in a service file: a
/// round gives the in-memory sums, every statement runs read-only, and a
/// recipe's query that would write (a `DELETE`, a `CREATE`, a second
/// statement after `;`, a writing `WITH`, a sequence moved from a
/// `SELECT`) is refused and changes nothing.
#[test]
fn a_named_connection_rounds_as_in_memory_and_refuses_queries_that_write() {
    use assort::scale::postgres::{DbError, Target};
    let Some((pg, _dir, env)) = coop() else {
        return;
    };
    let scaled = wine(1, true);
    load(&pg, "wine_z", &scaled, 1);
    pg.psql("CREATE SEQUENCE visits;").unwrap();

    let target = Target::resolve("coop", &env).unwrap();
    assert_eq!(target.user, "assort");
    assert!(target
        .describe()
        .contains("database `postgres` as `assort`"));
    let mut db = target.connect().unwrap();
    let (shifts, centres, features) = start_of(&scaled, 3);
    assert_eq!(
        db.round("wine_z", &features, &centres, &shifts).unwrap(),
        exact::round(scaled.view(), &centres, &shifts)
    );

    assert_eq!(
        db.check_query("SELECT id, x0 FROM wine_z WHERE x0 > 0")
            .unwrap(),
        vec!["id", "x0"]
    );
    for (query, refused) in [
        ("DELETE FROM wine_z", "returns no columns"),
        ("DELETE FROM wine_z RETURNING id", "syntax error"),
        ("CREATE TABLE stolen (id INTEGER)", "returns no columns"),
        ("SELECT 1; DELETE FROM wine_z", "multiple commands"),
        (
            "WITH gone AS (DELETE FROM wine_z RETURNING id) SELECT id FROM gone",
            "",
        ),
    ] {
        let e = db.check_query(query).unwrap_err();
        assert!(matches!(e, DbError::NotOneQuery { .. }), "{query}: {e}");
        assert!(e.to_string().contains(refused), "{query}: {e}");
        assert!(e.to_string().contains("`coop`"), "{e}");
    }
    // A function with a side effect, called from a SELECT: refused by the
    // read-only transaction when it runs.
    let e = db
        .read("SELECT CAST(nextval('visits') AS VARCHAR)", "a sample")
        .unwrap_err();
    assert!(matches!(e, DbError::Writes { .. }), "{e}");
    let after = pg
        .psql("SELECT count(*), (SELECT count(*) FROM pg_class WHERE relname = 'stolen'), (SELECT last_value FROM visits), (SELECT is_called FROM visits) FROM wine_z;")
        .unwrap();
    assert_eq!(after[1].iter().collect::<Vec<_>>(), ["178", "0", "1", "f"]);
}

/// A table that does not exist, a server that cannot be reached and a
/// connection no service file holds: each message names the connection
/// (and the table or the place).
#[test]
fn connections_that_fail_are_named() {
    use assort::scale::postgres::{DbError, Target};
    let Some((_pg, _dir, env)) = coop() else {
        return;
    };
    let (shifts, centres, features) = start_of(&wine(1, true), 3);
    let mut db = Target::resolve("coop", &env).unwrap().connect().unwrap();
    let e = db
        .round("no_such_table", &features, &centres, &shifts)
        .unwrap_err();
    assert!(
        e.to_string().contains("`coop` failed at a k-means round"),
        "{e}"
    );
    assert!(e.to_string().contains("no_such_table"), "{e}");
    let e = Target::resolve("other", &env)
        .unwrap()
        .connect()
        .unwrap_err();
    assert!(matches!(e, DbError::CannotConnect { .. }), "{e}");
    assert!(
        e.to_string().contains("`other`") && e.to_string().contains("/nowhere"),
        "{e}"
    );
    let e = Target::resolve("missing", &env).unwrap_err();
    assert!(e.to_string().contains("no section [missing]"), "{e}");
}

/// The seeded sample drawn in the database (the records of smallest
/// SHA-256 rank of seed and key) is the sample assort draws from the same
/// keys: integer keys, and text keys with accents, spaces, a quote and a
/// repeated key; in one table and in four partitions.
#[test]
fn the_sample_drawn_in_postgresql_is_the_one_drawn_here() {
    use assort::scale::sample::{draw, sample_query};
    let Some(pg) = Postgres::start() else {
        return;
    };
    load(&pg, "wine_z", &wine(5, true), 1);
    load(&pg, "wine_parts", &wine(5, true), 4);
    let ids: Vec<String> = (0..890).map(|i| i.to_string()).collect();
    let texts = [
        "Müller-7",
        "ß",
        " spaced ",
        "o'neil",
        "M1",
        "M1",
        "Zoë",
        "東京-3",
        "m1",
    ];
    pg.psql(&format!(
        "CREATE TABLE people (name VARCHAR);\nINSERT INTO people VALUES {};",
        texts
            .iter()
            .map(|t| format!("('{}')", t.replace('\'', "''")))
            .collect::<Vec<_>>()
            .join(", ")
    ))
    .unwrap();
    let keys_of = |rows: Vec<csv::StringRecord>| -> Vec<String> {
        rows.iter().skip(1).map(|r| r[0].to_string()).collect()
    };
    for table in ["wine_z", "wine_parts"] {
        let q = sample_query(table, "id", &["x0".into()], 2026, 100, Dialect::Postgres);
        let there = keys_of(pg.psql(&format!("{PARALLEL}{q};")).unwrap());
        // Wine repeated five times: each id once, 0..890.
        let here: Vec<String> = draw(ids.iter().map(String::as_str), 2026, 100)
            .into_iter()
            .map(str::to_string)
            .collect();
        assert_eq!(there, here, "{table}");
    }
    let q = sample_query("people", "name", &[], 7, 6, Dialect::Postgres);
    let there = keys_of(pg.psql(&format!("{q};")).unwrap());
    let here: Vec<String> = draw(texts, 7, 6).into_iter().map(str::to_string).collect();
    assert_eq!(there, here);
}

/// The driver (`scale::drive`): the sample drawn by rank in the database,
/// restarts on it, the three best refined by rounds run in the database,
/// gives the same fit, bit for bit, as the same driver over the records
/// in memory; in one table and in four partitions read by parallel
/// workers.
#[test]
fn a_fit_refined_in_the_database_is_the_fit_refined_in_memory() {
    use assort::scale::postgres::Target;
    use assort::scale::sample;
    let Some((pg, _dir, env)) = coop() else {
        return;
    };
    let data = wine(50, true);
    load(&pg, "wine_one", &data, 1);
    load(&pg, "wine_four", &data, 4);
    pg.psql(&format!(
        "{}SELECT pg_reload_conf();",
        PARALLEL.replace("SET ", "ALTER SYSTEM SET ")
    ))
    .unwrap();
    let (seed, size) = (2026, 1000);
    let settings = common::four_of_eight_restarts(seed);
    let (shifts, _, features) = start_of(&data, 1);

    // In memory: the same draw over the record numbers as keys.
    let keys: Vec<String> = (0..data.nrows()).map(|i| i.to_string()).collect();
    let drawn = sample::draw(keys.iter().map(String::as_str), seed, size);
    let rows: Vec<usize> = drawn.iter().map(|k| k.parse().unwrap()).collect();
    let here_sample = data.select(ndarray::Axis(0), &rows);
    let here = common::fit_in_memory(data.view(), here_sample.view(), &settings, &shifts);
    assert_eq!(here.len(), 3, "the three best restarts are refined");
    assert!(here[0].within <= here[1].within && here[0].converged);
    assert_eq!(here[0].sizes.iter().sum::<u64>(), data.nrows() as u64);

    for table in ["wine_one", "wine_four"] {
        let mut db = Target::resolve("coop", &env).unwrap().connect().unwrap();
        let largest = db.largest(table, &features).unwrap();
        assert_eq!(Shifts::of(&largest).unwrap(), shifts, "{table}");
        let (sampled, values) = db.sample(table, "id", &features, (seed, size)).unwrap();
        assert_eq!(sampled, drawn, "{table}: the same sample, in rank order");
        let there_sample = Array2::from_shape_vec((size, features.len()), values).unwrap();
        assert_eq!(there_sample, here_sample, "{table}: the same values");
        common::same_fit_in(
            &mut db,
            table,
            &features,
            there_sample.view(),
            &settings,
            &shifts,
            &here,
            table,
        );
    }
}

/// The aggregate queries that stand for the passes of `read passes` over
/// a table (`scale::aggregate`) give what the same pass gathers here:
/// the look (records, gaps, kept records, values present, smallest and
/// largest), exact sums and counts, order statistics, a repeated key, and
/// per segment the records and exact sums of carried columns with gaps;
/// in one table and in four partitions read by parallel workers.
#[test]
fn the_aggregates_of_the_passes_are_the_passes_made_here() {
    use assort::engine::exact::Sum;
    use assort::scale::aggregate::*;
    use assort::scale::postgres::Target;
    let Some((pg, _dir, env)) = coop() else {
        return;
    };
    // Wine x5 (890 records), unscaled, with gaps: x1 every 7th record, x2
    // (whose gaps leave the record out) every 11th.
    let mut data = wine(5, false);
    let n = data.nrows();
    for i in 0..n {
        if i % 7 == 3 {
            data[[i, 1]] = f64::NAN;
        }
        if i % 11 == 5 {
            data[[i, 2]] = f64::NAN;
        }
    }
    load(&pg, "gappy_one", &data, 1);
    load(&pg, "gappy_four", &data, 4);
    let kept_rows: Vec<usize> = (0..n).filter(|&i| !data[[i, 2]].is_nan()).collect();
    let present = |j: usize| -> Vec<f64> {
        let mut v: Vec<f64> = (kept_rows.iter().map(|&i| data[[i, j]]))
            .filter(|x| !x.is_nan())
            .collect();
        v.sort_by(f64::total_cmp);
        v
    };
    let columns: Vec<String> = (0..5).map(|j| format!("x{j}")).collect();
    let kept = kept_predicate(&["x2".to_string()]);
    let fill = 2.5;
    let filled = format!("COALESCE(x1, CAST({fill:?} AS DOUBLE PRECISION))");
    let centres: Vec<f64> = [0, 60, 130]
        .iter()
        .flat_map(|&i| [data[[i, 0]], data[[i, 3]]])
        .collect();
    let nearest = |i: usize| -> usize {
        let row = [data[[i, 0]], data[[i, 3]]];
        let mut best = (0, f64::INFINITY);
        for (s, c) in centres.chunks(2).enumerate() {
            let d2 = (row[0] - c[0]) * (row[0] - c[0]) + (row[1] - c[1]) * (row[1] - c[1]);
            if d2 < best.1 {
                best = (s, d2);
            }
        }
        best.0
    };

    pg.psql(&format!(
        "{}SELECT pg_reload_conf();",
        PARALLEL.replace("SET ", "ALTER SYSTEM SET ")
    ))
    .unwrap();
    for table in ["gappy_one", "gappy_four"] {
        let mut db = Target::resolve("coop", &env).unwrap().connect().unwrap();

        let row = db
            .read(&look_query(table, &columns, &kept), "the look")
            .unwrap();
        let looked = parse_look(&row[0], 5).unwrap();
        assert_eq!(looked.records, n as u64, "{table}");
        let gaps: Vec<u64> = (0..5)
            .map(|j| data.column(j).iter().filter(|x| x.is_nan()).count() as u64)
            .collect();
        assert_eq!(looked.gaps, gaps, "{table}: gaps");
        assert_eq!(looked.kept, kept_rows.len() as u64, "{table}: kept");
        for j in 0..5 {
            let v = present(j);
            assert_eq!(looked.present[j], v.len() as u64, "{table}: x{j} present");
            if let (Some(lo), Some(hi)) = (v.first(), v.last()) {
                assert_eq!(
                    (looked.lowest[j], looked.highest[j]),
                    (*lo, *hi),
                    "{table}: x{j} ends"
                );
            }
        }

        // Exact sums: x0 as it is, x1 filled.
        let bounds = [
            looked.highest[0].abs().max(looked.lowest[0].abs()),
            looked.highest[1].abs().max(fill),
        ];
        let shifts: Vec<_> = bounds
            .iter()
            .map(|&b| Sum::new(b).unwrap().shift())
            .collect();
        let q = sums_query(
            table,
            &kept,
            &["x0".to_string(), filled.clone()],
            &shifts,
            Dialect::Postgres,
        );
        let there = parse_sums(&db.read(&q, "sums").unwrap()[0], &bounds).unwrap();
        let mut here = [Sum::new(bounds[0]).unwrap(), Sum::new(bounds[1]).unwrap()];
        for &i in &kept_rows {
            here[0].add(data[[i, 0]]);
            here[1].add(if data[[i, 1]].is_nan() {
                fill
            } else {
                data[[i, 1]]
            });
        }
        assert_eq!(there, here.to_vec(), "{table}: exact sums");

        // Order statistics of x1 among the kept values present.
        let v = present(1);
        for rank in [0, v.len() / 2, v.len() - 1] {
            let rows = db
                .read(&ranked_query(table, &kept, "x1", rank as u64), "a rank")
                .unwrap();
            let x: f64 = rows[0][0].as_deref().unwrap().parse().unwrap();
            assert_eq!(x, v[rank], "{table}: rank {rank}");
        }
        let past = db
            .read(&ranked_query(table, &kept, "x1", v.len() as u64), "past")
            .unwrap();
        assert!(past.is_empty(), "{table}: no value past the last rank");

        // Keys: each once; then one repeated.
        assert!(db
            .read(&repeated_key_query(table, "id", "id"), "keys")
            .unwrap()
            .is_empty());

        // Per segment (x0 and x3 against three centres): records, x1's
        // sum and count of values present, x4's sum.
        let carried = ["x1".to_string(), "x4".to_string()];
        let b4 = looked.highest[4].abs().max(looked.lowest[4].abs());
        let seg_bounds = [bounds[1], b4];
        let seg_shifts: Vec<_> = seg_bounds
            .iter()
            .map(|&b| Sum::new(b).unwrap().shift())
            .collect();
        let q = segment_sums_query(
            (table, &kept),
            &["x0".into(), "x3".into()],
            &centres,
            &carried,
            &seg_shifts,
            Dialect::Postgres,
        );
        let rows = db.read(&q, "segment sums").unwrap();
        let (counts, sums) = parse_segment_sums(&rows, 3, &seg_bounds).unwrap();
        let mut here_counts = vec![0u64; 3];
        let mut here_sums: Vec<Sum> = (0..3)
            .flat_map(|_| seg_bounds.map(|b| Sum::new(b).unwrap()))
            .collect();
        for &i in &kept_rows {
            let s = nearest(i);
            here_counts[s] += 1;
            if !data[[i, 1]].is_nan() {
                here_sums[2 * s].add(data[[i, 1]]);
            }
            here_sums[2 * s + 1].add(data[[i, 4]]);
        }
        assert_eq!(counts, here_counts, "{table}: segment sizes");
        assert_eq!(sums, here_sums, "{table}: segment sums");
    }
    pg.psql("INSERT INTO gappy_one (id, x0) VALUES (17, 1.0), (17, 2.0), (4, 0.5);")
        .unwrap();
    let mut db = Target::resolve("coop", &env).unwrap().connect().unwrap();
    let rows = db
        .read(&repeated_key_query("gappy_one", "id", "id"), "keys")
        .unwrap();
    assert_eq!(
        rows,
        vec![vec![Some("4".to_string())]],
        "the smallest repeated key"
    );
}
