//! From the table to the matrix the engine clusters, in a fixed order:
//!
//! 1. missing values: records are dropped for columns whose rule says so;
//!    a missing value under no rule stops the run at its location; fill
//!    values (median, mean) are computed over the records that remain;
//! 2. clipping at quantiles (linear interpolation, see
//!    [`crate::engine::stats::quantile_sorted`]), in original units;
//! 3. the transform (log1p, log, sqrt);
//! 4. scaling: z-score (mean, population standard deviation), robust
//!    (median, interquartile range), range (minimum, maximum) or none;
//! 5. feature weights: a feature of weight w is multiplied by sqrt(w), so it
//!    counts w times in the squared distance;
//! 6. categories: one indicator column per level, sorted by level, valued
//!    sqrt(w) for the record's level. Two records with different levels are
//!    then at squared distance 2w, the expected squared distance between two
//!    random records on one z-scored feature: at weight 1 a category weighs
//!    on average no more than one z-scored feature. A blank category value is
//!    a gap: with `missing keep` a level of its own, `(blank)`; with
//!    `missing drop` the record is left out in step 1; with no rule the run
//!    stops at its line.
//!
//! Every parameter is kept, so centres can be mapped back to original units
//! (and, later, new records prepared the same way).

use super::error::{Place, RunError};
use super::load::NumericColumn;
use super::load::Table;
use crate::engine::weights::Weights;
use crate::engine::{exact, stats};
use crate::plan::{CategoryGaps, FeatureKind, MissingRule, Plan, Scale, Transform};
use ndarray::Array2;
use rayon::prelude::*;
use serde::Serialize;

/// How one feature was prepared.
#[derive(Debug, Clone, Serialize, serde::Deserialize)]
pub struct FeatureParams {
    pub column: String,
    pub fill: Option<f64>,
    /// Values filled in.
    pub filled: usize,
    /// Clip bounds in original units.
    pub clip: Option<(f64, f64)>,
    pub transform: Transform,
    pub centre: f64,
    pub divisor: f64,
    /// sqrt(weight).
    pub multiplier: f64,
    /// The column was constant after reshaping, so scaling left it at zero.
    pub constant: bool,
    /// An ordered category or a flag, coded as numbers (models before
    /// kinds hold numbers only, and read so).
    #[serde(default, skip_serializing_if = "FeatureKind::is_number")]
    pub kind: FeatureKind,
}

impl FeatureParams {
    /// A feature's parameters once its gaps are settled (`fill`, filling
    /// `filled` gaps): not yet clipped or scaled.
    pub fn filled(
        fp: &crate::plan::FeaturePlan,
        fill: Option<f64>,
        filled: usize,
    ) -> FeatureParams {
        FeatureParams {
            column: fp.column.clone(),
            fill,
            filled,
            clip: None,
            transform: fp.transform,
            centre: 0.0,
            divisor: 1.0,
            multiplier: fp.weight.sqrt(),
            constant: false,
            kind: fp.kind.clone(),
        }
    }

    /// Maps a clustered coordinate back to original units (clipping cannot
    /// be undone, so the value is within the clip bounds).
    pub fn to_original(&self, v: f64) -> f64 {
        let t = v / self.multiplier * self.divisor + self.centre;
        match self.transform {
            Transform::None => t,
            Transform::Log1p => libm::expm1(t),
            Transform::Log => libm::exp(t),
            Transform::Sqrt => t * t,
        }
    }
}

#[derive(Debug, Clone, Serialize, serde::Deserialize)]
pub struct CategoryParams {
    pub column: String,
    pub levels: Vec<String>,
    pub value: f64,
    /// What a blank does; models written before blanks were gaps kept
    /// them as a level, and read so.
    #[serde(default, skip_serializing_if = "is_keep")]
    pub gaps: CategoryGaps,
}

fn is_keep(g: &CategoryGaps) -> bool {
    *g == CategoryGaps::Keep
}

