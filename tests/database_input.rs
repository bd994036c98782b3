//! A recipe whose `input` is a table or a query on a PostgreSQL
//! connection, run against a real server (tests/common/pg.rs starts a
//! throwaway one; in CI the tests fail, never skip, without it).
//!
//! - The demo recipe pointed at the demo's records loaded into a table
//!   writes every output byte for byte as from the CSV, apart from the
//!   input's description and digest; so does a table split into four hash
//!   partitions read by parallel workers, and a query.
//! - A connection that cannot be made, a table that does not exist, a
//!   column of another type and a query that would write are refused
//!   when the recipe is checked, each naming the connection (and the
//!   table), with nothing written.
//!
//! Data: the invented demo's members (recipes/data), loaded with psql's
//! `\copy` into columns of several types (text, integer, double precision,
//! numeric), which reach assort as the same text the CSV holds.

mod common;

use common::case::Case;
use common::pg::Postgres;

/// The demo's columns as a table: keys and branches as text, counts as
/// integers, shares as doubles, money as decimals.
const COLUMNS: &str = "member_id TEXT, home_branch TEXT, tenure_months INTEGER, \
    visits_per_month DOUBLE PRECISION, basket_value NUMERIC(12, 2), \
    share_fresh DOUBLE PRECISION, share_bulk DOUBLE PRECISION, \
    share_prepared REAL, online_ratio DOUBLE PRECISION, coupon_rate NUMERIC, \
    spend_12m NUMERIC(14, 2), contactable SMALLINT";

/// A server holding the demo's members as `coop_members` (and, with
/// `partitions` > 1, as `coop_members_split` in that many hash partitions),
/// and the demo's folder with a service file naming the server `coop`.
fn coop(partitions: usize) -> Option<(Postgres, Case, String)> {
    let pg = Postgres::start()?;
    let case = Case::demo();
    let csv = case.path("data/coop_members.csv");
    let mut sql = format!(
        "CREATE TABLE coop_members ({COLUMNS});\n\\copy coop_members FROM '{}' WITH (FORMAT csv, HEADER true)\n",
        csv.display()
    );
    if partitions > 1 {
        sql.push_str(&format!(
            "CREATE TABLE coop_members_split ({COLUMNS}) PARTITION BY HASH (member_id);\n"
        ));
        for p in 0..partitions {
            sql.push_str(&format!(
                "CREATE TABLE coop_members_split_{p} PARTITION OF coop_members_split \
                 FOR VALUES WITH (MODULUS {partitions}, REMAINDER {p});\n"
            ));
        }
        sql.push_str(
            "INSERT INTO coop_members_split SELECT * FROM coop_members ORDER BY random();\n",
        );
    }
    sql.push_str("ANALYZE;\n");
    pg.psql(&sql).unwrap();
    let service = case.path("pg_service.conf");
    pg.service_file(&service, "coop", "");
    let service = service.display().to_string();
    Some((pg, case, service))
}

/// The input's digest as the model records it.
fn input_digest(case: &Case) -> String {
    let model = case.read("out/segment_model.json");
    let at = model
        .find("\"input_sha256\": \"")
        .expect("the model records the input's digest");
    model[at + 17..at + 17 + 64].to_string()
}

