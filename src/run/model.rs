//! Segment models: everything needed to score new records exactly as the
//! run prepared its own, and the scoring itself.
//!
//! A model is our own versioned JSON format (`assort-model/2`): the key and
//! separator, each feature's fill value, clip bounds, transform, scaling and
//! weight, each category's levels and weight, the segments' centres in the
//! clustered space, their numbers, labels, sizes and feature means, and
//! where the model came from. Version 1 (no means) still loads and scores
//! exactly as before. Scoring puts each record with its nearest centre (ties to the lower
//! number), so on the training data of a k-means recipe it reproduces the
//! run's assignments; a tree's segments are scored by their means, so a
//! border record the tree put elsewhere may move.

use super::error::RunError;
use super::prepare::{self, CategoryParams, FeatureParams, BLANK_LEVEL};
use super::{Assignment, Assignments, Outcome};
use crate::check::probe::{is_blank, parse_number_in, DecimalMark};
use crate::engine::{drift, kmeans};
use crate::plan::Coder;
use ndarray::{Array2, ArrayView2};
use serde::{Deserialize, Serialize};

use super::measure::{Decoded, Layout, Measure};
pub use crate::plan::{
    MODEL_FORMAT, MODEL_FORMATS_READ, MODEL_FORMAT_KINDS, MODEL_FORMAT_MEASURED,
};

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct SegmentModel {
    pub format: String,
    pub assort_version: String,
    pub provenance: Provenance,
    pub key: String,
    /// Trained on a file without a key (`no key`): `key` names the
    /// line-number column, and new records are keyed by their line too.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub keyless: bool,
    pub separator: char,
    /// The decimal mark of the data's numbers; absent in models written
    /// before it could be chosen, which read decimal points.
    #[serde(default, skip_serializing_if = "DecimalMark::is_point")]
    pub decimal: DecimalMark,
    pub features: Vec<FeatureParams>,
    pub categories: Vec<CategoryParams>,
    /// One row per segment, in the clustered space.
    pub centres: Vec<Vec<f64>>,
    pub segments: Vec<ModelSegment>,
    /// The training data's distribution, to tell later whether new data
    /// still looks like it (format 2 on).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drift: Option<DriftReference>,
    /// How new records are compared with the centres, when not by the
    /// Euclidean distance (format 3): Gower's dissimilarity with the
    /// training ranges, a row distance, or k-prototypes' cost.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub measure: Option<Measure>,
}

/// What the training data looked like, in the model's clustered space:
/// each numeric feature's deciles and the nearest-centre distance that 99 %
/// of training records were within (see [`crate::engine::drift`]).
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct DriftReference {
    pub features: Vec<drift::Distribution>,
    pub far_distance: f64,
}

/// New data measured against a model's [`DriftReference`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Drift {
    /// Per numeric feature: its name, the population stability index and
    /// its reading.
    pub features: Vec<FeatureDrift>,
    /// Share of records farther from every centre than 99 % of training
    /// records were.
    pub far_share: f64,
    pub far_distance: f64,
    /// Plain-words warnings, when a threshold is passed.
    pub warnings: Vec<String>,
    /// Features the records are expected to differ in (new joiners'
    /// tenure, say): their shift is shown, not warned about, and the
    /// distances to the centres leave them out.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub expected: Vec<String>,
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FeatureDrift {
    pub column: String,
    pub psi: f64,
    pub reading: &'static str,
}

/// The far share above which the segments are said not to fit: five times
/// the 1 % expected of data like the training data (our rule).
pub const FAR_SHARE_WARNING: f64 = 0.05;

/// The reference of a clustered matrix `x` (model space) and its centres.
pub fn drift_reference(
    x: ArrayView2<'_, f64>,
    centres: ArrayView2<'_, f64>,
    features: usize,
) -> DriftReference {
    let distributions = (0..features)
        .filter_map(|f| drift::Distribution::of(&x.column(f).to_vec()))
        .collect();
    let distances: Vec<f64> = kmeans::nearest_with_margin(x, centres)
        .into_iter()
        .map(|(_, d, _)| d)
        .collect();
    DriftReference {
        features: distributions,
        far_distance: crate::engine::stats::quantile_sorted(
            &crate::engine::stats::sorted(&distances),
            drift::FAR_QUANTILE,
        )
        .unwrap_or(0.0),
    }
}