/// The matrix and everything needed to read it.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// Kept records by (features, then one column per category level).
    pub matrix: Array2<f64>,
    /// Indices into the table of the records kept.
    pub kept: Vec<usize>,
    /// Per category, each kept record's level index.
    pub codes: Vec<Vec<usize>>,
    pub features: Vec<FeatureParams>,
    pub categories: Vec<CategoryParams>,
    /// Records dropped for missing values, by column (a record missing in
    /// two such columns counts in both).
    pub dropped_by: Vec<(String, usize)>,
    pub dropped: usize,
    /// Each dropped record, in file order (the hand-off says why a record
    /// has no segment).
    pub left_out: Vec<LeftOut>,
    /// Each kept record's weight (`represents`), when records carry
    /// weights.
    pub weights: Option<Vec<f64>>,
}

impl Prepared {
    /// The kept records' weights, for the engine.
    pub fn weights(&self) -> Weights<'_> {
        Weights::maybe(self.weights.as_deref())
    }
}

/// A record dropped by `missing drop`.
#[derive(Debug, Clone)]
pub struct LeftOut {
    /// Its row in the table, and its key.
    pub row: usize,
    pub key: String,
    /// The columns it has a gap in, among those whose rule drops the
    /// record: a feature by its plan position, a category `c` as the
    /// number of features + `c`.
    pub gaps: Vec<usize>,
}

pub const BLANK_LEVEL: &str = "(blank)";

pub fn prepare(plan: &Plan, table: &Table) -> Result<Prepared, RunError> {
    prepare_with(plan, table, None)
}

/// [`prepare`] with the features' parameters given rather than measured on
/// `table`: `read passes` measures them over every record and prepares
/// the sample with them.
pub fn prepare_given(
    plan: &Plan,
    table: &Table,
    params: Vec<FeatureParams>,
) -> Result<Prepared, RunError> {
    prepare_with(plan, table, Some(params))
}

fn prepare_with(
    plan: &Plan,
    table: &Table,
    given: Option<Vec<FeatureParams>>,
) -> Result<Prepared, RunError> {
    let n = table.keys.len();
    let all_weights = record_weights(plan, table)?;
    let (kept, dropped_by, left_out) = drop_rows(plan, table);
    let weights = all_weights.map(|w| kept.iter().map(|&i| w[i]).collect::<Vec<f64>>());
    let w = weights.as_deref();
    // Features are summarised side by side; the first problem is the one
    // of the first feature in recipe order, as one after another.
    let measured = given.is_none();
    let mut params = match given {
        Some(params) => params,
        None => (plan.features.par_iter().enumerate())
            .map(|(f, fp)| fill(plan, table, (&kept, w), f, fp))
            .collect::<Vec<_>>()
            .into_iter()
            .collect::<Result<Vec<_>, _>>()?,
    };
    let (categories, codes) = encode_categories(plan, table, &kept)?;
    let width = plan.features.len();
    let total_width = width + categories.iter().map(|c| c.levels.len()).sum::<usize>();
    if measured {
        (plan
            .features
            .par_iter()
            .zip(params.par_iter_mut())
            .enumerate())
        .map(|(f, (fp, params))| feature_params(plan, table, (&kept, w), f, fp, params))
        .collect::<Vec<_>>()
        .into_iter()
        .collect::<Result<Vec<()>, _>>()?;
    }
    let mut matrix = Array2::zeros((kept.len(), total_width));
    // Then written a block of records at a time, every feature of a record
    // together, so preparing never holds a second copy of every feature.
    let columns: Vec<(&NumericColumn, &FeatureParams, Transform)> = (table.numeric.iter())
        .zip(&params)
        .zip(&plan.features)
        .map(|((col, p), fp)| (col, p, fp.transform))
        .collect();
    let all = (matrix.as_slice_mut()).expect("a new matrix is in standard (row-major) layout");
    (all.par_chunks_mut(4096 * total_width.max(1)))
        .zip(kept.par_chunks(4096))
        .for_each(|(rows, kept)| {
            for (row, &i) in rows.chunks_mut(total_width.max(1)).zip(kept) {
                for (x, &(col, p, t)) in row.iter_mut().zip(&columns) {
                    *x = prepared_value(col.get(i).or(p.fill).unwrap_or(0.0), p, t);
                }
            }
        });
    let mut offset = width;
    for (cat, code) in categories.iter().zip(&codes) {
        for (r, &l) in code.iter().enumerate() {
            matrix[[r, offset + l]] = cat.value;
        }
        offset += cat.levels.len();
    }
    Ok(Prepared {
        matrix,
        dropped: n - kept.len(),
        kept,
        codes,
        features: params,
        categories,
        dropped_by,
        left_out,
        weights,
    })
}

