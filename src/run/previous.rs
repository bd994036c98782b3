//! Segment identity across runs (`previous "model"`): last run's segments
//! are matched one to one with this run's, matched segments keep their
//! numbers and labels, and what changed is measured.
//!
//! # Matching
//! An optimal one-to-one assignment (the Hungarian method; see
//! [`crate::engine::matching`]) of this run's segments to the previous
//! ones:
//! - with the previous assignments file, on the members they share: the
//!   cost of a pair is minus the number of shared keys in both; a match is
//!   *weak* when fewer than half of the previous segment's members found
//!   in this run went to its match;
//! - otherwise on the centres, both in this run's clustered space (the
//!   previous centres are taken back to original units through the
//!   model's preparation, then prepared as this run prepares its records):
//!   the cost of a pair is the squared distance between the centres; a
//!   match is *weak* when this run's centre lies nearer to another
//!   previous centre than to its match's.
//!
//! A matched segment keeps its previous number; an unmatched new segment
//! takes the next number after the highest the model holds (largest
//! first); a previous segment left unmatched is gone. Cost: O(k³) for the
//! matching, O(n) for the overlap.

use super::comparison::Assigned;
use super::error::RunError;
use super::model::{self, SegmentModel};
use super::prepare::Prepared;
use crate::engine::matching;
use ndarray::{Array2, ArrayView2};
use serde::Serialize;
use std::collections::HashMap;

/// Last run, as this run needs it.
pub struct PreviousRun {
    pub model: SegmentModel,
    /// The model's file, as the recipe names it.
    pub shown: String,
    /// Its assignments, when the recipe names them.
    pub assignments: Option<(String, Vec<Assigned>)>,
    /// The model's centres in this run's clustered space, in the model's
    /// segment order.
    pub centres: Array2<f64>,
    /// What was read, with digests.
    pub digests: Vec<Digest>,
    /// The model was made from this run's data (see [`Then::same_data`]).
    pub same_data: bool,
}

/// A file last run left, as this run read it.
#[derive(Debug, Clone, Serialize)]
pub struct Digest {
    pub role: &'static str,
    pub path: String,
    pub sha256: String,
    pub records: usize,
}

impl PreviousRun {
    /// Last run, when the plan names one (`previous`).
    /// `read` is the digest of a table's values as read, which has no
    /// file to hash.
    pub fn read_if(
        plan: &crate::plan::Plan,
        prepared: &Prepared,
        read: Option<&str>,
    ) -> Result<Option<PreviousRun>, RunError> {
        let Some(p) = &plan.previous else {
            return Ok(None);
        };
        let mut last = PreviousRun::read(p, prepared)?;
        // One more pass over the input, only with `previous`: the model
        // records the digest of the data it was made from.
        last.same_data = (read.map(str::to_string))
            .or_else(|| super::load::file_sha256(&plan.input.resolved))
            .is_some_and(|sha| sha == last.model.provenance.input_sha256);
        Ok(Some(last))
    }

    /// Reads the model (and assignments) a plan names and maps the model's
    /// centres into this run's clustered space.
    pub fn read(
        plan: &crate::plan::PreviousPlan,
        prepared: &Prepared,
    ) -> Result<PreviousRun, RunError> {
        let model = model::read_model(&plan.resolved)?;
        let assignments = match &plan.assignments {
            Some(a) => Some((
                a.path.clone(),
                super::comparison::read_assignments(&a.resolved, &a.path)?,
            )),
            None => None,
        };
        let centres = mapped_centres(&model, prepared);
        // Digests of what was read, for the run record: taken now, as the
        // files may be this run's outputs, replaced once it is done.
        let digests = std::iter::once((
            "previous model",
            plan.path.clone(),
            &plan.resolved,
            model.provenance.records,
        ))
        .chain(plan.assignments.as_ref().map(|a| {
            let n = assignments.as_ref().map_or(0, |(_, v)| v.len());
            ("previous assignments", a.path.clone(), &a.resolved, n)
        }))
        .map(|(role, path, resolved, records)| Digest {
            role,
            path,
            sha256: super::load::file_sha256(resolved).unwrap_or_default(),
            records,
        })
        .collect();
        Ok(PreviousRun {
            model,
            shown: plan.path.clone(),
            assignments,
            centres,
            digests,
            same_data: false,
        })
    }

