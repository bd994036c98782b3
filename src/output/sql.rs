//! The segment model as one standard SQL query, so the customer database
//! itself can put members in segments: the same fills, clips, transforms,
//! scaling and weights as `assort assign`, the nearest centre, ties to the
//! lower number. Only standard SQL is used (`CAST`, `TRIM`, `NULLIF`,
//! `COALESCE`, `CASE`, `LN`, `SQRT`, arithmetic, common table
//! expressions); identifiers are quoted, numbers written with every digit
//! Rust keeps (`{:?}`), so the database computes with the model's exact
//! values.
//!
//! **How a column is read.** A table may come typed (numbers as numbers,
//! blanks as NULL) or as many loaders make it from a CSV file: every
//! column text, a blank as `''`. Both give the same segments because each
//! column is read once, in the `source` step, through its text form:
//! - a number column: a value that is empty after trimming spaces is a
//!   gap, any other is `CAST(.. AS DOUBLE PRECISION)` of the value itself
//!   (a typed number is cast to itself, exactly; text is parsed);
//! - a category column: the value as text (`CAST(.. AS VARCHAR)`, so a
//!   store number stored as a number is read as its digits), spaces
//!   removed at both ends, empty as the blank level.
//!
//! **One trimming rule**, shared with assort (see
//! [`crate::text::trim_spaces`]): spaces (U+0020) at both ends are not part
//! of a category value; every other character is, a tab or a non-breaking
//! space included, because `TRIM` in SQL removes spaces only.
//!
//! The database's `LN`, `SQRT` and division may differ from assort's in the
//! last bit, so a record whose two nearest centres are within about 1e-9
//! of each other could go the other way; assort's assignments give each
//! record's `nearer_by`, which says which records those are.

use crate::plan::{FeatureKind, Transform, FLAG_SET, FLAG_UNSET};
use crate::run::model::SegmentModel;
use crate::run::prepare::BLANK_LEVEL;
use crate::run::rules::SegmentRule;
use std::fmt::Write as _;

pub use crate::sql_words::{comment, ident, number, text};

/// A number column as the queries read it: a gap when its text is empty
/// after trimming spaces (NULL, or `''` in an all-text table), else the
/// value cast to a double (see the module documentation).
pub(crate) fn read_number(column: &str) -> String {
    let col = ident(column);
    format!("CASE WHEN TRIM(CAST({col} AS VARCHAR)) = '' THEN NULL ELSE CAST({col} AS DOUBLE PRECISION) END")
}

/// Not a level: what [`read_coded`] gives a value that is no level of an
/// ordered category or a flag (ranks start at 1, flags are 0 or 1), so a
/// guard can leave the row out as `assort assign` does, even where a fill
/// would take a blank.
const NOT_A_LEVEL: &str = "-1";

/// An ordered category or a flag as the queries read it: NULL when blank,
/// the level's rank (a flag: 1 set, 0 not), [`NOT_A_LEVEL`] for any other
/// value. Levels that are all numbers are compared as numbers, others as
/// text with spaces trimmed, letter case included; flag words in any case
/// ([`crate::plan::FeatureKind::code`] reads them the same way).
fn read_coded(column: &str, kind: &FeatureKind) -> String {
    let col = ident(column);
    let trimmed = format!("TRIM(CAST({col} AS VARCHAR))");
    let mut arms: Vec<String> = Vec::new();
    let subject = match kind {
        FeatureKind::Ordered(levels) => match crate::plan::numeric_levels(levels) {
            Some(values) => {
                for (r, v) in values.iter().enumerate() {
                    arms.push(format!("WHEN {} THEN {}", number(*v), r + 1));
                }
                format!("CAST({col} AS DOUBLE PRECISION)")
            }
            None => {
                for (r, l) in levels.iter().enumerate() {
                    arms.push(format!("WHEN {} THEN {}", text(l), r + 1));
                }
                trimmed.clone()
            }
        },
        _ => {
            for (words, v) in [(&FLAG_SET, 1), (&FLAG_UNSET, 0)] {
                let listed: Vec<String> = words.iter().map(|w| text(w)).collect();
                arms.push(format!(
                    "WHEN LOWER({trimmed}) IN ({}) THEN {v}",
                    listed.join(", ")
                ));
            }
            return format!(
                "CASE WHEN {trimmed} = '' OR {col} IS NULL THEN NULL {} ELSE {NOT_A_LEVEL} END",
                arms.join(" ")
            );
        }
    };
    format!(
        "CASE WHEN {trimmed} = '' OR {col} IS NULL THEN NULL ELSE CASE {subject} {} ELSE {NOT_A_LEVEL} END END",
        arms.join(" ")
    )
}