/// Every record's weight from the `represents` column (read after the
/// features and the `tally` columns), or none; a blank, a value of 0 or
/// below is an error at its data line (the loader refuses text).
fn record_weights(plan: &Plan, table: &Table) -> Result<Option<Vec<f64>>, RunError> {
    let Some(name) = &plan.record_weights else {
        return Ok(None);
    };
    let at = plan.features.len() + plan.tally.len();
    let col = &table.numeric[at];
    let mut out = Vec::with_capacity(col.len());
    for (row, v) in col.iter().enumerate() {
        match v {
            Some(w) if w > 0.0 => out.push(w),
            bad => {
                return Err(RunError::BadWeight {
                    place: Place {
                        file: plan.input.shown(),
                        line: table.lines[row],
                        column: table.fields.get(at).copied().unwrap_or(0),
                        name: name.clone(),
                    },
                    found: bad.map_or("a blank".to_string(), |w| format!("`{w}`")),
                });
            }
        }
    }
    Ok(Some(out))
}

/// The kept records, and their weights when records carry weights.
type KeptRows<'a> = (&'a [usize], Option<&'a [f64]>);

/// Records kept, how many each `missing drop` column dropped, and each
/// dropped record's row with the features it has a gap in.
type Drops = (Vec<usize>, Vec<(String, usize)>, Vec<LeftOut>);

/// Step 1, missing values that drop records: the records kept, how many
/// each `missing drop` column dropped, and why each dropped record was.
fn drop_rows(plan: &Plan, table: &Table) -> Drops {
    let n = table.keys.len();
    let nf = plan.features.len();
    // A column's place: a feature by its plan position, a category `c`
    // as nf + c.
    let gap = |at: usize, row: usize| match at.checked_sub(nf) {
        None => table.numeric[at].get(row).is_none(),
        Some(c) => table.text[c][row].is_empty(),
    };
    let drop_columns: Vec<(usize, &str)> = (plan.features.iter().enumerate())
        .filter(|(_, fp)| fp.missing == MissingRule::DropRow)
        .map(|(f, fp)| (f, fp.column.as_str()))
        .chain(
            (plan.categories.iter().enumerate())
                .filter(|(_, cp)| cp.gaps == CategoryGaps::Drop)
                .map(|(c, cp)| (nf + c, cp.column.as_str())),
        )
        .collect();
    let mut keep = vec![true; n];
    let mut dropped_by = Vec::new();
    for &(at, column) in &drop_columns {
        let mut count = 0;
        for (row, keep_row) in keep.iter_mut().enumerate() {
            if gap(at, row) {
                count += 1;
                *keep_row = false;
            }
        }
        dropped_by.push((column.to_string(), count));
    }
    let kept = (0..n).filter(|&i| keep[i]).collect();
    // Only the dropped records are looked at again, for why.
    let left_out = (0..n)
        .filter(|&i| !keep[i])
        .map(|row| LeftOut {
            row,
            key: table.keys.get(row).to_string(),
            gaps: drop_columns
                .iter()
                .map(|&(at, _)| at)
                .filter(|&at| gap(at, row))
                .collect(),
        })
        .collect();
    (kept, dropped_by, left_out)
}