/// Runs the demo from its CSV, then with `input` pointed at `source` on
/// the connection, and compares every output, once the input's
/// description (`shown` in the report, `said` in text), the digests and
/// the name the SQL gives the table (`sql_table`) are put back.
fn demo_alike(
    pg: &Postgres,
    case: &Case,
    service: &str,
    source: &str,
    shown: &str,
    sql_table: &str,
) {
    let env = [("PGSERVICEFILE", service)];
    case.assort(&["run", "coop-members.assort"], &env).ok();
    let from_csv = case.outputs::<&str>(&[]);
    let csv_digests = (input_digest(case), recipe_digest(case));
    case.edit(
        "coop-members.assort",
        r#"input "data/coop_members.csv" key member_id"#,
        &format!("input {source:?} database coop key member_id"),
    );
    case.assort(&["run", "coop-members.assort"], &env).ok();
    let table_digest = input_digest(case);
    assert_ne!(
        table_digest, csv_digests.0,
        "a table's digest is of its values"
    );
    let said = match source.starts_with("SELECT") {
        true => "the recipe's query on connection `coop`".to_string(),
        false => format!("table `{source}` on connection `coop`"),
    };
    let target = format!(
        " (database `postgres` as `assort` at {} port 5432)",
        pg.socket_dir().display()
    );
    let from_table = case.outputs(&[
        (target.as_str(), ""),
        (shown, "<code>data/coop_members.csv</code>"),
        (&said, "data/coop_members.csv"),
        (&table_digest, &csv_digests.0),
        (&recipe_digest(case), &csv_digests.1),
        (&format!("\"{sql_table}\""), "\"coop_members\""),
    ]);
    assert!(from_csv.len() >= 9, "the demo writes its outputs");
    assert_eq!(from_csv.len(), from_table.len());
    for ((name, a), (_, b)) in from_csv.iter().zip(&from_table) {
        if a != b {
            let (la, lb) = a
                .lines()
                .zip(b.lines())
                .find(|(x, y)| x != y)
                .unwrap_or_default();
            panic!("{name} differs between the CSV and `{source}`:\n{la}\n{lb}");
        }
    }
    let record = case.read("out/coop-members.run.json");
    assert!(
        record.contains(&said),
        "the run record names the connection"
    );
}

/// [`demo_alike`] over the table in four partitions.
fn split_alike(pg: &Postgres, case: &Case, service: &str) {
    let shown = "table <code>coop_members_split</code> on connection <code>coop</code>";
    let table = "coop_members_split";
    demo_alike(pg, case, service, table, shown, table);
}

fn recipe_digest(case: &Case) -> String {
    assort::run::load::file_sha256(&case.path("coop-members.assort")).unwrap()
}

#[test]
fn the_demo_over_a_table_writes_what_it_writes_from_the_csv() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    let shown = "table <code>coop_members</code> on connection <code>coop</code>";
    demo_alike(&pg, &case, &service, "coop_members", shown, "coop_members");
}

#[test]
fn the_demo_over_four_partitions_read_in_parallel_writes_the_same() {
    let Some((pg, case, service)) = coop(4) else {
        return;
    };
    // Parallel workers even for a table this small.
    pg.psql(
        "ALTER SYSTEM SET parallel_setup_cost = 0; ALTER SYSTEM SET parallel_tuple_cost = 0; \
         ALTER SYSTEM SET min_parallel_table_scan_size = 0; SELECT pg_reload_conf();",
    )
    .unwrap();
    let plan = pg
        .psql(
            "EXPLAIN (ANALYZE, COSTS OFF) SELECT CAST(member_id AS TEXT) FROM coop_members_split \
             ORDER BY CAST(member_id AS TEXT) COLLATE \"C\";",
        )
        .unwrap();
    let plan: Vec<String> = plan.iter().map(|r| r.iter().collect()).collect();
    assert!(
        plan.iter().any(|l| l.contains("Workers Launched")),
        "no parallel worker ran:\n{}",
        plan.join("\n")
    );
    split_alike(&pg, &case, &service);
}

#[test]
fn the_demo_over_a_query_writes_the_same() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    demo_alike(
        &pg,
        &case,
        &service,
        "SELECT * FROM coop_members WHERE tenure_months >= 0",
        "a query on connection <code>coop</code>",
        "recipe_input",
    );
}

/// The demo with `input` replaced by `line`, checked (and run) against the
/// server: it fails, every message in `says` is on standard error, and
/// nothing is written.
#[track_caller]
fn refused(case: &Case, service: &str, line: &str, says: &[&str]) {
    let env = [("PGSERVICEFILE", service)];
    let recipe = case.read("coop-members.assort");
    let at = recipe.find("input \"").unwrap();
    let end = at + recipe[at..].find('\n').unwrap();
    case.write(
        "refused.assort",
        &format!("{}{line}{}", &recipe[..at], &recipe[end..]),
    );
    for command in ["check", "run"] {
        let run = case.assort(&[command, "refused.assort"], &env).fails();
        let err = run.stderr();
        for text in says {
            assert!(
                common::case::unwrapped(&err).contains(text),
                "`assort {command}` with {line}: no `{text}` in\n{err}"
            );
        }
    }
    assert!(!case.path("out").exists(), "nothing is written");
}