    /// How many segments the model holds.
    pub fn k(&self) -> usize {
        self.model.segments.len()
    }

    /// The previous centres as one k x d start, row-major.
    pub fn start(&self) -> Vec<f64> {
        self.centres.iter().copied().collect()
    }

    /// The label the model gave segment `number`.
    pub fn label_of(&self, number: usize) -> Option<String> {
        self.model
            .segments
            .iter()
            .find(|s| s.segment == number)
            .and_then(|s| s.label.clone())
    }

    /// This run's records against last run's training data: each record
    /// taken into the model's clustered space (features back to original
    /// units, then prepared as the model prepares; category levels by
    /// name), then measured ([`model::measure_drift`]).
    pub fn drift(&self, prepared: &Prepared) -> Option<model::Drift> {
        let m = &self.model;
        let width = m.features.len() + m.categories.iter().map(|c| c.levels.len()).sum::<usize>();
        let n = prepared.matrix.nrows();
        let mut x = Array2::zeros((n, width));
        for (f, theirs) in m.features.iter().enumerate() {
            let at = prepared
                .features
                .iter()
                .position(|o| o.column == theirs.column)?;
            let ours = &prepared.features[at];
            for i in 0..n {
                let original = ours.to_original(prepared.matrix[[i, at]]);
                x[[i, f]] = model::prepared_value(theirs, original).unwrap_or(0.0);
            }
        }
        let mut offset = m.features.len();
        for theirs in &m.categories {
            if let Some(c) = prepared
                .categories
                .iter()
                .position(|o| o.column == theirs.column)
            {
                let ours = &prepared.categories[c];
                for (i, &code) in prepared.codes[c].iter().enumerate() {
                    let level = &ours.levels[code];
                    if let Some(l) = theirs.levels.iter().position(|t| t == level) {
                        x[[i, offset + l]] = theirs.value;
                    }
                }
            }
            offset += theirs.levels.len();
        }
        model::measure_drift(m, x.view(), &[])
    }

    /// Last run's segments, as the model recorded them.
    pub fn then(&self) -> Then {
        let records = self.model.provenance.records;
        Then {
            model: self.shown.clone(),
            input: self.model.provenance.input.clone(),
            records,
            segments: self
                .model
                .segments
                .iter()
                .map(|s| ThenSegment {
                    number: s.segment,
                    label: s.label.clone(),
                    size: s.size,
                    share: s.size as f64 / records.max(1) as f64,
                    means: s.means.clone(),
                })
                .collect(),
            features: self
                .model
                .features
                .iter()
                .map(|f| f.column.clone())
                .collect(),
            digests: self.digests.clone(),
            same_data: self.same_data,
            period: self.model.provenance.period.clone(),
        }
    }
}

/// Last run's segments, for "what changed".
#[derive(Debug, Clone, Serialize)]
pub struct Then {
    pub model: String,
    /// The data the previous run read.
    pub input: String,
    /// Records the previous run read.
    pub records: usize,
    pub segments: Vec<ThenSegment>,
    /// The model's numeric features, in the order of `means`.
    pub features: Vec<String>,
    /// The files read, with their digests.
    pub digests: Vec<Digest>,
    /// Last run's model was made from this run's data (the same digest):
    /// the comparison is the data with itself.
    pub same_data: bool,
    /// The period last run's data covered, as its recipe said.
    pub period: Option<String>,
}

#[derive(Debug, Clone, Serialize)]
pub struct ThenSegment {
    pub number: usize,
    pub label: Option<String>,
    pub size: usize,
    pub share: f64,
    /// Means in original units (models of format 2 on).
    pub means: Option<Vec<f64>>,
}