/// Measures `x` (records in the model's clustered space) against the
/// model's reference; `None` for models without one (format 1). The
/// numeric features at `expected` are ones these records differ in by
/// design (new joiners' tenure): their population stability index is
/// shown with the reading "expected to differ" and never warned about,
/// and the distances to the centres are measured on the other columns
/// (both the records' and the centres' values of those features set to
/// 0). Against the training records' threshold over every column, that
/// share can only be lower than a like-for-like one: a warning still
/// raised is a real one.
pub fn measure_drift(
    model: &SegmentModel,
    x: ArrayView2<'_, f64>,
    expected: &[usize],
) -> Option<Drift> {
    let reference = model.drift.as_ref()?;
    if x.nrows() == 0 {
        return None;
    }
    let width = x.ncols();
    let k = model.centres.len();
    let leave_out = |f: usize| expected.contains(&f);
    let centres = Array2::from_shape_fn((k, width), |(s, f)| {
        if leave_out(f) {
            0.0
        } else {
            model.centres[s].get(f).copied().unwrap_or(0.0)
        }
    });
    let mut x_other = None;
    if !expected.is_empty() {
        let mut copy = x.to_owned();
        for &f in expected {
            copy.column_mut(f).fill(0.0);
        }
        x_other = Some(copy);
    }
    let x_far = x_other.as_ref().map_or(x, |c| c.view());
    let features: Vec<FeatureDrift> = model
        .features
        .iter()
        .zip(&reference.features)
        .enumerate()
        .map(|(f, (fp, d))| {
            let psi = d.psi(&x.column(f).to_vec());
            FeatureDrift {
                column: fp.column.clone(),
                psi,
                reading: if leave_out(f) {
                    "expected to differ"
                } else {
                    drift::reading(psi)
                },
            }
        })
        .collect();
    let distances: Vec<f64> = kmeans::nearest_with_margin(x_far, centres.view())
        .into_iter()
        .map(|(_, d, _)| d)
        .collect();
    let far_share = drift::share_above(&distances, reference.far_distance);
    let warnings = drift_warnings(&features, far_share);
    Some(Drift {
        features,
        far_share,
        far_distance: reference.far_distance,
        warnings,
        expected: expected
            .iter()
            .filter_map(|&f| model.features.get(f).map(|fp| fp.column.clone()))
            .collect(),
    })
}