#[test]
fn a_connection_table_or_query_that_cannot_be_read_is_refused_by_name() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    pg.psql("CREATE SEQUENCE visits;").unwrap();
    // A table that does not exist.
    refused(
        &case,
        &service,
        r#"input "coop_member" database coop key member_id"#,
        &["connection `coop`", "coop_member", "does not exist"],
    );
    // A connection no service file describes, and one that cannot be made.
    pg.service_file(
        std::path::Path::new(&service),
        "coop",
        "[gone]\nhost=/nowhere\nuser=assort\n",
    );
    refused(
        &case,
        &service,
        r#"input "coop_members" database warehouse key member_id"#,
        &[
            "connection `warehouse` is not described",
            "no section [warehouse]",
        ],
    );
    refused(
        &case,
        &service,
        r#"input "coop_members" database gone key member_id"#,
        &["cannot connect to `gone`", "/nowhere"],
    );
    // A query that would write, and a second statement.
    refused(
        &case,
        &service,
        r#"input "DELETE FROM coop_members RETURNING *" database coop key member_id"#,
        &["connection `coop`", "not a query that reads rows"],
    );
    refused(
        &case,
        &service,
        r#"input "SELECT * FROM coop_members; DELETE FROM coop_members" database coop key member_id"#,
        &[
            "connection `coop`",
            "not one statement that reads",
            "multiple commands",
        ],
    );
    // A function with a side effect called from the query.
    refused(
        &case,
        &service,
        r#"input "SELECT *, nextval('visits') AS visit FROM coop_members" database coop key member_id"#,
        &[
            "connection `coop`",
            "would change the database",
            "assort only reads",
        ],
    );
    let after = pg
        .psql("SELECT count(*), (SELECT last_value FROM visits), (SELECT is_called FROM visits) FROM coop_members;")
        .unwrap();
    assert_eq!(
        after[1].iter().collect::<Vec<_>>(),
        ["6000", "1", "f"],
        "nothing was deleted and the sequence did not move"
    );
}

#[test]
fn keys_types_and_options_a_table_cannot_take_are_refused() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    pg.psql(
        "CREATE TABLE dated (member_id TEXT, joined DATE, basket_value DOUBLE PRECISION);\
         INSERT INTO dated VALUES ('M1', '2026-01-01', 3.5), ('M2', '2026-02-01', 4.5);\
         CREATE TABLE unkeyed (member_id TEXT, basket_value DOUBLE PRECISION);\
         INSERT INTO unkeyed VALUES ('M1', 3.5), (NULL, 4.5), ('M3', 1.0);",
    )
    .unwrap();
    // Options that mean nothing for a table.
    refused(
        &case,
        &service,
        r#"input "coop_members" database coop no key"#,
        &["a table has no order of its own"],
    );
    // A key that is NULL for one record.
    let env = [("PGSERVICEFILE", service.as_str())];
    case.write(
        "few.assort",
        "seed 1\ninput \"unkeyed\" database coop key member_id\nfeatures basket_value\nkmeans k 2\n",
    );
    let run = case.assort(&["check", "few.assort"], &env).fails();
    assert!(
        run.stderr().contains("1 of its 3 records have no key"),
        "{}",
        run.stderr()
    );
    // A feature column of a type assort does not read.
    case.write(
        "dated.assort",
        "seed 1\ninput \"dated\" database coop key member_id\nfeatures joined, basket_value\nkmeans k 2\n",
    );
    let run = case.assort(&["check", "dated.assort"], &env).fails();
    assert!(
        common::case::unwrapped(&run.stderr())
            .contains("`joined` holds a date in the database, which assort does not read"),
        "{}",
        run.stderr()
    );
}