/// The model's centres, taken back to original units through its own
/// preparation, then prepared as this run prepares a record. Features and
/// category levels are found by name; a level this run does not have is
/// dropped, a level the model never saw is 0 (no member had it).
fn mapped_centres(model: &SegmentModel, prepared: &Prepared) -> Array2<f64> {
    let width = prepared.matrix.ncols();
    let nf = model.features.len();
    let mut out = Array2::zeros((model.centres.len(), width));
    // Where each of the model's categories starts among its columns.
    let mut their_offsets = HashMap::new();
    let mut their_offset = nf;
    for c in &model.categories {
        their_offsets.insert(c.column.as_str(), (their_offset, c));
        their_offset += c.levels.len();
    }
    for (s, centre) in model.centres.iter().enumerate() {
        for (f, ours) in prepared.features.iter().enumerate() {
            let Some(at) = model.features.iter().position(|m| m.column == ours.column) else {
                continue;
            };
            let original = model.features[at].to_original(centre[at]);
            out[[s, f]] = model::prepared_value(ours, original).unwrap_or(0.0);
        }
        let mut offset = prepared.features.len();
        for ours in &prepared.categories {
            if let Some(&(theirs_at, theirs)) = their_offsets.get(ours.column.as_str()) {
                for (l, level) in ours.levels.iter().enumerate() {
                    if let Some(tl) = theirs.levels.iter().position(|t| t == level) {
                        let share = centre[theirs_at + tl] / theirs.value;
                        out[[s, offset + l]] = share * ours.value;
                    }
                }
            }
            offset += ours.levels.len();
        }
    }
    out
}

/// What the matching settled.
#[derive(Debug, Clone, Serialize)]
pub struct Matching {
    /// `centres` or `shared members`.
    pub basis: &'static str,
    /// The model file.
    pub model: String,
    /// One row per segment of this run (in this run's size order before
    /// renumbering).
    pub pairs: Vec<Pair>,
    /// Previous segments with no match.
    pub gone: Vec<Gone>,
    /// The matching's total cost: squared centre distances summed, or
    /// members shared by matched pairs.
    pub cost: f64,
}

impl Matching {
    /// This run's segments ordered by their numbers: `order[i]` is the
    /// size-ordered segment that comes i-th, `numbers[i]` its number.
    pub fn order(&self) -> (Vec<usize>, Vec<usize>) {
        let mut order: Vec<usize> = (0..self.pairs.len()).collect();
        order.sort_by_key(|&s| self.pairs[s].number);
        let numbers = order.iter().map(|&s| self.pairs[s].number).collect();
        (order, numbers)
    }
}

/// This run's segment and its previous match.
#[derive(Debug, Clone, Serialize)]
pub struct Pair {
    /// The number this run's segment carries from now on.
    pub number: usize,
    /// The previous segment matched, if any (else the segment is new).
    pub previous: Option<usize>,
    pub weak: bool,
    /// Why the match is weak, in words.
    pub why_weak: Option<String>,
    /// Squared distance between the matched centres (clustered space).
    pub distance2: Option<f64>,
    /// Members shared with the match, when matched on members.
    pub shared: Option<usize>,
}

#[derive(Debug, Clone, Serialize)]
pub struct Gone {
    pub number: usize,
    pub label: Option<String>,
    pub size: usize,
}