/// A category column as the queries read it: its text, spaces trimmed at
/// both ends, NULL when nothing is left.
fn read_text(column: &str) -> String {
    format!("NULLIF(TRIM(CAST({} AS VARCHAR)), '')", ident(column))
}

/// The comment lines stating the table a query reads: a `CREATE TABLE`
/// that makes it (key and category columns text, numbers doubles, blanks
/// as NULL), and that an all-text table with blanks as `''` reads the same.
fn table_comment(
    table: &str,
    key: &str,
    numbers: &[(&str, &FeatureKind)],
    texts: &[&str],
) -> String {
    let mut lines = vec![format!("--   {} VARCHAR", ident(key))];
    lines.extend(numbers.iter().map(|(c, kind)| match kind {
        FeatureKind::Number => format!("--   {} DOUBLE PRECISION", ident(c)),
        FeatureKind::Ordered(levels) if crate::plan::numeric_levels(levels).is_some() => {
            format!("--   {} DOUBLE PRECISION (an ordered category)", ident(c))
        }
        FeatureKind::Ordered(_) => format!("--   {} VARCHAR (an ordered category)", ident(c)),
        FeatureKind::Flag => format!(
            "--   {} VARCHAR (a flag: yes/no, true/false, 1/0, on/off)",
            ident(c)
        ),
    }));
    lines.extend(texts.iter().map(|c| format!("--   {} VARCHAR", ident(c))));
    let columns: Vec<String> = lines.iter().map(|l| comment(l)).collect();
    format!(
        "-- The table it reads, as this statement makes it (other columns may follow):\n\
         -- CREATE TABLE {} (\n{}\n-- );\n\
         -- Blanks may be NULL or '', and every column may be text instead (as sqlite3's\n\
         -- .import and many CSV loaders make it): each number is cast from its text, each\n\
         -- category value is read as text with spaces (only spaces) trimmed at both ends.\n",
        comment(&ident(table)),
        columns.join(",\n")
    )
}

/// The query that scores every row of `table` with `model`: columns `key`
/// (the model's key column), `segment`, `label` (NULL for a segment without
/// one, as the assignments file leaves it blank) and `segment_name` (as the
/// hand-off names it). Rows `assort assign` would leave out (a gap with no
/// fill, a value outside its transform's domain) are left out by the
/// `WHERE` clause.
pub fn scoring_query(model: &SegmentModel, table: &str, recipe: &str) -> String {
    let numbers: Vec<(&str, &FeatureKind)> = model
        .features
        .iter()
        .map(|f| (f.column.as_str(), &f.kind))
        .collect();
    let texts: Vec<&str> = model.categories.iter().map(|c| c.column.as_str()).collect();
    let mut q = String::new();
    let _ = write!(
        q,
        "-- Segments of recipe {}, as `assort assign` gives them, computed in the database.\n\
         -- Rows with a gap the recipe does not fill, or a value its transform cannot take,\n\
         -- get no segment, as with `assort assign`. Generated by assort; edit the recipe, not this.\n{}",
        comment(recipe),
        table_comment(table, &model.key, &numbers, &texts)
    );
    q.push_str(&source_step(&model.key, &numbers, &texts, table));
    let (dims, guards) = dimensions(model);
    let _ = writeln!(q, "prepared AS (\n  SELECT record_key");
    for (i, d) in dims.iter().enumerate() {
        let _ = writeln!(q, "    , {d} AS x{i}");
    }
    let _ = writeln!(q, "  FROM source");
    if !guards.is_empty() {
        let _ = writeln!(q, "  WHERE {}", guards.join("\n    AND "));
    }
    let _ = writeln!(q, "),\ndistances AS (\n  SELECT record_key");
    for (s, centre) in model.centres.iter().enumerate() {
        // Summed in dimension order, as assort sums.
        let terms: Vec<String> = (0..dims.len())
            .map(|i| {
                let c = number(centre.get(i).copied().unwrap_or(0.0));
                format!("(x{i} - {c}) * (x{i} - {c})")
            })
            .collect();
        let _ = writeln!(q, "    , {} AS d{s}", terms.join(" + "));
    }
    let _ = writeln!(
        q,
        "  FROM prepared\n)\nSELECT record_key AS {}, CASE",
        ident(&model.key)
    );
    let k = model.centres.len();
    let branches = |q: &mut String, value: &dyn Fn(usize) -> String| {
        for s in 0..k {
            let _ = writeln!(
                q,
                "    {} {}",
                crate::sql_words::nearest_branch(s, k),
                value(s)
            );
        }
    };
    branches(&mut q, &|s| model.segments[s].segment.to_string());
    let _ = writeln!(q, "  END AS segment, CASE");
    branches(&mut q, &|s| {
        model.segments[s]
            .label
            .as_deref()
            .map_or("NULL".to_string(), text)
    });
    let _ = writeln!(q, "  END AS label, CASE");
    branches(&mut q, &|s| {
        let seg = &model.segments[s];
        text(&super::segment_name(seg.segment, seg.label.as_deref()))
    });
    let _ = writeln!(
        q,
        "  END AS segment_name\nFROM distances\nORDER BY record_key;"
    );
    q
}

