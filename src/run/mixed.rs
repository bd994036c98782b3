//! The fit stage for methods with their own measure: k-medoids over a
//! dissimilarity matrix, a tree on Gower's dissimilarity, and
//! k-prototypes. Each returns candidates as k-means does, with centres in
//! the prepared space (a medoid's own row, or a prototype's means and the
//! indicators of its modes), so every later stage reads them alike.

use super::fit::{engine_error, ks_of_cut, Candidate, Fitted};
use super::measure::{mixed, Decoded, Layout, Measure};
use super::prepare::Prepared;
use super::{error::RunError, load, Restarts, Step, TreeResult, COPHENETIC_SAMPLE};
use super::{go_on, COPHENETIC_STREAM};
use crate::engine::gower::Gower;
use crate::engine::matrix::Condensed;
use crate::engine::weights::Weights;
use crate::engine::{kmedoids, kprototypes, tree};
use crate::plan::{Distance, KMedoidsPlan, KPrototypesPlan, Plan, TreePlan};
use ndarray::{Array2, Axis};

/// The measure a dissimilarity-matrix method compares records by, and its
/// matrix: Gower's over the prepared numbers (affine in the data, so the
/// range makes scaling and feature weights cancel; the recipe's weights
/// are Gower's column weights instead) and the categories, or a row
/// distance.
fn matrix_measure(
    plan: &Plan,
    prepared: &Prepared,
    distance: Distance,
) -> (Measure, Condensed, usize) {
    let x = Decoded::of_prepared(prepared);
    let measure = match distance.metric() {
        Some(metric) => Measure::Rows { metric },
        None => {
            let weights: Vec<f64> = plan
                .features
                .iter()
                .map(|f| f.weight)
                .chain(plan.categories.iter().map(|c| c.weight))
                .collect();
            Measure::Gower {
                gower: Gower::fit(&mixed(&x), &weights).with_gap_levels(blank_levels(prepared)),
            }
        }
    };
    let (m, apart) = measure.matrix(&x);
    (measure, m, apart)
}

/// Per Gower column, the level a kept blank became (`(blank)`): Gower
/// compares it as a gap, so a pair is measured on the columns both records
/// have (the numbers have none).
fn blank_levels(prepared: &Prepared) -> Vec<Option<u32>> {
    let numbers = prepared.features.iter().map(|_| None);
    let categories = prepared.categories.iter().map(|c| {
        c.levels
            .iter()
            .position(|l| l == super::prepare::BLANK_LEVEL)
            .map(|at| at as u32)
    });
    numbers.chain(categories).collect()
}

/// How the restarts of a fit on every record went.
fn restarts(at_best: usize, of: usize, converged: bool) -> Restarts {
    Restarts {
        at_best,
        of,
        converged,
        sampled: None,
        by_key: false,
    }
}

/// The prepared rows of `records` (places among the kept records).
fn rows_of(prepared: &Prepared, records: &[usize]) -> Array2<f64> {
    prepared.matrix.select(Axis(0), records)
}

/// k-medoids at every k, over one matrix.
pub(super) fn fit_kmedoids(
    plan: &Plan,
    km: &KMedoidsPlan,
    prepared: &Prepared,
    progress: &dyn Fn(Step),
) -> Result<Fitted, RunError> {
    progress(Step {
        what: "measuring every pair of records",
        done: 0,
        total: 1,
    });
    let (measure, m, apart) = matrix_measure(plan, prepared, km.distance);
    let mut candidates = Vec::with_capacity(km.ks.len());
    for (i, &k) in km.ks.iter().enumerate() {
        progress(Step {
            what: "fitting k-medoids",
            done: i,
            total: km.ks.len(),
        });
        go_on("while fitting k-medoids")?;
        let settings = kmedoids::KMedoidsSettings {
            k,
            restarts: km.restarts,
            max_passes: km.passes,
            seed: plan.seed,
        };
        let fit = kmedoids::kmedoids_weighted(&m, prepared.weights(), &settings)
            .map_err(|e| engine_error(k, e))?;
        candidates.push(Candidate {
            k,
            centres: rows_of(prepared, &fit.medoids),
            restarts: Some(restarts(fit.restarts_at_best, fit.restarts, fit.converged)),
            labels: fit.labels,
            medoids: Some(fit.medoids),
            sizes: None,
        });
    }
    Ok(Fitted {
        candidates,
        tree: None,
        measure,
        matrix: Some(m),
        apart,
    })
}