#[test]
fn a_bad_value_past_the_checked_sample_stops_the_run_and_keeps_earlier_outputs() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    // The same members with visits as text, one of them not a number,
    // far past the first 1,000 records in key order that `check` reads.
    pg.psql(
        "CREATE TABLE members_typed AS SELECT member_id, home_branch, tenure_months, \
         CAST(visits_per_month AS TEXT) AS visits_per_month, basket_value, share_fresh, \
         share_bulk, share_prepared, online_ratio, coupon_rate, spend_12m, contactable \
         FROM coop_members;\
         UPDATE members_typed SET visits_per_month = 'twice' WHERE member_id = 'M15000';",
    )
    .unwrap();
    let env = [("PGSERVICEFILE", service.as_str())];
    case.edit(
        "coop-members.assort",
        r#"input "data/coop_members.csv" key member_id"#,
        r#"input "coop_members" database coop key member_id"#,
    );
    case.assort(&["run", "coop-members.assort"], &env).ok();
    let before = case.outputs::<&str>(&[]);
    case.edit(
        "coop-members.assort",
        r#"input "coop_members" database"#,
        r#"input "members_typed" database"#,
    );
    case.assort(&["check", "coop-members.assort"], &env).ok();
    let run = case.assort(&["run", "coop-members.assort"], &env).fails();
    let err = common::case::unwrapped(&run.stderr());
    assert!(
        err.contains("table `members_typed` on connection `coop` line 5001")
            && err.contains("`visits_per_month`")
            && err.contains("twice"),
        "{err}"
    );
    assert_eq!(
        case.outputs::<&str>(&[]),
        before,
        "earlier outputs are intact"
    );
}

#[test]
fn a_password_comes_from_the_password_file_and_is_never_shown() {
    let Some((pg, case, _)) = coop(1) else {
        return;
    };
    // A role that must log in with a password (the server's other users
    // are trusted), allowed to read the members.
    pg.psql(
        "SET password_encryption = 'scram-sha-256';\
         CREATE ROLE reader LOGIN PASSWORD 'c0-op:r\\ead';\
         GRANT SELECT ON coop_members TO reader;",
    )
    .unwrap();
    let hba = pg.socket_dir().join("data/pg_hba.conf");
    let rules = std::fs::read_to_string(&hba).unwrap();
    std::fs::write(&hba, format!("local all reader scram-sha-256\n{rules}")).unwrap();
    pg.psql("SELECT pg_reload_conf();").unwrap();

    let service = case.path("pg_service.conf");
    pg.service_file(&service, "coop", "");
    case.edit("pg_service.conf", "user=assort", "user=reader");
    case.edit(
        "coop-members.assort",
        r#"input "data/coop_members.csv" key member_id"#,
        r#"input "coop_members" database coop key member_id"#,
    );
    let service = service.display().to_string();
    // Without a password the server refuses the log-in, by name.
    let run = case
        .assort(
            &["check", "coop-members.assort"],
            &[("PGSERVICEFILE", &service)],
        )
        .fails();
    assert!(
        run.stderr().contains("cannot connect to `coop`") && run.stderr().contains("reader"),
        "{}",
        run.stderr()
    );
    // A password file others may read is ignored, as libpq ignores it.
    let pgpass = case.path("pgpass");
    std::fs::write(
        &pgpass,
        format!(
            "# the co-op's reader\n{}:5432:postgres:reader:c0-op\\:r\\\\ead\n",
            pg.socket_dir().display()
        ),
    )
    .unwrap();
    use std::os::unix::fs::PermissionsExt;
    let env = [
        ("PGSERVICEFILE", service.as_str()),
        ("PGPASSFILE", pgpass.to_str().unwrap()),
    ];
    std::fs::set_permissions(&pgpass, std::fs::Permissions::from_mode(0o644)).unwrap();
    case.assort(&["check", "coop-members.assort"], &env).fails();
    std::fs::set_permissions(&pgpass, std::fs::Permissions::from_mode(0o600)).unwrap();
    let run = case.assort(&["run", "coop-members.assort"], &env).ok();
    let mut shown = run.stdout() + &run.stderr();
    for (_, text) in case.outputs::<&str>(&[]) {
        shown.push_str(&text);
    }
    shown.push_str(&case.read("out/coop-members.run.json"));
    assert!(shown.contains("as `reader`"), "the record names the user");
    assert!(!shown.contains("c0-op"), "the password is never shown");
}

#[test]
fn a_sample_drawn_by_key_gives_the_same_segments_from_a_table_filled_in_random_order() {
    let Some((pg, case, service)) = coop(4) else {
        return;
    };
    case.edit(
        "coop-members.assort",
        "kmeans k 2..8 restarts 50",
        "kmeans k 2..8 restarts 10 sample 2000 by key",
    );
    split_alike(&pg, &case, &service);
}

