//! Comparing two segmentations of (mostly) the same records: this quarter's
//! with last quarter's, or a rerun with the original. Joined on the key.

use super::error::RunError;
use super::Assignments;
use crate::engine::compare::{adjusted_rand_index, Migration};
use std::collections::HashMap;

/// One record of an assignments file: key, segment, label.
#[derive(Debug, Clone, PartialEq)]
pub struct Assigned {
    pub key: String,
    pub segment: String,
    pub label: String,
}

/// Two segmentations side by side.
#[derive(Debug, Clone)]
pub struct Comparison {
    pub old_name: String,
    pub new_name: String,
    pub both: usize,
    pub only_old: usize,
    pub only_new: usize,
    /// Adjusted Rand index over the records in both (Hubert and Arabie 1985).
    pub adjusted_rand_index: f64,
    /// Old segments by new segments.
    pub migration: Migration,
    /// For each old segment, its best new match and their Jaccard.
    pub best: Vec<(usize, f64)>,
    /// Labels by segment, as each file gives them.
    pub old_labels: HashMap<String, String>,
    pub new_labels: HashMap<String, String>,
    /// Said when the two key columns have different names: the join is on
    /// their values all the same.
    pub key_note: Option<String>,
    /// Records only in the new file, by their new segment (segments
    /// ordered as the migration orders them): members who joined since.
    pub joined: Vec<(String, usize)>,
    /// Records only in the old file, by their old segment: members who
    /// left since.
    pub left: Vec<(String, usize)>,
}

/// The name of an assignments file's key column (its first).
pub fn key_name(path: &std::path::Path) -> Option<String> {
    let mut reader = csv::Reader::from_path(path).ok()?;
    Some(reader.headers().ok()?.get(0)?.trim().to_string())
}

impl Comparison {
    /// Notes that the key columns are named differently, when they are.
    pub fn with_key_names(mut self, old: Option<&str>, new: Option<&str>) -> Comparison {
        if let (Some(a), Some(b)) = (old, new) {
            if a != b {
                self.key_note = Some(format!(
                    "note: the files are keyed by different columns, `{a}` and `{b}`; records were joined on their values, so check that both columns hold the same identifiers"
                ));
            }
        }
        self
    }
}

/// Reads an assignments file (as `assort run` or `assort assign` write):
/// the first column is the key, and a `segment` column must exist.
pub fn read_assignments(path: &std::path::Path, shown: &str) -> Result<Vec<Assigned>, RunError> {
    let opened = super::load::Opened::new(path, shown, ',')?;
    let seg = opened
        .position("segment")
        .ok_or_else(|| RunError::NotAssignments {
            file: shown.to_string(),
        })?;
    let label = opened.position("label");
    let key_name = opened.header.get(0).unwrap_or("").trim().to_string();
    let mut reader = opened.reader;
    let mut out = Vec::new();
    // First line of each key, to refuse a key given twice (it would be
    // counted twice in every table).
    let mut seen: HashMap<String, u64> = HashMap::new();
    let mut record = csv::StringRecord::new();
    loop {
        let line = match reader.read_record(&mut record) {
            Ok(Some(line)) => line,
            Ok(None) => break,
            Err(e) => return Err(super::load::malformed(shown, &e, reader.line_of(&e))),
        };
        // Keys exactly as written, as the run keyed its records.
        let key = record.get(0).unwrap_or("");
        if let Some(&first_line) = seen.get(key) {
            return Err(RunError::DuplicateKey {
                place: super::error::Place {
                    file: shown.to_string(),
                    line,
                    column: 1,
                    name: key_name,
                },
                key: crate::check::clipped(key, 60),
                first_line,
            });
        }
        seen.insert(key.to_string(), line);
        out.push(Assigned {
            key: key.to_string(),
            segment: record.get(seg).unwrap_or("").trim().to_string(),
            label: label
                .and_then(|l| record.get(l))
                .unwrap_or("")
                .trim()
                .to_string(),
        });
    }
    Ok(out)
}

/// A run's assignments in the same shape.
pub fn from_run(assignments: &Assignments, label: impl Fn(usize) -> String) -> Vec<Assigned> {
    assignments
        .iter()
        .map(|a| Assigned {
            key: a.key.to_string(),
            segment: a.segment.to_string(),
            label: label(a.segment),
        })
        .collect()
}