/// The drift warnings in plain words: features past a major shift (those
/// expected to differ aside), and too many records far from every centre.
fn drift_warnings(features: &[FeatureDrift], far_share: f64) -> Vec<String> {
    let mut warnings = Vec::new();
    let moved: Vec<String> = features
        .iter()
        .filter(|f| f.psi > drift::PSI_MAJOR_SHIFT && f.reading != "expected to differ")
        .map(|f| format!("{} ({:.2})", f.column, f.psi))
        .collect();
    if !moved.is_empty() {
        warnings.push(format!(
            "the data has moved since the segments were built: a major shift in {} (population stability index above {}); the segments may no longer fit, so review them before acting on them",
            moved.join(", "),
            drift::PSI_MAJOR_SHIFT
        ));
    }
    if far_share > FAR_SHARE_WARNING {
        warnings.push(format!(
            "{:.1} % of the records are farther from every segment's centre than 99 % of the training records were (about 1 % is expected); the segments may no longer fit these records",
            100.0 * far_share
        ));
    }
    warnings
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Provenance {
    pub recipe: String,
    pub input: String,
    pub input_sha256: String,
    pub records: usize,
    pub seed: u64,
    pub method: String,
    /// The statements of the recipe that shaped the segments, as
    /// [`crate::syntax::shaping_statements`] gives them; absent in models
    /// written before they were recorded.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub settings: Vec<String>,
    /// The period the data covered (`recipe ... period`), when given.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub period: Option<String>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ModelSegment {
    pub segment: usize,
    pub label: Option<String>,
    pub size: usize,
    /// The segment's feature means in original units (format 2 on).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub means: Option<Vec<f64>>,
}

/// The model of a run's chosen segmentation.
pub fn from_outcome(o: &Outcome, input_sha256: String) -> SegmentModel {
    let method = match &o.plan.method {
        crate::plan::MethodPlan::KMeans(_) => "kmeans".to_string(),
        crate::plan::MethodPlan::Tree(t) if t.distance == crate::plan::Distance::Gower => format!(
            "tree ({} linkage on Gower's dissimilarity; new records go to the nearest segment medoid)",
            t.linkage.name()
        ),
        crate::plan::MethodPlan::Tree(t) => format!(
            "tree ({} linkage; new records go to the nearest segment mean)",
            t.linkage.name()
        ),
        crate::plan::MethodPlan::KMedoids(m) => format!(
            "kmedoids ({}; new records go to the nearest medoid)",
            m.distance.words()
        ),
        crate::plan::MethodPlan::KPrototypes(_) => {
            "kprototypes (new records go to the cheapest prototype)".to_string()
        }
    };
    let measure = match &o.measure {
        Measure::Euclidean => None,
        own => Some(own.clone()),
    };
    SegmentModel {
        format: if o.prepared.features.iter().any(|f| !f.kind.is_number()) {
            MODEL_FORMAT_KINDS
        } else if measure.is_some() {
            MODEL_FORMAT_MEASURED
        } else {
            MODEL_FORMAT
        }
        .into(),
        measure,
        assort_version: env!("CARGO_PKG_VERSION").into(),
        provenance: Provenance {
            recipe: o.plan.name.clone(),
            input: o.plan.input.shown(),
            input_sha256,
            records: o.records,
            seed: o.plan.seed,
            method,
            settings: Vec::new(),
            period: o.plan.period.clone(),
        },
        key: o.plan.input.key.clone(),
        keyless: o.plan.input.keyless,
        separator: o.plan.input.separator,
        decimal: o.plan.input.decimal,
        features: o.prepared.features.clone(),
        categories: o.prepared.categories.clone(),
        centres: o.centres.outer_iter().map(|r| r.to_vec()).collect(),
        segments: o
            .profiles
            .iter()
            .map(|p| ModelSegment {
                segment: p.segment.unwrap_or(0),
                label: p.label.clone(),
                size: p.size,
                means: Some(p.features.iter().map(|f| f.mean).collect()),
            })
            .collect(),
        drift: Some(drift_reference(
            o.prepared.matrix.view(),
            o.centres.view(),
            o.prepared.features.len(),
        )),
    }
}

/// Why a record was left unassigned, or what was done to it.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ScoreSummary {
    pub records: usize,
    pub assigned: usize,
    /// Values filled with the training fill value, by feature.
    pub filled: Vec<(String, usize)>,
    /// Records left out: a missing value with no fill rule, by feature.
    pub missing: Vec<(String, usize)>,
    /// Records left out: a value that is not a number, by feature.
    pub not_numbers: Vec<(String, usize)>,
    /// Records left out: a value outside the transform's range, by feature.
    pub out_of_range: Vec<(String, usize)>,
    /// Category values not seen in training, by column (scored as no level).
    pub unseen_levels: Vec<(String, usize)>,
    /// How far the records are from the training data (format 2 models).
    pub drift: Option<Drift>,
}