/// Matches this run's segments (`labels` 0..k, canonical; `centres` k x d)
/// with the previous run's. `keys` gives each labelled record's key.
pub fn match_segments<'k>(
    prev: &PreviousRun,
    labels: &[u32],
    centres: ArrayView2<'_, f64>,
    keys: impl Iterator<Item = &'k str>,
) -> Matching {
    let k = centres.nrows();
    let pk = prev.k();
    let numbers: Vec<usize> = prev.model.segments.iter().map(|s| s.segment).collect();
    // Summed in feature order, as `dist2` does.
    let d2 = |s: usize, p: usize| -> f64 {
        centres
            .row(s)
            .iter()
            .zip(prev.centres.row(p))
            .map(|(a, b)| (a - b) * (a - b))
            .fold(0.0, |acc, v| acc + v)
    };
    let (basis, pairs_found, shared) = pair_up(prev, &numbers, labels, keys, k, &d2);
    let match_of: HashMap<usize, usize> = pairs_found.iter().copied().collect();
    let highest = numbers.iter().copied().max().unwrap_or(0);
    let mut next = highest;
    let mut cost = 0.0;
    let pairs: Vec<Pair> = (0..k)
        .map(|s| match match_of.get(&s) {
            Some(&p) => {
                let (weak, why, shared_here) = match &shared {
                    Some(sh) => {
                        let here = sh[s * pk + p];
                        cost += here as f64;
                        weak_by_members(sh, s, p, k, numbers[p])
                    }
                    None => {
                        cost += d2(s, p);
                        weak_by_centres(&d2, s, p, &numbers)
                    }
                };
                Pair {
                    number: numbers[p],
                    previous: Some(numbers[p]),
                    weak,
                    why_weak: why,
                    distance2: Some(d2(s, p)),
                    shared: shared_here,
                }
            }
            None => {
                next += 1;
                Pair {
                    number: next,
                    previous: None,
                    weak: false,
                    why_weak: None,
                    distance2: None,
                    shared: None,
                }
            }
        })
        .collect();
    Matching {
        basis,
        model: prev.shown.clone(),
        pairs,
        gone: gone(prev, &pairs_found),
        cost,
    }
}

/// How this run's segments pair with last run's: the basis (`shared
/// members` or `centres`), the pairs (this run's, last run's), and with
/// shared members, their counts at `s * pk + p`.
type Paired = (&'static str, Vec<(usize, usize)>, Option<Vec<usize>>);

/// This run's segments paired with last run's (optimal assignment):
/// by shared members when last run's assignments are known, else by the
/// squared distance between centres. The basis, the pairs and the shared
/// counts.
fn pair_up<'k>(
    prev: &PreviousRun,
    numbers: &[usize],
    labels: &[u32],
    keys: impl Iterator<Item = &'k str>,
    k: usize,
    d2: &dyn Fn(usize, usize) -> f64,
) -> Paired {
    let pk = prev.k();
    match &prev.assignments {
        Some((_, old)) => {
            let shared = shared_members(old, numbers, labels, keys, k);
            let cost: Vec<f64> = shared.iter().map(|&c| -(c as f64)).collect();
            (
                "shared members",
                matching::assign(&cost, k, pk),
                Some(shared),
            )
        }
        None => {
            let cost: Vec<f64> = (0..k)
                .flat_map(|s| (0..pk).map(move |p| (s, p)))
                .map(|(s, p)| d2(s, p))
                .collect();
            ("centres", matching::assign(&cost, k, pk), None)
        }
    }
}

/// Last run's segments no segment of this run matched.
fn gone(prev: &PreviousRun, pairs_found: &[(usize, usize)]) -> Vec<Gone> {
    let matched: Vec<usize> = pairs_found.iter().map(|&(_, p)| p).collect();
    (0..prev.k())
        .filter(|p| !matched.contains(p))
        .map(|p| Gone {
            number: prev.model.segments[p].segment,
            label: prev.model.segments[p].label.clone(),
            size: prev.model.segments[p].size,
        })
        .collect()
}

/// Members this run's segment s shares with last run's segment p, at
/// `s * pk + p`, joined on the key.
fn shared_members<'k>(
    old: &[Assigned],
    numbers: &[usize],
    labels: &[u32],
    keys: impl Iterator<Item = &'k str>,
    k: usize,
) -> Vec<usize> {
    let pk = numbers.len();
    let by_number: HashMap<usize, usize> =
        numbers.iter().enumerate().map(|(p, &n)| (n, p)).collect();
    let old_of: HashMap<&str, usize> = old
        .iter()
        .filter_map(|a| {
            let n: usize = a.segment.parse().ok()?;
            Some((a.key.as_str(), *by_number.get(&n)?))
        })
        .collect();
    let mut shared = vec![0usize; k * pk];
    for (key, &l) in keys.zip(labels) {
        if let Some(&p) = old_of.get(key) {
            shared[l as usize * pk + p] += 1;
        }
    }
    shared
}

