//! A k-means round run as one SQL query in a real PostgreSQL server gives
//! the same exact sums (`engine::exact`) as the round in memory: in one
//! table, and in a table split into four partitions read by parallel
//! workers (the plan is checked to have launched them). Ten Lloyd rounds
//! driven by the database's sums land on the same centres, bit for bit, as
//! ten rounds in memory, and the within-segment sums of squares agree.
//!
//! Data: the Wine recognition data (UCI; tests/data/ATTRIBUTION.md), its
//! 13 measurements z-scored here as the prepared features, and again
//! unscaled (proline reaches 1,680, the smallest measurement 0.13: shifts
//! far apart), repeated 50 times so that the partitions and workers have
//! rows to share. The server is a throwaway cluster (tests/common/pg.rs).

mod common;

use assort::engine::exact::{self, RoundSums, Shifts};
use assort::scale::round::{parse_round, round_query};
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
            let v: Vec<String> = r.iter().map(|x| format!("{x:?}")).collect();
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
    let query = round_query(table, &features, centres, shifts);
    let rows = pg.psql(&format!("{settings}{query};")).unwrap();
    let rows: Vec<Vec<String>> = rows
        .iter()
        .skip(1)
        .map(|r| r.iter().map(str::to_string).collect())
        .collect();
    parse_round(&rows, centres.len() / d, d).unwrap()
}

/// Ten rounds from the first `k` records as centres, in memory and in
/// `table`: the same sums at every round, so the same centres.
fn ten_rounds_agree(pg: &Postgres, table: &str, data: &Array2<f64>, k: usize, settings: &str) {
    let d = data.ncols();
    let shifts = Shifts::of_data(data.view()).unwrap();
    let mut centres: Vec<f64> = data.rows().into_iter().take(k).flatten().copied().collect();
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
    let shifts = Shifts::of_data(scaled.view()).unwrap();
    let centres: Vec<f64> = scaled
        .rows()
        .into_iter()
        .take(3)
        .flatten()
        .copied()
        .collect();
    let features: Vec<String> = (0..13).map(|j| format!("x{j}")).collect();
    let plan = pg
        .psql(&format!(
            "{PARALLEL}EXPLAIN (ANALYZE, COSTS OFF) {};",
            round_query("wine_parts", &features, &centres, &shifts)
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