/// Scores a table read with the model's columns (`numeric` in feature
/// order, `text` in category order). Records that cannot be prepared are
/// left out and counted.
/// The numeric features at `expect_shift` are ones these records differ
/// in by design (see [`measure_drift`]).
pub fn score(
    model: &SegmentModel,
    table: &Table,
    expect_shift: &[usize],
) -> (Assignments, ScoreSummary) {
    let n = table.keys.len();
    let nf = model.features.len();
    let width = nf
        + model
            .categories
            .iter()
            .map(|c| c.levels.len())
            .sum::<usize>();
    let mut summary = ScoreSummary {
        records: n,
        filled: count_slots(model.features.iter().map(|f| &f.column)),
        missing: count_slots(
            model
                .features
                .iter()
                .map(|f| &f.column)
                .chain(model.categories.iter().map(|c| &c.column)),
        ),
        not_numbers: count_slots(model.features.iter().map(|f| &f.column)),
        out_of_range: count_slots(model.features.iter().map(|f| &f.column)),
        unseen_levels: count_slots(model.categories.iter().map(|c| &c.column)),
        ..Default::default()
    };
    let mut rows: Vec<f64> = Vec::with_capacity(n * width);
    let mut kept: Vec<usize> = Vec::with_capacity(n);
    let coders: Vec<Coder> = model.features.iter().map(|f| f.kind.coder()).collect();
    for r in 0..n {
        let mut row = vec![0.0; width];
        if prepare_record(model, &coders, table, r, &mut row, &mut summary) {
            rows.extend(row);
            kept.push(r);
        }
    }
    summary.assigned = kept.len();
    let x = Array2::from_shape_vec((kept.len(), width), rows)
        .unwrap_or_else(|_| Array2::zeros((0, width)));
    let k = model.centres.len();
    let centres = Array2::from_shape_fn((k, width), |(s, f)| {
        model.centres[s].get(f).copied().unwrap_or(0.0)
    });
    summary.drift = measure_drift(model, x.view(), expect_shift);
    let nearest = match &model.measure {
        None | Some(Measure::Euclidean) => kmeans::nearest_with_margin(x.view(), centres.view()),
        Some(own) => {
            let layout = Layout {
                numbers: nf,
                levels: model.categories.iter().map(|c| c.levels.len()).collect(),
            };
            own.nearest_with_margin(
                &Decoded::new(x.view(), &layout),
                &Decoded::new(centres.view(), &layout),
            )
        }
    };
    let mut assignments = Assignments::with_capacity(kept.len());
    for (&r, (seg, distance, margin)) in kept.iter().zip(nearest) {
        assignments.push(Assignment {
            key: &table.keys[r],
            // The model's number for the segment: with `previous`, numbers
            // follow last run's and need not be the row's place.
            segment: model
                .segments
                .get(seg as usize)
                .map_or(seg as usize + 1, |m| m.segment),
            distance,
            margin,
        });
    }
    (assignments, summary)
}

/// Record `r` prepared as in training, into `row`; false (counted in
/// `summary`) when it cannot be scored: a gap with no fill, a value that is
/// not a number, a value outside its transform's domain. An unseen
/// category level is counted but scored.
fn prepare_record(
    model: &SegmentModel,
    coders: &[Coder],
    table: &Table,
    r: usize,
    row: &mut [f64],
    summary: &mut ScoreSummary,
) -> bool {
    for (f, fp) in model.features.iter().enumerate() {
        let value = match table.numeric_raw[f][r].as_deref() {
            None => match fp.fill {
                Some(v) => {
                    summary.filled[f].1 += 1;
                    v
                }
                None => {
                    summary.missing[f].1 += 1;
                    return false;
                }
            },
            Some(text) => match match &coders[f] {
                Coder::Number => parse_number_in(text, model.decimal),
                coder => coder.code(text),
            } {
                Some(v) => v,
                None => {
                    summary.not_numbers[f].1 += 1;
                    return false;
                }
            },
        };
        match prepared_value(fp, value) {
            Some(v) => row[f] = v,
            None => {
                summary.out_of_range[f].1 += 1;
                return false;
            }
        }
    }
    // A blank category the recipe did not keep as a level leaves the
    // record out, as in training.
    for (c, cat) in model.categories.iter().enumerate() {
        if table.text[c][r].is_empty() && cat.gaps != crate::plan::CategoryGaps::Keep {
            summary.missing[model.features.len() + c].1 += 1;
            return false;
        }
    }
    let mut offset = model.features.len();
    for (c, cat) in model.categories.iter().enumerate() {
        let raw = &table.text[c][r];
        let level = if raw.is_empty() {
            BLANK_LEVEL
        } else {
            raw.as_str()
        };
        match cat.levels.binary_search_by(|l| l.as_str().cmp(level)) {
            Ok(at) => row[offset + at] = cat.value,
            // An unseen level sets no indicator: the record is equally far
            // from every level's records.
            Err(_) => summary.unseen_levels[c].1 += 1,
        }
        offset += cat.levels.len();
    }
    true
}

fn count_slots<'a>(names: impl Iterator<Item = &'a String>) -> Vec<(String, usize)> {
    names.map(|n| (n.clone(), 0)).collect()
}

/// A raw value prepared exactly as the run prepared its own: clip, the
/// transform, scaling, weight. `None` outside the transform's range.
pub(crate) fn prepared_value(fp: &FeatureParams, x: f64) -> Option<f64> {
    let x = match fp.clip {
        Some((a, b)) => x.clamp(a, b),
        None => x,
    };
    let t = prepare::transform(fp.transform, x).ok()?;
    Some(if fp.constant {
        0.0
    } else {
        (t - fp.centre) / fp.divisor * fp.multiplier
    })
}