/// A match by shared members is weak when fewer than half of last run's
/// segment's members found in this run are in the matched segment.
fn weak_by_members(
    shared: &[usize],
    s: usize,
    p: usize,
    k: usize,
    number: usize,
) -> (bool, Option<String>, Option<usize>) {
    let pk = shared.len() / k.max(1);
    let here = shared[s * pk + p];
    let total: usize = (0..k).map(|t| shared[t * pk + p]).sum();
    let weak = total == 0 || 2 * here < total;
    let why = weak.then(|| {
        if total == 0 {
            format!(
                "none of the members of previous segment {number} are among this run's records: their keys are not in this run's data"
            )
        } else {
            format!(
                "only {here} of the {total} members of previous segment {number} found in this run are in it"
            )
        }
    });
    (weak, why, Some(here))
}

/// A match by centres is weak when this run's centre is nearer another of
/// last run's centres (ties to the lower index).
fn weak_by_centres(
    d2: &dyn Fn(usize, usize) -> f64,
    s: usize,
    p: usize,
    numbers: &[usize],
) -> (bool, Option<String>, Option<usize>) {
    let nearest = (0..numbers.len())
        .min_by(|&a, &b| d2(s, a).total_cmp(&d2(s, b)).then(a.cmp(&b)))
        .unwrap_or(p);
    let weak = nearest != p && d2(s, nearest) < d2(s, p);
    let why = weak.then(|| {
        format!(
            "its centre is nearer to previous segment {}'s than to segment {}'s",
            numbers[nearest], numbers[p]
        )
    });
    (weak, why, None)
}

/// Without `previous`, segment numbers follow size, so a rerun on changed
/// data can put a label on another group of members. When last run's
/// segments are at hand (the `compare with` file, or the assignments or
/// model this recipe saved last time, before this run replaces them),
/// every labelled segment is checked: if most of last run's members of
/// segment n now sit in another segment, and the label is the one last
/// run gave segment n, the run stops before writing anything.
pub fn check_labels_stay(
    plan: &crate::plan::Plan,
    compared_with: Option<&[Assigned]>,
    assignments: &super::Assignments,
    prepared: &Prepared,
    labels: &[u32],
    centres: ArrayView2<'_, f64>,
) -> Result<(), RunError> {
    use crate::plan::OutputKind;
    if plan.labels.is_empty() || plan.previous.is_some() {
        return Ok(());
    }
    let saved = |kind: OutputKind| {
        plan.outputs
            .iter()
            .find(|o| o.kind == kind && o.resolved.is_file())
    };
    // The `compare with` file, already read by the run; else the
    // assignments this recipe saved last time.
    let saved_old;
    let old_assignments: Option<(&str, &[Assigned])> = match (&plan.compare, compared_with) {
        (Some(c), Some(old)) => Some((c.path.as_str(), old)),
        _ => match saved(OutputKind::Assignments) {
            // A file that cannot be read as assignments proves nothing here.
            Some(o) => match super::comparison::read_assignments(&o.resolved, &o.path) {
                Ok(v) => {
                    saved_old = v;
                    Some((o.path.as_str(), saved_old.as_slice()))
                }
                Err(_) => return Ok(()),
            },
            None => None,
        },
    };
    let (source, moves) = if let Some((shown, old)) = old_assignments {
        (shown, moved_by_members(plan, old, assignments))
    } else if let Some(o) = saved(OutputKind::Model) {
        match moved_by_centres(plan, &o.resolved, &o.path, prepared, labels, centres) {
            Some(moves) => (o.path.as_str(), moves),
            None => return Ok(()),
        }
    } else {
        return Ok(());
    };
    if moves.is_empty() {
        return Ok(());
    }
    Err(labels_moved(plan, source, &moves))
}