/// Step 1, missing values that are filled: feature `f`'s fill value and
/// how many gaps it fills among the kept records; a gap nothing fills is
/// an error at its data line.
fn fill(
    plan: &Plan,
    table: &Table,
    (kept, w): KeptRows<'_>,
    f: usize,
    fp: &crate::plan::FeaturePlan,
) -> Result<FeatureParams, RunError> {
    let col = &table.numeric[f];
    // The values present, gathered only for a rule that fills from them.
    let from_present = matches!(fp.missing, MissingRule::FillMedian | MissingRule::FillMean);
    let present: Vec<f64> = match from_present {
        true => kept.iter().filter_map(|&i| col.get(i)).collect(),
        false => Vec::new(),
    };
    let present_w: Option<Vec<f64>> = w.filter(|_| from_present).map(|w| {
        (kept.iter().zip(w))
            .filter(|(&i, _)| col.get(i).is_some())
            .map(|(_, &w)| w)
            .collect()
    });
    let pw = present_w.as_deref();
    let fill = match fp.missing {
        MissingRule::FillMedian => median(&present, pw),
        MissingRule::FillMean => match pw {
            Some(pw) => stats::mean_weighted(&present, pw),
            None if exact_sums(plan) => exact::mean(&present, exact::largest(&present))
                .map_err(|e| out_of_exact_range(&fp.column, e))?,
            None => stats::mean(&present),
        },
        MissingRule::FillValue(v) => Some(v),
        MissingRule::Refuse | MissingRule::DropRow | MissingRule::Keep => None,
    };
    // Only counted and checked here; the values themselves are rebuilt by
    // `original` when the matrix is filled.
    let mut filled = 0;
    for &i in kept {
        match (col.get(i), fill) {
            (Some(_), _) => {}
            (None, Some(_)) => filled += 1,
            (None, None) if present.is_empty() && from_present => {
                return Err(RunError::NothingToFillFrom {
                    column: fp.column.clone(),
                });
            }
            (None, None) => {
                return Err(RunError::MissingValue {
                    place: located(plan, table, i, f),
                });
            }
        }
    }
    Ok(FeatureParams::filled(fp, fill, filled))
}

/// Step 6, categories: each category's levels (sorted; a blank is its own
/// level) and every kept record's level code.
fn encode_categories(
    plan: &Plan,
    table: &Table,
    kept: &[usize],
) -> Result<(Vec<CategoryParams>, Vec<Vec<usize>>), RunError> {
    let mut categories = Vec::new();
    let mut codes = Vec::new();
    for (c, cp) in plan.categories.iter().enumerate() {
        // Dropped records are not kept, so a blank left is one to keep or
        // one no rule covers.
        if cp.gaps == CategoryGaps::Refuse {
            if let Some(&row) = kept.iter().find(|&&i| table.text[c][i].is_empty()) {
                return Err(RunError::BlankCategory {
                    place: Place {
                        file: plan.input.shown(),
                        line: table.lines[row],
                        column: table.text_fields.get(c).copied().unwrap_or(0),
                        name: cp.column.clone(),
                    },
                });
            }
        }
        let level_of = |s: &str| {
            if s.is_empty() {
                BLANK_LEVEL.to_string()
            } else {
                s.to_string()
            }
        };
        let mut levels: Vec<String> = kept.iter().map(|&i| level_of(&table.text[c][i])).collect();
        levels.sort();
        levels.dedup();
        let code: Vec<usize> = kept
            .iter()
            .map(|&i| {
                let l = level_of(&table.text[c][i]);
                // Every kept record's level is in `levels`, built from them.
                levels.binary_search(&l).unwrap_or(0)
            })
            .collect();
        codes.push(code);
        categories.push(CategoryParams {
            column: cp.column.clone(),
            levels,
            value: cp.weight.sqrt(),
            gaps: cp.gaps,
        });
    }
    Ok((categories, codes))
}