#[test]
fn a_query_that_fails_past_the_checked_records_stops_the_run_by_name() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    // Visits as text, one of them not a number, far past the first 1,000
    // records in key order; the recipe's query casts them. The check reads
    // the first 1,000 through the key's index and counts without the
    // cast, so only the run's full read reaches the bad value, and the
    // database itself fails there.
    pg.psql(
        "ALTER TABLE coop_members ADD PRIMARY KEY (member_id);\
         ALTER TABLE coop_members ALTER COLUMN visits_per_month TYPE TEXT;\
         UPDATE coop_members SET visits_per_month = 'twice' WHERE member_id = 'M15000';\
         ANALYZE coop_members;",
    )
    .unwrap();
    let env = [("PGSERVICEFILE", service.as_str())];
    let columns = "member_id, home_branch, tenure_months, \
         CAST(visits_per_month AS DOUBLE PRECISION) AS visits_per_month, basket_value, \
         share_fresh, share_bulk, share_prepared, online_ratio, coupon_rate, spend_12m, contactable";
    case.edit(
        "coop-members.assort",
        r#"input "data/coop_members.csv" key member_id"#,
        &format!(r#"input "SELECT {columns} FROM coop_members" database coop key member_id"#),
    );
    case.assort(&["check", "coop-members.assort"], &env).ok();
    let run = case.assort(&["run", "coop-members.assort"], &env).fails();
    let err = common::case::unwrapped(&run.stderr());
    assert!(
        err.contains("`coop` failed at reading the recipe's query on connection `coop`")
            && err.contains("twice"),
        "{err}"
    );
    assert!(!case.path("out").exists(), "nothing is written");
}

/// `read passes` over a table split in four partitions (filled in random
/// order, read by parallel workers): each pass an aggregate query, each
/// round one query, the sample drawn in the database. Against the same
/// recipe over the CSV read whole with `sample ... by key`: every member's
/// segment, the centres, each segment's size, share and means, the
/// model's parameters and centres to the last digit, the `tally` columns'
/// counts, means, totals and shares (common::passes::same_segments). A
/// transform other than `clip` is refused with this route, at its
/// statement.
#[test]
fn a_table_read_in_passes_gives_the_segments_read_whole() {
    let Some((_pg, case, service)) = coop(4) else {
        return;
    };
    let env = [("PGSERVICEFILE", service.as_str())];
    for prepare in [
        "missing fill median\ntransform visits_per_month clip 0..0.995\nscale zscore",
        "missing fill mean\nmissing drop for online_ratio\nmissing fill 0.1 for coupon_rate\n\
         transform share_bulk clip 0.01..0.99\nscale robust",
    ] {
        let recipe = |input: &str, read: &str| common::passes::recipe_with(input, read, prepare);
        case.write("whole.assort", &recipe("data/coop_members.csv", ""));
        case.write(
            "passes.assort",
            &recipe("coop_members_split", " database coop read passes"),
        );
        case.assort(&["run", "--dry-run", "passes.assort"], &env)
            .ok()
            .stdout_has("read in passes in the database: 6,000 records");
        let kept = common::passes::same_segments(&case, &env);
        assert!(kept > 5_000, "{kept} members segmented");
    }
    let transformed = common::passes::recipe_with(
        "coop_members_split",
        " database coop read passes",
        "missing fill median\ntransform basket_value log1p\nscale zscore",
    );
    case.write("passes.assort", &transformed);
    case.assort(&["check", "passes.assort"], &env)
        .fails()
        .stderr_has("`read passes` on a database input")
        .stderr_has("LN");
}