/// Labels whose members moved, judged by last run's assignments: label n
/// moved when most of last run's segment n is now in another segment and
/// last run gave it the same name (or none).
fn moved_by_members(
    plan: &crate::plan::Plan,
    old: &[Assigned],
    assignments: &super::Assignments,
) -> Vec<String> {
    let mut moves = Vec::new();
    let now: HashMap<&str, usize> = assignments.iter().map(|a| (a.key, a.segment)).collect();
    for (&n, label) in &plan.labels {
        let mut counts: HashMap<usize, usize> = HashMap::new();
        let mut old_label = None;
        for a in old
            .iter()
            .filter(|a| a.segment.parse::<usize>().ok() == Some(n))
        {
            old_label.get_or_insert(a.label.as_str());
            if let Some(&s) = now.get(a.key.as_str()) {
                *counts.entry(s).or_default() += 1;
            }
        }
        let shared: usize = counts.values().sum();
        let Some((&most, &count)) = counts
            .iter()
            .max_by_key(|(s, c)| (**c, std::cmp::Reverse(**s)))
        else {
            continue;
        };
        // Only the name last run gave this segment can land on others; a
        // new name (the segment was unnamed, or named otherwise) is the
        // analyst's reviewed decision.
        let same_name = old_label == Some(label.as_str());
        if most != n && same_name {
            moves.push(format!(
                "label {n} \"{label}\" (line {}): last run's segment {n} is now mostly segment {most} ({} of {})",
                plan.label_lines.get(&n).copied().unwrap_or(0),
                crate::text::thousands(count),
                crate::text::thousands(shared),
            ));
        }
    }
    moves
}

/// Labels whose segment moved, judged by the centres of the model this
/// recipe saved last time; `None` when that model cannot say (unreadable,
/// or over other columns).
fn moved_by_centres(
    plan: &crate::plan::Plan,
    resolved: &std::path::Path,
    shown: &str,
    prepared: &Prepared,
    labels: &[u32],
    centres: ArrayView2<'_, f64>,
) -> Option<Vec<String>> {
    let model = model::read_model(resolved).ok()?;
    let same_columns = model.features.len() == prepared.features.len()
        && model
            .features
            .iter()
            .all(|m| prepared.features.iter().any(|f| f.column == m.column));
    if !same_columns {
        return None;
    }
    let last = PreviousRun {
        centres: mapped_centres(&model, prepared),
        model,
        shown: shown.to_string(),
        assignments: None,
        digests: Vec::new(),
        same_data: false,
    };
    let m = match_segments(&last, labels, centres, std::iter::empty());
    let mut moves = Vec::new();
    for (&n, label) in &plan.labels {
        // This run's segment numbered n (by size) is labels' index n - 1.
        let Some(pair) = m.pairs.get(n.wrapping_sub(1)) else {
            continue;
        };
        let same_name = last.label_of(n).as_deref() == Some(label.as_str());
        if let Some(p) = pair.previous.filter(|&p| p != n) {
            if same_name {
                moves.push(format!(
                    "label {n} \"{label}\" (line {}): this run's segment {n} matches last run's segment {p} by its centre",
                    plan.label_lines.get(&n).copied().unwrap_or(0)
                ));
            }
        }
    }
    Some(moves)
}

/// The stop for labels that would land on other members, with the
/// `previous` line that keeps them.
fn labels_moved(plan: &crate::plan::Plan, source: &str, moves: &[String]) -> RunError {
    use crate::plan::OutputKind;
    // Only files that are there: last run's model (and assignments) as
    // this recipe saved them.
    let saved = |kind: OutputKind| {
        plan.outputs
            .iter()
            .find(|o| o.kind == kind && o.resolved.is_file())
    };
    let keep = match (saved(OutputKind::Model), saved(OutputKind::Assignments)) {
        (Some(m), Some(a)) => format!(
            "To keep each name on last run's members, add this line (last run's outputs are read before this run replaces them):\n    previous \"{}\" assignments \"{}\"\n",
            m.path, a.path
        ),
        (Some(m), None) => format!(
            "To keep each name on last run's members, add this line (last run's outputs are read before this run replaces them):\n    previous \"{}\"\n",
            m.path
        ),
        (None, _) => "Keeping names on last run's members needs last run's segment model (`previous`), and this recipe saved none: add `save model \"out/segment_model.json\"` so the next run can keep them, and for this run ".to_string(),
    };
    RunError::LabelsMoved {
        moves: format!("compared with `{source}`:\n{}", moves.join("\n")),
        help: format!(
            "segment numbers follow size, so a name can land on other members. {keep}or give the labels anew if the segments were reviewed. Nothing was written."
        ),
    }
}