/// Steps 2-5 for feature `f`: clip, transform, scale and weight its filled
/// values, recording the parameters in `params` (the values are written
/// into the matrix by [`prepared_value`], which gives the same bits).
fn feature_params(
    plan: &Plan,
    table: &Table,
    (kept, w): KeptRows<'_>,
    f: usize,
    fp: &crate::plan::FeaturePlan,
    params: &mut FeatureParams,
) -> Result<(), RunError> {
    let mut v = original(table, kept, f, params.fill);
    if let Some((lo, hi)) = fp.clip {
        if let Some(&[a, b]) = quantiles(&v, w, &[lo, hi]).as_deref() {
            v.iter_mut().for_each(|x| *x = x.clamp(a, b));
            params.clip = Some((a, b));
        }
    }
    for (j, x) in v.iter_mut().enumerate() {
        *x = transform(fp.transform, *x).map_err(|(name, help)| RunError::TransformDomain {
            place: located(plan, table, kept[j], f),
            transform: name,
            value: *x,
            help,
        })?;
    }
    let (centre, divisor) = match (plan.scale, exact_sums(plan)) {
        (Scale::Zscore, true) => exact_zscore(&v).map_err(|e| out_of_exact_range(&fp.column, e))?,
        (scale, _) => scale_params(scale, &v, w),
    };
    let constant = divisor == 0.0;
    params.centre = centre;
    params.divisor = if constant { 1.0 } else { divisor };
    params.constant = constant;
    // Values near the largest a number can hold (1e308) overflow the sums
    // of scaling; they would flatten the feature without a word.
    let scaled = |x: f64| scale(x, params).is_finite();
    if !(centre.is_finite() && divisor.is_finite() && v.iter().all(|&x| scaled(x))) {
        return Err(too_large_to_scale(plan, table, kept, f, params.fill));
    }
    Ok(())
}

/// Step 4-5 for one transformed value.
fn scale(x: f64, p: &FeatureParams) -> f64 {
    if p.constant {
        0.0
    } else {
        (x - p.centre) / p.divisor * p.multiplier
    }
}

/// A filled value as the matrix holds it: clipped, transformed, scaled
/// and weighted by the feature's parameters. [`feature_params`] has
/// transformed every value of the feature, so none is outside the
/// transform's domain here.
fn prepared_value(x: f64, p: &FeatureParams, t: Transform) -> f64 {
    let x = match p.clip {
        Some((a, b)) => x.clamp(a, b),
        None => x,
    };
    scale(transform(t, x).unwrap_or(f64::NAN), p)
}

/// The error for a feature whose values overflow scaling, located at its
/// largest value.
fn too_large_to_scale(
    plan: &Plan,
    table: &Table,
    kept: &[usize],
    f: usize,
    fill: Option<f64>,
) -> RunError {
    let values = original(table, kept, f, fill);
    let (at, biggest) = values
        .iter()
        .enumerate()
        .fold(
            (0, 0.0f64),
            |(i, a), (j, x)| {
                if x.abs() > a {
                    (j, x.abs())
                } else {
                    (i, a)
                }
            },
        );
    RunError::TooLargeToScale {
        place: located(plan, table, kept[at], f),
        biggest,
    }
}

/// Feature `f`'s values of the kept records after filling, in original
/// units: what profiles describe. Rebuilt from the table when asked rather
/// than kept beside the matrix, which on a file of millions of records
/// would double the memory the features take.
pub fn original(table: &Table, kept: &[usize], f: usize, fill: Option<f64>) -> Vec<f64> {
    let col = &table.numeric[f];
    kept.iter()
        .map(|&i| col.get(i).or(fill).unwrap_or(0.0))
        .collect()
}

/// The place of feature `f` of table row `row`, with its field number.
fn located(plan: &Plan, table: &Table, row: usize, f: usize) -> Place {
    Place {
        file: plan.input.shown(),
        line: table.lines[row],
        column: table.fields.get(f).copied().unwrap_or(0),
        name: plan.features[f].column.clone(),
    }
}