/// The columns a model needs, read as text so that each value's fate
/// (number, missing, not a number) is decided while scoring.
#[derive(Debug, Clone)]
pub struct Table {
    pub keys: Vec<String>,
    /// Per feature, each record's field; `None` where blank.
    pub numeric_raw: Vec<Vec<Option<String>>>,
    /// Per category, each record's value, spaces trimmed
    /// ([`crate::text::trim_spaces`]).
    pub text: Vec<Vec<String>>,
}

/// Reads the columns `model` needs from a CSV file. A missing column is an
/// error naming it; so is a malformed line or a blank key.
pub fn read_for_scoring(
    path: &std::path::Path,
    shown: &str,
    model: &SegmentModel,
) -> Result<Table, RunError> {
    if crate::parquet::is_parquet(path) {
        return parquet_for_scoring(path, shown, model);
    }
    let opened = super::load::Opened::new(path, shown, model.separator)?;
    let index_of = |name: &str| {
        opened
            .position(name)
            .ok_or_else(|| RunError::ModelColumnMissing {
                file: shown.to_string(),
                column: name.to_string(),
            })
    };
    let key_at = if model.keyless {
        None
    } else {
        Some(index_of(&model.key)?)
    };
    let num_at = model
        .features
        .iter()
        .map(|f| index_of(&f.column))
        .collect::<Result<Vec<_>, _>>()?;
    let text_at = model
        .categories
        .iter()
        .map(|c| index_of(&c.column))
        .collect::<Result<Vec<_>, _>>()?;
    let mut reader = opened.reader;
    let mut table = Table {
        keys: Vec::new(),
        numeric_raw: vec![Vec::new(); num_at.len()],
        text: vec![Vec::new(); text_at.len()],
    };
    let mut record = csv::StringRecord::new();
    loop {
        let line = match reader.read_record(&mut record) {
            Ok(Some(line)) => line,
            Ok(None) => break,
            Err(e) => return Err(super::load::malformed(shown, &e, reader.line_of(&e))),
        };
        let key = match key_at {
            Some(at) => record.get(at).unwrap_or("").to_string(),
            None => line.to_string(),
        };
        if let (Some(at), true) = (key_at, is_blank(&key)) {
            return Err(RunError::BlankKey {
                place: super::error::Place {
                    file: shown.to_string(),
                    line,
                    column: at + 1,
                    name: model.key.clone(),
                },
            });
        }
        table.keys.push(key);
        for (col, &at) in table.numeric_raw.iter_mut().zip(&num_at) {
            let field = record.get(at).unwrap_or("");
            col.push(if is_blank(field) {
                None
            } else {
                Some(field.trim().to_string())
            });
        }
        for (col, &at) in table.text.iter_mut().zip(&text_at) {
            col.push(crate::text::trim_spaces(record.get(at).unwrap_or("")).to_string());
        }
    }
    Ok(table)
}