/// The first step of both queries: the key and each column the model
/// reads, once, as [`read_number`] and [`read_text`] read them (`v0, v1,
/// ..` and `t0, t1, ..`).
fn source_step(key: &str, numbers: &[(&str, &FeatureKind)], texts: &[&str], table: &str) -> String {
    let mut q = format!("WITH source AS (\n  SELECT {} AS record_key\n", ident(key));
    for (i, (c, kind)) in numbers.iter().enumerate() {
        let read = match kind {
            FeatureKind::Number => read_number(c),
            coded => read_coded(c, coded),
        };
        let _ = writeln!(q, "    , {read} AS v{i}");
    }
    for (i, c) in texts.iter().enumerate() {
        let _ = writeln!(q, "    , {} AS t{i}", read_text(c));
    }
    let _ = writeln!(q, "  FROM {}\n),", ident(table));
    q
}

/// The model's dimensions as expressions over the `source` step's
/// columns, and the conditions a row must meet to be scored.
fn dimensions(model: &SegmentModel) -> (Vec<String>, Vec<String>) {
    let mut dims: Vec<String> = Vec::new();
    let mut guards: Vec<String> = Vec::new();
    for (i, f) in model.features.iter().enumerate() {
        let col = format!("v{i}");
        if !f.kind.is_number() {
            guards.push(format!("({col} IS NULL OR {col} <> {NOT_A_LEVEL})"));
        }
        let raw = match f.fill {
            Some(fill) => format!("COALESCE({col}, {})", number(fill)),
            None => {
                guards.push(format!("{col} IS NOT NULL"));
                col
            }
        };
        let clipped = match f.clip {
            Some((lo, hi)) => format!(
                "(CASE WHEN {raw} < {lo} THEN {lo} WHEN {raw} > {hi} THEN {hi} ELSE {raw} END)",
                lo = number(lo),
                hi = number(hi)
            ),
            None => raw,
        };
        let transformed = match f.transform {
            Transform::None => clipped,
            Transform::Log1p => {
                guards.push(format!("{clipped} > -1"));
                format!("LN(1 + {clipped})")
            }
            Transform::Log => {
                guards.push(format!("{clipped} > 0"));
                format!("LN({clipped})")
            }
            Transform::Sqrt => {
                guards.push(format!("{clipped} >= 0"));
                format!("SQRT({clipped})")
            }
        };
        dims.push(if f.constant {
            "0.0".to_string()
        } else {
            format!(
                "({transformed} - {}) / {} * {}",
                number(f.centre),
                number(f.divisor),
                number(f.multiplier)
            )
        });
    }
    for (i, c) in model.categories.iter().enumerate() {
        // A blank the recipe did not keep as a level is scored by no one,
        // as `assort assign` leaves it out.
        if c.gaps != crate::plan::CategoryGaps::Keep {
            guards.push(format!("t{i} IS NOT NULL"));
        }
        for level in &c.levels {
            let is = if level == BLANK_LEVEL {
                format!("t{i} IS NULL")
            } else {
                format!("t{i} = {}", text(level))
            };
            dims.push(format!(
                "(CASE WHEN {is} THEN {} ELSE 0.0 END)",
                number(c.value)
            ));
        }
    }
    (dims, guards)
}