/// A server that dies between two rounds of a run in passes stops the run
/// with a message naming the connection and the table; nothing is
/// written and the outputs of the run before are intact. (The run
/// announces each round and waits, `ASSORT_TEST_ROUND_PAUSE_MS`; the
/// server is stopped as a crash would stop it, `pg_ctl stop -m
/// immediate`.)
#[test]
fn a_server_killed_between_rounds_stops_the_run_and_keeps_earlier_outputs() {
    use std::io::BufRead;
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    let env = [("PGSERVICEFILE", service.as_str())];
    let recipe = common::passes::recipe_with(
        "coop_members",
        " database coop read passes",
        "missing fill median\nscale zscore",
    );
    case.write("passes.assort", &recipe);
    case.assort(&["run", "passes.assort"], &env).ok();
    let before = case.outputs::<&str>(&[]);
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_assort"))
        .args(["run", "passes.assort"])
        .current_dir(case.path(""))
        .env("PGSERVICEFILE", &service)
        .env("ASSORT_TEST_ROUND_PAUSE_MS", "300")
        .env("NO_COLOR", "1")
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut said = String::new();
    let mut lines = std::io::BufReader::new(child.stderr.take().unwrap()).lines();
    for line in lines.by_ref() {
        let line = line.unwrap();
        said.push_str(&line);
        said.push('\n');
        if line == "assort-test: round 3" {
            pg.kill().unwrap();
            break;
        }
    }
    for line in lines {
        said.push_str(&line.unwrap());
        said.push('\n');
    }
    let status = child.wait().unwrap();
    assert!(!status.success(), "the run fails:\n{said}");
    let said = common::case::unwrapped(&said);
    assert!(said.contains("`coop`"), "the connection is named:\n{said}");
    assert!(
        said.contains("table `coop_members` on connection `coop`"),
        "the table is named:\n{said}"
    );
    assert_eq!(
        case.outputs::<&str>(&[]),
        before,
        "the outputs of the run before are intact"
    );
}

/// The rows of `table` as psql prints them (`--csv`: NULL as an empty
/// field, each value as the database writes it), header first, then the
/// rows sorted.
fn table_rows(pg: &Postgres, table: &str) -> Vec<Vec<String>> {
    let rows = pg.psql(&format!("SELECT * FROM {table}")).unwrap();
    let mut rows: Vec<Vec<String>> = rows
        .iter()
        .map(|r| r.iter().map(str::to_string).collect())
        .collect();
    rows[1..].sort();
    rows
}

/// The rows of an assignments file as a CSV reader reads them, header
/// first, then the rows sorted.
fn file_rows(case: &Case, rel: &str) -> Vec<Vec<String>> {
    let text = case.read(rel);
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(text.as_bytes());
    let mut rows: Vec<Vec<String>> = reader
        .records()
        .map(|r| r.unwrap().iter().map(str::to_string).collect())
        .collect();
    rows[1..].sort();
    rows
}

/// A column's type as the database states it.
fn column_type(pg: &Postgres, table: &str, column: &str) -> String {
    let rows = pg
        .psql(&format!(
            "SELECT format_type(atttypid, atttypmod) FROM pg_attribute \
             WHERE attrelid = '{table}'::regclass AND attname = '{column}'"
        ))
        .unwrap();
    rows[1][0].to_string()
}

/// `save table`: the assignments go into a table on the input's
/// connection only when the person running the recipe allows that table
/// (`--allow-table`); refused, nothing is read, written or changed. The
/// table holds, read back by psql, exactly the rows of the assignments
/// file (keys, segments, labels, distances and margins as their text),
/// replaces the one that stood there, its key has the input key's own
/// type (text here, `bigint` from an integer key) and joins back to every
/// member. The same from a run in passes.
#[test]
fn the_assignments_go_into_an_allowed_table_exactly_as_the_file_holds_them() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    let env = [("PGSERVICEFILE", service.as_str())];
    pg.psql(
        "CREATE SCHEMA segments;\n\
         CREATE TABLE segments.coop_segments (note TEXT);\n\
         INSERT INTO segments.coop_segments VALUES ('last quarter');\n\
         CREATE TABLE coop_numbered AS SELECT CAST(SUBSTRING(member_id FROM 2) AS BIGINT) AS member_no, * FROM coop_members;\n",
    )
    .unwrap();
    case.edit(
        "coop-members.assort",
        r#"input "data/coop_members.csv" key member_id"#,
        "input \"coop_members\" database coop key member_id",
    );
    case.edit(
        "coop-members.assort",
        r#"save assignments "out/member_segments.csv""#,
        "save assignments \"out/member_segments.csv\"\nsave table \"segments.coop_segments\"",
    );
    let old = table_rows(&pg, "segments.coop_segments");
    case.assort(&["run", "coop-members.assort"], &env)
        .fails()
        .stderr_has("writes table `segments.coop_segments` on connection `coop`")
        .stderr_has("--allow-table segments.coop_segments");
    assert!(!case.path("out").exists(), "nothing is written");
    assert_eq!(table_rows(&pg, "segments.coop_segments"), old);
    let allowed = ["--allow-table", "segments.coop_segments"];
    case.assort(
        &[
            "run",
            "--dry-run",
            "coop-members.assort",
            allowed[0],
            allowed[1],
        ],
        &env,
    )
    .ok()
    .stdout_has("would write table `segments.coop_segments` on connection `coop`");
    assert_eq!(table_rows(&pg, "segments.coop_segments"), old);
    case.assort(
        &["run", "coop-members.assort", allowed[0], allowed[1]],
        &env,
    )
    .ok()
    .stdout_has("wrote table `segments.coop_segments` on connection `coop` (6,000 rows)");
    let file = file_rows(&case, "out/member_segments.csv");
    assert_eq!(file.len(), 6_001);
    assert_eq!(table_rows(&pg, "segments.coop_segments"), file);
    assert_eq!(
        column_type(&pg, "segments.coop_segments", "member_id"),
        "text"
    );
    assert_eq!(
        column_type(&pg, "segments.coop_segments", "distance"),
        "numeric"
    );
    let joined = pg
        .psql("SELECT count(*) FROM coop_members JOIN segments.coop_segments USING (member_id)")
        .unwrap();
    assert_eq!(&joined[1][0], "6000", "every key joins back to its member");

    // In passes, keyed by a number: the table is that run's file again.
    let recipe = common::passes::recipe_with(
        "coop_numbered",
        " database coop read passes",
        "missing fill median\nscale zscore\nsave table \"numbered_segments\"",
    )
    .replace("key member_id", "key member_no");
    case.write("passes.assort", &recipe);
    let allowed = ["--allow-table", "numbered_segments"];
    case.assort(&["run", "passes.assort", allowed[0], allowed[1]], &env)
        .ok()
        .stdout_has("wrote table `numbered_segments` on connection `coop`");
    assert_eq!(
        table_rows(&pg, "numbered_segments"),
        file_rows(&case, "out/member_segments.csv")
    );
    assert_eq!(column_type(&pg, "numbered_segments", "member_no"), "bigint");
}