/// [`read_for_scoring`] on a Parquet file: every column the model needs
/// as the text the same table in CSV would hold (see [`crate::parquet`]).
fn parquet_for_scoring(
    path: &std::path::Path,
    shown: &str,
    model: &SegmentModel,
) -> Result<Table, RunError> {
    use crate::parquet::{self as pq, As, Column};
    let unreadable = |e: pq::ReadError| RunError::Unreadable {
        file: shown.to_string(),
        reason: pq::words(&e),
    };
    let schema = pq::schema(path).map_err(unreadable)?;
    let index_of = |name: &str| {
        schema
            .names
            .iter()
            .position(|n| n.trim() == name)
            .ok_or_else(|| RunError::ModelColumnMissing {
                file: shown.to_string(),
                column: name.to_string(),
            })
    };
    let key_at = (!model.keyless).then(|| index_of(&model.key)).transpose()?;
    let mut wanted: Vec<(usize, As)> = key_at.map(|k| (k, As::Texts)).into_iter().collect();
    for f in &model.features {
        wanted.push((index_of(&f.column)?, As::Texts));
    }
    for c in &model.categories {
        wanted.push((index_of(&c.column)?, As::Texts));
    }
    let mut columns: Vec<Vec<Option<String>>> = pq::read(path, &wanted, None)
        .map_err(unreadable)?
        .into_iter()
        .map(|c| match c {
            Column::Texts(t) => t,
            Column::Numbers(_) => Vec::new(),
        })
        .collect();
    let keys = match key_at {
        Some(at) => {
            let keys = columns.remove(0);
            if let Some(i) = keys.iter().position(|k| k.as_deref().is_none_or(is_blank)) {
                return Err(RunError::BlankKey {
                    place: super::error::Place {
                        file: shown.to_string(),
                        line: i as u64 + 2,
                        column: at + 1,
                        name: model.key.clone(),
                    },
                });
            }
            keys.into_iter().map(Option::unwrap_or_default).collect()
        }
        None => (0..schema.records).map(|r| (r + 2).to_string()).collect(),
    };
    let text = columns.split_off(model.features.len());
    Ok(Table {
        keys,
        numeric_raw: columns
            .into_iter()
            .map(|c| {
                c.into_iter()
                    .map(|v| v.filter(|v| !is_blank(v)).map(|v| v.trim().to_string()))
                    .collect()
            })
            .collect(),
        text: text
            .into_iter()
            .map(|c| {
                c.iter()
                    .map(|v| crate::text::trim_spaces(v.as_deref().unwrap_or("")).to_string())
                    .collect()
            })
            .collect(),
    })
}

/// Reads and checks a model file.
pub fn read_model(path: &std::path::Path) -> Result<SegmentModel, RunError> {
    let shown = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| RunError::Unreadable {
        file: shown.clone(),
        reason: e.to_string(),
    })?;
    let model: SegmentModel = serde_json::from_slice(&bytes).map_err(|e| RunError::BadModel {
        file: shown.clone(),
        reason: e.to_string(),
    })?;
    if !MODEL_FORMATS_READ.contains(&model.format.as_str()) {
        return Err(RunError::BadModel {
            file: shown,
            reason: format!(
                "field `format` is `{}`, this assort reads {}",
                model.format,
                crate::text::and_list(&MODEL_FORMATS_READ.map(|f| format!("`{f}`")))
            ),
        });
    }
    let width = model.features.len()
        + model
            .categories
            .iter()
            .map(|c| c.levels.len())
            .sum::<usize>();
    if model.centres.is_empty() || model.centres.iter().any(|c| c.len() != width) {
        return Err(RunError::BadModel {
            file: shown,
            reason: "field `centres` does not match the model's columns".into(),
        });
    }
    if let Some(reason) = inconsistency(&model) {
        return Err(RunError::BadModel {
            file: shown,
            reason,
        });
    }
    Ok(model)
}

/// The first value in a model that no run could have written (a model is
/// JSON, and may have been edited by hand): every number finite, divisors
/// and weights positive, clip bounds in order, category levels sorted and
/// distinct, one centre per segment, segment numbers distinct and from 1,
/// the drift reference shaped like the features.
fn inconsistency(m: &SegmentModel) -> Option<String> {
    if let Some(reason) = measure_inconsistency(m) {
        return Some(reason);
    }
    let kinds = m.features.iter().filter(|f| !f.kind.is_number()).count();
    if kinds > 0 && m.format != MODEL_FORMAT_KINDS {
        return Some(format!(
            "its features include ordered categories or flags, which only `{MODEL_FORMAT_KINDS}` holds"
        ));
    }
    if let Some(why) = m
        .features
        .iter()
        .enumerate()
        .find_map(feature_inconsistency)
    {
        return Some(why);
    }
    if let Some(why) = m
        .categories
        .iter()
        .enumerate()
        .find_map(category_inconsistency)
    {
        return Some(why);
    }
    for (i, centre) in m.centres.iter().enumerate() {
        if let Some((j, v)) = centre
            .iter()
            .enumerate()
            .find(|(_, v)| !v.is_finite() || v.abs() > 1e150)
        {
            return Some(format!(
                "field `centres[{i}][{j}]` holds {v:e}, which no prepared record could be near"
            ));
        }
    }
    if m.segments.len() != m.centres.len() {
        return Some(format!(
            "fields `centres` and `segments` disagree: {} centres for {} segments",
            m.centres.len(),
            m.segments.len()
        ));
    }
    let mut numbers: Vec<usize> = m.segments.iter().map(|s| s.segment).collect();
    numbers.sort_unstable();
    if numbers.first() == Some(&0) || numbers.windows(2).any(|w| w[0] == w[1]) {
        return Some("field `segments`: segment numbers must be distinct and start from 1".into());
    }
    if let Some(d) = &m.drift {
        let shaped = d.features.len() == m.features.len()
            && d.far_distance.is_finite()
            && d.far_distance >= 0.0
            && d.features.iter().all(|x| {
                x.shares.len() == x.edges.len() + 1
                    && x.edges.windows(2).all(|w| w[0] < w[1])
                    && x.shares.iter().all(|s| s.is_finite() && *s >= 0.0)
            });
        if !shaped {
            return Some("field `drift` (the training data's distribution) is damaged".into());
        }
    }
    None
}