/// Each segment's rule as one query: the key and the segment, label and
/// segment name of the first rule a record meets, rules in order of
/// precision (highest first); a record no rule picks gets NULL. Gaps are
/// filled as the recipe fills them, so the rules pick what their coverage
/// and precision count.
pub fn rules_query(rules: &[SegmentRule], key: &str, table: &str, recipe: &str) -> String {
    let ordered: Vec<&SegmentRule> = crate::run::rules::query_order(rules)
        .into_iter()
        .map(|i| &rules[i])
        .collect();
    let mut columns: Vec<(&str, &FeatureKind)> = Vec::new();
    for c in ordered.iter().flat_map(|r| &r.conditions) {
        if !columns.iter().any(|(n, _)| *n == c.column) {
            columns.push((&c.column, &c.kind));
        }
    }
    let mut q = rules_header(&ordered, recipe);
    q.push_str(&table_comment(table, key, &columns, &[]));
    q.push_str(&source_step(key, &columns, &[], table));
    q.truncate(q.trim_end_matches([',', '\n']).len());
    let when = |r: &SegmentRule| -> String {
        r.conditions
            .iter()
            .map(|c| {
                // `columns` was built from these very conditions, so every
                // condition's column is in it.
                let at = columns
                    .iter()
                    .position(|(n, _)| *n == c.column)
                    .unwrap_or(0);
                let v = match c.fill {
                    Some(f) => format!("COALESCE(v{at}, {})", number(f)),
                    None => format!("v{at}"),
                };
                // A value that is no level meets no condition on its column.
                let known = match c.kind {
                    FeatureKind::Number => String::new(),
                    _ => format!("{v} <> {NOT_A_LEVEL} AND "),
                };
                format!("{known}{v} {} {}", c.op, number(c.value))
            })
            .collect::<Vec<_>>()
            .join(" AND ")
    };
    let _ = write!(q, "\nSELECT record_key AS {}", ident(key));
    let outputs: [OutputColumn<'_>; 3] = [
        ("segment", &|r| r.segment.to_string()),
        ("label", &|r| {
            r.label.as_deref().map_or("NULL".to_string(), text)
        }),
        ("segment_name", &|r| {
            text(&super::segment_name(r.segment, r.label.as_deref()))
        }),
    ];
    for (name, value) in outputs {
        if ordered.is_empty() {
            // No rule has a condition: `CASE END` is not SQL.
            let _ = write!(q, ",\n  NULL AS {name}");
            continue;
        }
        let _ = writeln!(q, ",\n  CASE");
        for r in &ordered {
            let _ = writeln!(q, "    WHEN {} THEN {}", when(r), value(r));
        }
        let _ = write!(q, "  END AS {name}");
    }
    let _ = writeln!(q, "\nFROM source\nORDER BY record_key;");
    q
}

/// One output column of the rules query: its name, and the value a rule
/// gives it.
type OutputColumn<'a> = (&'a str, &'a dyn Fn(&SegmentRule) -> String);

/// The rules query's opening comment: what it is, and what it delivers
/// per segment (a record goes to the first rule it meets, so a rule can
/// deliver fewer than it picks alone).
fn rules_header(ordered: &[&SegmentRule], recipe: &str) -> String {
    let mut q = String::new();
    let _ = writeln!(
        q,
        "-- Segment rules of recipe {}: each segment's rule of at most three conditions,\n\
         -- highest precision first; a record no rule picks gets NULL. Generated by assort.\n\
         -- Rules describe segments; they do not reproduce them exactly. For the exact\n\
         -- segments use the scoring query. What this query delivers (a record goes to\n\
         -- the first rule it meets, so a rule can deliver fewer than it picks alone):",
        comment(recipe)
    );
    let share = |a: usize, b: usize| {
        if b == 0 {
            0.0
        } else {
            100.0 * a as f64 / b as f64
        }
    };
    for r in ordered {
        let _ = writeln!(
            q,
            "--   segment {}: {} records, {} of them in the segment ({:.2} %), {:.2} % of the segment's {}",
            r.segment,
            r.delivered,
            r.delivered_in_segment,
            share(r.delivered_in_segment, r.delivered),
            share(r.delivered_in_segment, r.segment_size),
            r.segment_size
        );
    }
    q
}