/// A tree on Gower's dissimilarity, cut at every k; each segment's centre
/// is its medoid.
pub(super) fn fit_gower_tree(
    plan: &Plan,
    t: &TreePlan,
    prepared: &Prepared,
    table: &load::Table,
) -> Result<Fitted, RunError> {
    let (measure, m, apart) = matrix_measure(plan, prepared, Distance::Gower);
    let dendrogram =
        tree::linkage_matrix_weighted(m.clone(), prepared.weights.as_deref(), t.linkage)
            .map_err(|e| engine_error(1, e))?;
    let ks = ks_of_cut(t, &dendrogram)?;
    let candidates = ks
        .iter()
        .map(|&k| {
            let labels = match t.height {
                Some(h) => dendrogram.cut_at_height(h),
                None => dendrogram.cut(k),
            };
            let medoids = kmedoids::medoids_of_weighted(&m, prepared.weights(), &labels, k);
            Candidate {
                k,
                centres: rows_of(prepared, &medoids),
                labels,
                restarts: None,
                medoids: Some(medoids),
                sizes: None,
            }
        })
        .collect();
    let (cophenetic, cophenetic_leaves) = dendrogram.cophenetic_estimate_by(
        &|i, j| m.get(i, j),
        COPHENETIC_SAMPLE,
        plan.seed,
        COPHENETIC_STREAM,
    );
    let tree = TreeResult {
        linkage: t.linkage,
        distance: t.distance,
        leaves: m.n(),
        two_stage: false,
        cophenetic,
        cophenetic_leaves,
        inversions: dendrogram.inversions(),
        dendrogram,
        leaf_names: prepared
            .kept
            .iter()
            .map(|&r| table.keys.get(r).to_string())
            .collect(),
    };
    Ok(Fitted {
        candidates,
        tree: Some(tree),
        measure,
        matrix: Some(m),
        apart,
    })
}

/// The prepared numbers alone (the indicators left out), and the category
/// codes, as k-prototypes reads them.
pub(super) struct PrototypeData<'a> {
    pub numbers: Array2<f64>,
    pub codes: Vec<Vec<u32>>,
    pub levels: Vec<usize>,
    pub gamma: Vec<f64>,
    /// The kept records' weights, borrowed from the prepared data.
    pub weights: Weights<'a>,
}

impl<'a> PrototypeData<'a> {
    pub fn new(plan: &Plan, kp: &KPrototypesPlan, prepared: &'a Prepared) -> PrototypeData<'a> {
        let p = prepared.features.len();
        let numbers = prepared
            .matrix
            .slice(ndarray::s![.., ..p])
            .as_standard_layout()
            .into_owned();
        let base = (kp.gamma).unwrap_or_else(|| {
            kprototypes::huang_gamma_weighted(numbers.view(), prepared.weights())
        });
        PrototypeData {
            codes: prepared
                .codes
                .iter()
                .map(|c| c.iter().map(|&l| l as u32).collect())
                .collect(),
            levels: prepared.categories.iter().map(|c| c.levels.len()).collect(),
            gamma: plan.categories.iter().map(|c| base * c.weight).collect(),
            weights: prepared.weights(),
            numbers,
        }
    }

    pub fn records(&self) -> kprototypes::MixedRecords<'_> {
        kprototypes::MixedRecords {
            numbers: self.numbers.view(),
            codes: &self.codes,
            levels: &self.levels,
            gamma: &self.gamma,
            weights: self.weights,
        }
    }
}

