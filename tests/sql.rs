//! The SQL assort writes runs in a real database (SQLite, built with the
//! tests) and agrees with assort: the scoring query puts every demo member
//! in the segment `assort assign` gives, except members whose two nearest
//! centres are within 1e-9 of each other, which are counted (none on the
//! demo).

mod common;

use common::case::Case;
use rusqlite::{types::Value, Connection};
use std::collections::HashMap;

/// Loads a CSV file into table `name`: text for `text_columns`, numbers
/// (REAL) for the rest, a blank field as NULL.
fn load(db: &Connection, name: &str, csv: &str, text_columns: &[&str]) {
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let columns: Vec<String> = header
        .iter()
        .map(|h| {
            let kind = if text_columns.contains(h) {
                "TEXT"
            } else {
                "REAL"
            };
            format!("\"{h}\" {kind}")
        })
        .collect();
    db.execute(
        &format!("CREATE TABLE \"{name}\" ({})", columns.join(", ")),
        [],
    )
    .unwrap();
    let marks = vec!["?"; header.len()].join(", ");
    let mut insert = db
        .prepare(&format!("INSERT INTO \"{name}\" VALUES ({marks})"))
        .unwrap();
    for line in lines {
        let values: Vec<Value> = line
            .split(',')
            .zip(&header)
            .map(|(v, h)| match v {
                "" => Value::Null,
                v if text_columns.contains(h) => Value::Text(v.to_string()),
                v => Value::Real(v.parse().unwrap()),
            })
            .collect();
        insert.execute(rusqlite::params_from_iter(values)).unwrap();
    }
}

/// Rows of a CSV file by their first column.
fn by_key(csv: &str) -> HashMap<String, Vec<String>> {
    csv.lines()
        .skip(1)
        .map(|l| {
            let cells: Vec<String> = l.split(',').map(String::from).collect();
            (cells[0].clone(), cells)
        })
        .collect()
}

#[test]
fn the_scoring_query_gives_every_member_the_segment_assort_assign_gives() {
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/coop_members.csv",
            "--out",
            "out/scored.csv",
        ],
        &[],
    )
    .ok();
    let assigned = by_key(&case.read("out/scored.csv"));

    let db = Connection::open_in_memory().unwrap();
    load(
        &db,
        "coop_members",
        &case.read("data/coop_members.csv"),
        &["member_id", "home_branch"],
    );
    let query = case.read("out/segment_scoring.sql");
    let mut statement = db.prepare(&query).unwrap();
    let scored: Vec<(String, i64, Option<String>)> = statement
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect();

    assert_eq!(
        scored.len(),
        assigned.len(),
        "the same records get a segment"
    );
    let (mut agree, mut near_ties, mut differ) = (0, 0, Vec::new());
    for (key, segment, label) in &scored {
        let row = &assigned[key];
        // key, segment, label, distance, nearer_by
        let nearer_by: f64 = row[4].parse().unwrap();
        if row[1] == segment.to_string() && row[2] == label.clone().unwrap_or_default() {
            agree += 1;
        } else if nearer_by < 1e-9 {
            near_ties += 1;
        } else {
            differ.push(key.clone());
        }
    }
    assert!(
        differ.is_empty(),
        "{} members differ: {:?}",
        differ.len(),
        &differ[..differ.len().min(5)]
    );
    assert_eq!(near_ties, 0, "no demo member sits on a border within 1e-9");
    assert_eq!(agree, 6000);
}

/// The demo's columns by name, gaps as `None`.
fn columns(csv: &str) -> HashMap<String, Vec<Option<f64>>> {
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    header
        .iter()
        .enumerate()
        .map(|(i, h)| {
            (
                h.to_string(),
                rows.iter().map(|r| r[i].parse().ok()).collect(),
            )
        })
        .collect()
}

#[test]
fn rules_coverage_and_precision_recomputed_and_the_rules_query_agrees() {
    let case = Case::demo();
    let run = case
        .assort(&["run", "coop-members.assort", "--json"], &[])
        .ok();
    let doc: serde_json::Value = serde_json::from_str(&run.stdout()).unwrap();
    let rules = doc["result"]["rules"].as_array().unwrap().clone();
    assert_eq!(rules.len(), 5);
    let data = case.read("data/coop_members.csv");
    let cols = columns(&data);
    let keys: Vec<String> = data
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().to_string())
        .collect();
    let segment_of = case.segments_by_key("out/member_segments.csv");
    // A record meets a rule when every condition holds on its value, a gap
    // taking the recipe's fill (as the rule's `fill` says).
    let meets = |rule: &serde_json::Value, i: usize| -> bool {
        rule["conditions"].as_array().unwrap().iter().all(|c| {
            let v = cols[c["column"].as_str().unwrap()][i].or(c["fill"].as_f64());
            let t = c["value"].as_f64().unwrap();
            match (v, c["op"].as_str().unwrap()) {
                (Some(v), ">") => v > t,
                (Some(v), "<=") => v <= t,
                _ => false,
            }
        })
    };
    for rule in &rules {
        let conditions = rule["conditions"].as_array().unwrap();
        assert!(!conditions.is_empty() && conditions.len() <= 3, "{rule}");
        let seg = rule["segment"].to_string();
        let size = keys.iter().filter(|k| segment_of[*k] == seg).count();
        let picked: Vec<usize> = (0..keys.len()).filter(|&i| meets(rule, i)).collect();
        let hits = picked
            .iter()
            .filter(|&&i| segment_of[&keys[i]] == seg)
            .count();
        let coverage = hits as f64 / size as f64;
        let precision = hits as f64 / picked.len() as f64;
        assert!(
            (rule["coverage"].as_f64().unwrap() - coverage).abs() < 1e-12,
            "{rule}"
        );
        assert!(
            (rule["precision"].as_f64().unwrap() - precision).abs() < 1e-12,
            "{rule}"
        );
        // On the demo's planted segments every rule is a good description.
        assert!(coverage > 0.8 && precision > 0.9, "{rule}");
    }

    // The rules query, run in SQLite, picks for each member the first rule
    // (highest precision first) the member meets.
    let db = Connection::open_in_memory().unwrap();
    load(&db, "coop_members", &data, &["member_id", "home_branch"]);
    let query = case.read("out/segment_rules.sql");
    let mut statement = db.prepare(&query).unwrap();
    let got: HashMap<String, Option<i64>> = statement
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    let mut ordered = rules.clone();
    ordered.sort_by(|a, b| {
        b["precision"]
            .as_f64()
            .unwrap()
            .total_cmp(&a["precision"].as_f64().unwrap())
    });
    for (i, key) in keys.iter().enumerate() {
        let expected = ordered
            .iter()
            .find(|r| meets(r, i))
            .map(|r| r["segment"].as_i64().unwrap());
        assert_eq!(got[key], expected, "{key}");
    }

    // The query's comment states what it delivers, counted here from what
    // SQLite returned: records given each segment, and those in it.
    for rule in &rules {
        let seg = rule["segment"].as_i64().unwrap();
        let given: Vec<&String> = keys.iter().filter(|k| got[*k] == Some(seg)).collect();
        let right = given
            .iter()
            .filter(|k| segment_of[k.as_str()] == seg.to_string())
            .count();
        let line = format!(
            "--   segment {seg}: {} records, {right} of them in the segment",
            given.len()
        );
        assert!(query.contains(&line), "`{line}` not in\n{query}");
    }
}