pub(crate) fn transform(t: Transform, x: f64) -> Result<f64, (&'static str, &'static str)> {
    // libm gives the same bits on every platform, unlike the system's maths
    // library, which keeps reruns identical across machines.
    match t {
        Transform::None => Ok(x),
        Transform::Log1p if x > -1.0 => Ok(libm::log1p(x)),
        Transform::Log1p => Err((
            "log1p",
            "log1p needs values above -1; clip the column or choose another reshaping",
        )),
        Transform::Log if x > 0.0 => Ok(libm::log(x)),
        Transform::Log => Err(("log", "log needs values above 0; `log1p` also accepts 0")),
        Transform::Sqrt if x >= 0.0 => Ok(x.sqrt()),
        Transform::Sqrt => Err(("sqrt", "sqrt needs values of 0 or more")),
    }
}

/// Whether the parameters are summed exactly ([`exact::Sum`]): for
/// `sample ... by key`, whose results must not depend on the order or
/// the split of the records, so that a run in passes or in a database
/// prepares them as this one does. Weights are refused there.
pub(super) fn exact_sums(plan: &Plan) -> bool {
    matches!(&plan.method, crate::plan::MethodPlan::KMeans(km) if km.by_key)
}

/// The z-score's (mean, population standard deviation) from exact sums:
/// [`exact::mean`], then [`exact::sd_population`] around it.
pub fn exact_zscore(v: &[f64]) -> Result<(f64, f64), exact::OutOfRange> {
    let largest = exact::largest(v);
    let Some(mean) = exact::mean(v, largest)? else {
        return Ok((0.0, 0.0));
    };
    Ok((mean, exact::sd_population(v, largest, mean)?))
}

fn out_of_exact_range(column: &str, e: exact::OutOfRange) -> RunError {
    RunError::ByKey {
        reason: format!(
            "the values of `{column}` are out of the exact sums' range: {}",
            e.to_string().replace("feature 0", "the column")
        ),
    }
}

/// (centre, divisor) for a scaling, weighted when the records carry
/// weights; a zero divisor marks a constant column.
fn scale_params(scale: Scale, v: &[f64], w: Option<&[f64]>) -> (f64, f64) {
    match (scale, w) {
        (Scale::Zscore, None) => (
            stats::mean(v).unwrap_or(0.0),
            stats::sd_population(v).unwrap_or(0.0),
        ),
        (Scale::Zscore, Some(w)) => (
            stats::mean_weighted(v, w).unwrap_or(0.0),
            stats::sd_population_weighted(v, w).unwrap_or(0.0),
        ),
        (Scale::Robust, _) => match quantiles(v, w, &[0.25, 0.5, 0.75]).as_deref() {
            Some(&[q1, q2, q3]) => (q2, q3 - q1),
            _ => (0.0, 0.0),
        },
        (Scale::Range, _) => {
            let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            if v.is_empty() {
                (0.0, 0.0)
            } else {
                (lo, hi - lo)
            }
        }
        (Scale::None, _) => (0.0, 1.0),
    }
}

/// The quantiles at `qs` (ascending; definition 7), weighted when the
/// records carry weights ([`stats::quantile_sorted_weighted`] over one
/// sort), else by selection ([`stats::quantiles_selected`]: no full sort,
/// the same values to the bit). `None` for no values.
pub(crate) fn quantiles(v: &[f64], w: Option<&[f64]>, qs: &[f64]) -> Option<Vec<f64>> {
    match w {
        Some(w) => {
            let s = stats::sorted_weighted(v, w);
            qs.iter()
                .map(|&q| stats::quantile_sorted_weighted(&s, q))
                .collect()
        }
        None => stats::quantiles_selected(&mut v.to_vec(), qs),
    }
}

/// The first quartile, median and third quartile.
pub(crate) fn quartiles(v: &[f64], w: Option<&[f64]>) -> Option<[f64; 3]> {
    match quantiles(v, w, &[0.25, 0.5, 0.75])?.as_slice() {
        &[q1, q2, q3] => Some([q1, q2, q3]),
        _ => None,
    }
}

/// The median, weighted when weights are given.
pub(crate) fn median(v: &[f64], w: Option<&[f64]>) -> Option<f64> {
    quantiles(v, w, &[0.5])?.first().copied()
}