/// What is wrong with feature `i` of a model, if anything.
/// A measure that does not fit the model's columns.
fn measure_inconsistency(m: &SegmentModel) -> Option<String> {
    let (nf, nc) = (m.features.len(), m.categories.len());
    match &m.measure {
        Some(Measure::Gower { gower }) => {
            let gaps = &gower.gap_levels;
            let gap_levels = gaps.is_empty()
                || (gaps.len() == nf + nc
                    && gaps[..nf].iter().all(Option::is_none)
                    && gaps[nf..]
                        .iter()
                        .zip(&m.categories)
                        .all(|(g, c)| g.is_none_or(|g| (g as usize) < c.levels.len())));
            let shape = gap_levels
                && gower.weights.len() == nf + nc
                && gower.ranges.len() == nf + nc
                && gower.ranges[..nf].iter().all(|r| r.is_some_and(|r| r.is_finite() && r >= 0.0))
                && gower.ranges[nf..].iter().all(Option::is_none);
            let weights = gower.weights.iter().all(|w| w.is_finite() && *w > 0.0);
            (!(shape && weights)).then(|| {
                format!("field `measure` holds Gower ranges and weights that do not match the model's {nf} features and {nc} categories")
            })
        }
        Some(Measure::Prototypes { gamma }) => {
            (gamma.len() != nc || gamma.iter().any(|g| !g.is_finite() || *g <= 0.0)).then(|| {
                format!("field `measure` holds {} category costs for the model's {nc} categories, or a cost that is not a number above 0", gamma.len())
            })
        }
        _ => None,
    }
}

fn feature_inconsistency((i, f): (usize, &FeatureParams)) -> Option<String> {
    let col = &f.column;
    let finite = [f.centre, f.divisor, f.multiplier]
        .into_iter()
        .chain(f.fill)
        .chain(f.clip.map(|c| c.0))
        .chain(f.clip.map(|c| c.1))
        .all(f64::is_finite);
    if !finite {
        return Some(format!(
            "field `features[{i}]` (feature `{col}`) holds a value that is not a finite number"
        ));
    }
    if f.divisor <= 0.0 || f.multiplier <= 0.0 {
        let field = if f.divisor <= 0.0 {
            "divisor"
        } else {
            "multiplier"
        };
        return Some(format!(
            "field `features[{i}].{field}` (feature `{col}`) is {}; divisors and multipliers must be above 0",
            if f.divisor <= 0.0 { f.divisor } else { f.multiplier }
        ));
    }
    if f.clip.is_some_and(|(a, b)| a > b) {
        return Some(format!(
            "field `features[{i}].clip` (feature `{col}`) has its bounds in the wrong order"
        ));
    }
    None
}

/// What is wrong with category `i` of a model, if anything.
fn category_inconsistency((i, c): (usize, &CategoryParams)) -> Option<String> {
    if !(c.value.is_finite() && c.value > 0.0) {
        return Some(format!(
            "field `categories[{i}].value` (category `{}`) is {}; it must be above 0",
            c.column, c.value
        ));
    }
    if c.levels.windows(2).any(|w| w[0] >= w[1]) {
        return Some(format!(
            "field `categories[{i}].levels` (category `{}`) lists levels out of order or twice",
            c.column
        ));
    }
    None
}

/// The model as the bytes of its file.
pub fn to_bytes(model: &SegmentModel) -> Vec<u8> {
    let mut bytes = serde_json::to_vec_pretty(model).unwrap_or_default();
    bytes.push(b'\n');
    bytes
}