/// Joins two segmentations on the key and compares them. Two files with
/// no key in common have nothing to compare: an error naming a key of each.
pub fn compare(
    old_name: &str,
    old: &[Assigned],
    new_name: &str,
    new: &[Assigned],
) -> Result<Comparison, RunError> {
    let new_by_key: HashMap<&str, &Assigned> = new.iter().map(|a| (a.key.as_str(), a)).collect();
    let mut a = Vec::new();
    let mut b = Vec::new();
    for o in old {
        if let Some(n) = new_by_key.get(o.key.as_str()) {
            a.push(o.segment.as_str());
            b.push(n.segment.as_str());
        }
    }
    let both = a.len();
    if both == 0 {
        let example = |v: &[Assigned]| {
            v.first()
                .map_or("(none)".to_string(), |x| crate::check::clipped(&x.key, 40))
        };
        // A file is named in backticks; this run's records in words.
        let named = |n: &str| match n {
            "this run" => "the records of this run".to_string(),
            file => format!("`{file}`"),
        };
        return Err(RunError::NothingInCommon {
            old: named(old_name),
            new: named(new_name),
            old_key: example(old),
            new_key: example(new),
        });
    }
    let old_keys: std::collections::HashSet<&str> = old.iter().map(|o| o.key.as_str()).collect();
    let only_new = new
        .iter()
        .filter(|n| !old_keys.contains(n.key.as_str()))
        .count();
    let migration = Migration::new(&a, &b);
    let (joined, left) = comers_and_goers(old, new, &old_keys, &new_by_key);
    let labels = |v: &[Assigned]| {
        v.iter()
            .filter(|x| !x.label.is_empty())
            .map(|x| (x.segment.clone(), x.label.clone()))
            .collect()
    };
    Ok(Comparison {
        old_name: old_name.to_string(),
        new_name: new_name.to_string(),
        both,
        only_old: old.len() - both,
        only_new,
        adjusted_rand_index: adjusted_rand_index(&a, &b),
        best: migration.best_matches(),
        migration,
        old_labels: labels(old),
        new_labels: labels(new),
        key_note: None,
        joined,
        left,
    })
}

/// Counts of records by segment name.
type BySegment = Vec<(String, usize)>;

/// Records only in the new file by their segment (who joined since), and
/// records only in the old file by theirs (who left), segments ordered as
/// [`Migration`] orders them. O(n).
fn comers_and_goers(
    old: &[Assigned],
    new: &[Assigned],
    old_keys: &std::collections::HashSet<&str>,
    new_by_key: &HashMap<&str, &Assigned>,
) -> (BySegment, BySegment) {
    let by_segment = |records: Vec<&Assigned>| -> BySegment {
        let mut counts: HashMap<&str, usize> = HashMap::new();
        for r in &records {
            *counts.entry(r.segment.as_str()).or_default() += 1;
        }
        let names: Vec<&str> = counts.keys().copied().collect();
        crate::engine::compare::ordered(&names)
            .into_iter()
            .map(|g| {
                let n = counts.get(g.as_str()).copied().unwrap_or(0);
                (g, n)
            })
            .collect()
    };
    let joined = by_segment(
        new.iter()
            .filter(|n| !old_keys.contains(n.key.as_str()))
            .collect(),
    );
    let left = by_segment(
        old.iter()
            .filter(|o| !new_by_key.contains_key(o.key.as_str()))
            .collect(),
    );
    (joined, left)
}

/// What the run's segments were held against: a known grouping
/// (`validate against`), an earlier segmentation (`compare with`, or last
/// run's assignments given with `previous`), and the `compare with` file as
/// read, for the label guard.
pub(super) struct Against {
    pub validation: Option<super::Validation>,
    pub comparison: Option<Comparison>,
    pub compared_with: Option<Vec<Assigned>>,
}

/// The compare stage: each file is read once.
pub(super) fn against(
    plan: &crate::plan::Plan,
    assignments: &Assignments,
    numbered: &super::number::Numbered,
    last: Option<&super::previous::PreviousRun>,
) -> Result<Against, RunError> {
    let validation = match &plan.validate {
        Some(v) => Some(validate(plan, v, assignments)?),
        None => None,
    };
    let compared_with = match &plan.compare {
        Some(c) => Some(read_assignments(&c.resolved, &c.path)?),
        None => None,
    };
    let new = || from_run(assignments, |s| numbered.label(s).unwrap_or_default());
    let comparison = match (&plan.compare, &compared_with) {
        (Some(c), Some(old)) => Some(
            compare(&c.path, old, "this run", &new())?
                .with_key_names(key_name(&c.resolved).as_deref(), Some(&plan.input.key)),
        ),
        // Last run's assignments, given with `previous`, show the migration.
        _ => match last.and_then(|l| l.assignments.as_ref()) {
            Some((path, old)) => Some(compare(path, old, "this run", &new())?),
            None => None,
        },
    };
    Ok(Against {
        validation,
        comparison,
        compared_with,
    })
}

/// Joins the segments with the known grouping on the key and scores the
/// agreement (adjusted Rand index, Hubert and Arabie 1985).
fn validate(
    plan: &crate::plan::Plan,
    v: &crate::plan::ValidatePlan,
    assignments: &Assignments,
) -> Result<super::Validation, RunError> {
    let cols = [v.column.clone()];
    let known = super::load::load(
        &v.resolved,
        &v.path,
        plan.input.separator,
        &super::load::Columns {
            key: (!plan.input.keyless).then_some(plan.input.key.as_str()),
            numeric: &[],
            kinds: &[],
            text: &cols,
            decimal: plan.input.decimal,
        },
    )?;
    let group_of: HashMap<&str, &str> = known
        .keys
        .iter()
        .zip(known.text[0].iter().map(String::as_str))
        .collect();
    let mut ours = Vec::new();
    let mut theirs = Vec::new();
    for a in assignments.iter() {
        if let Some(g) = group_of.get(a.key) {
            ours.push(a.segment);
            theirs.push(*g);
        }
    }
    Ok(super::Validation {
        column: v.column.clone(),
        adjusted_rand_index: adjusted_rand_index(&ours, &theirs),
        matched: ours.len(),
        unmatched: assignments.len() - ours.len(),
        records: known.keys.len(),
    })
}