/// k-prototypes at every k.
pub(super) fn fit_kprototypes(
    plan: &Plan,
    kp: &KPrototypesPlan,
    prepared: &Prepared,
    progress: &dyn Fn(Step),
) -> Result<Fitted, RunError> {
    let data = PrototypeData::new(plan, kp, prepared);
    let width = prepared.matrix.ncols();
    let mut candidates = Vec::with_capacity(kp.ks.len());
    for (i, &k) in kp.ks.iter().enumerate() {
        progress(Step {
            what: "fitting k-prototypes",
            done: i,
            total: kp.ks.len(),
        });
        go_on("while fitting k-prototypes")?;
        let settings = kprototypes::KPrototypesSettings {
            k,
            restarts: kp.restarts,
            max_rounds: kp.rounds,
            tolerance: kp.tolerance,
            seed: plan.seed,
        };
        let fit =
            kprototypes::kprototypes(data.records(), &settings).map_err(|e| engine_error(k, e))?;
        // Centres in the prepared space: the means, then each mode's
        // indicator at the category's value.
        let mut centres = Array2::zeros((k, width));
        for s in 0..k {
            let mut at = data.numbers.ncols();
            for f in 0..at {
                centres[[s, f]] = fit.centres[[s, f]];
            }
            for (c, cat) in prepared.categories.iter().enumerate() {
                centres[[s, at + fit.modes[s][c] as usize]] = cat.value;
                at += cat.levels.len();
            }
        }
        candidates.push(Candidate {
            k,
            centres,
            restarts: Some(restarts(fit.restarts_at_best, fit.restarts, fit.converged)),
            labels: fit.labels,
            medoids: None,
            sizes: None,
        });
    }
    Ok(Fitted {
        candidates,
        tree: None,
        measure: Measure::Prototypes { gamma: data.gamma },
        matrix: None,
        apart: 0,
    })
}

/// The method's own measure for the judge, when it has one: the records
/// decoded, the matrix, and the centre of all records as one segment (the
/// overall medoid for matrix methods, the overall means and modes for
/// k-prototypes).
pub(super) fn own<'a>(
    plan: &Plan,
    prepared: &'a Prepared,
    fitted: &'a Fitted,
) -> Option<super::judge::Own<'a>> {
    if !plan.own_measure() {
        return None;
    }
    let layout = Layout::of(prepared);
    let x = Decoded::of_prepared(prepared);
    let overall = match &fitted.matrix {
        Some(m) => {
            let all = vec![0u32; m.n()];
            rows_of(
                prepared,
                &kmedoids::medoids_of_weighted(m, prepared.weights(), &all, 1),
            )
        }
        None => overall_prototype(prepared),
    };
    Some(super::judge::Own {
        measure: &fitted.measure,
        layout,
        x,
        matrix: fitted.matrix.as_ref(),
        overall,
    })
}

/// All records as one prototype, in the prepared space: each number's
/// mean, each category's most common level (ties to the first level).
fn overall_prototype(prepared: &Prepared) -> Array2<f64> {
    let x = &prepared.matrix;
    let w = prepared.weights();
    let n = if x.nrows() == 0 {
        1.0
    } else {
        w.total(x.nrows())
    };
    let p = prepared.features.len();
    let mut row = Array2::zeros((1, x.ncols()));
    for f in 0..p {
        row[[0, f]] = (x.column(f).iter().enumerate())
            .map(|(i, v)| w.at(i) * v)
            .sum::<f64>()
            / n;
    }
    let mut at = p;
    for (cat, codes) in prepared.categories.iter().zip(&prepared.codes) {
        let mut counts = vec![0.0f64; cat.levels.len()];
        codes
            .iter()
            .enumerate()
            .for_each(|(i, &c)| counts[c] += w.at(i));
        row[[0, at + kprototypes::mode(&counts)]] = cat.value;
        at += cat.levels.len();
    }
    row
}