/// A table that cannot be replaced (a view stands on it) stops the run
/// with the connection and the table named; the old table, the view and
/// the files of the run before are as they were. The other refusals of
/// `save table` are the checker's, each at the statement: a name that is
/// no table's, the input itself.
#[test]
fn a_table_that_cannot_be_replaced_stops_the_run_and_changes_nothing() {
    let Some((pg, case, service)) = coop(1) else {
        return;
    };
    let env = [("PGSERVICEFILE", service.as_str())];
    case.edit(
        "coop-members.assort",
        r#"input "data/coop_members.csv" key member_id"#,
        "input \"coop_members\" database coop key member_id",
    );
    case.assort(&["run", "coop-members.assort"], &env).ok();
    let before = case.outputs::<&str>(&[]);
    pg.psql(
        "CREATE TABLE member_segments (member_id TEXT, segment INTEGER);\n\
         INSERT INTO member_segments VALUES ('M00001', 7);\n\
         CREATE VIEW segment_sizes AS SELECT segment, count(*) FROM member_segments GROUP BY segment;\n",
    )
    .unwrap();
    case.edit(
        "coop-members.assort",
        r#"save assignments "out/member_segments.csv""#,
        "save assignments \"out/member_segments.csv\"\nsave table \"member_segments\"",
    );
    case.assort(
        &[
            "run",
            "coop-members.assort",
            "--allow-table",
            "member_segments",
        ],
        &env,
    )
    .fails()
    .stderr_has("`coop` failed at writing table \"member_segments\"")
    .stderr_has("depend");
    assert_eq!(case.outputs::<&str>(&[]), before, "no file changed");
    let rows = pg.psql("SELECT * FROM segment_sizes").unwrap();
    assert_eq!(rows.len(), 2, "the view and the old table stand");
    assert_eq!((&rows[1][0], &rows[1][1]), ("7", "1"));

    for (name, says) in [
        ("member segments", "`member segments` is not a table's name"),
        ("coop_members", "would replace the recipe's input"),
    ] {
        case.edit(
            "coop-members.assort",
            "save table \"member_segments\"",
            &format!("save table {name:?}"),
        );
        case.assort(
            &["check", "coop-members.assort", "--allow-table", name],
            &env,
        )
        .fails()
        .stderr_has(says);
        case.edit(
            "coop-members.assort",
            &format!("save table {name:?}"),
            "save table \"member_segments\"",
        );
    }
}
