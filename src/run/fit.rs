//! The fit stage: the recipe's method over the prepared matrix, one
//! candidate segmentation per k (k-means with restarts at every k, or one
//! tree cut at every k). A new method plugs in here: it returns
//! [`Candidate`]s, and every later stage takes them as they are.

use super::measure::Measure;
use super::mixed;
use super::prepare::Prepared;
use super::{
    error::RunError, load, previous, Restarts, Step, TreeResult, COPHENETIC_SAMPLE,
    COPHENETIC_STREAM,
};
use crate::engine::matrix::Condensed;
use crate::engine::{criteria, kmeans, tree, weights::Weights, EngineError};
use crate::plan::{Distance, KMeansPlan, MethodPlan, Plan, TreePlan};
use ndarray::{Array2, ArrayView2};

/// What the fit stage found: a candidate per k, the tree for `tree`
/// recipes, and the measure the method compares records by (with the
/// matrix of every pair, for methods that hold one).
pub(super) struct Fitted {
    pub candidates: Vec<Candidate>,
    pub tree: Option<TreeResult>,
    pub measure: Measure,
    pub matrix: Option<Condensed>,
    /// Pairs of records that shared no column (Gower's dissimilarity).
    pub apart: usize,
}

impl Fitted {
    pub(super) fn of(candidates: Vec<Candidate>, tree: Option<TreeResult>) -> Fitted {
        Fitted {
            candidates,
            tree,
            measure: Measure::Euclidean,
            matrix: None,
            apart: 0,
        }
    }
}

/// Fits the plan's method at every k it asks for.
pub(super) fn fit(
    plan: &Plan,
    prepared: &Prepared,
    table: &load::Table,
    last: Option<&previous::PreviousRun>,
    progress: &dyn Fn(Step),
) -> Result<Fitted, RunError> {
    let x = prepared.matrix.view();
    match &plan.method {
        MethodPlan::KMeans(km) if km.by_key => {
            let keys: Vec<&str> = prepared.kept.iter().map(|&r| table.keys.get(r)).collect();
            let candidates =
                super::driven::fit(plan, km, (x, prepared.weights()), &keys, progress)?;
            Ok(Fitted::of(candidates, None))
        }
        MethodPlan::KMeans(km) => {
            let w = prepared.weights();
            let candidates = fit_kmeans(plan, km, (x, w), last, progress)?;
            Ok(Fitted::of(candidates, None))
        }
        MethodPlan::KMedoids(km) => mixed::fit_kmedoids(plan, km, prepared, progress),
        MethodPlan::KPrototypes(kp) => mixed::fit_kprototypes(plan, kp, prepared, progress),
        MethodPlan::Tree(t) => {
            progress(Step {
                what: "building the tree",
                done: 0,
                total: 1,
            });
            if t.distance == Distance::Gower {
                return mixed::fit_gower_tree(plan, t, prepared, table);
            }
            let w = prepared.weights();
            let (candidates, tree) = fit_tree(plan, t, (x, w), table, &prepared.kept)?;
            Ok(Fitted::of(candidates, Some(tree)))
        }
    }
}

/// An engine error as the run reports it: a stop on request is no fault
/// of the data.
pub(super) fn engine_error(k: usize, source: EngineError) -> RunError {
    match source {
        EngineError::Stopped => RunError::Stopped {
            during: "while fitting k-means",
        },
        source => RunError::Engine { k, source },
    }
}

/// One candidate segmentation: a k, each record's segment (0-based,
/// canonical) and the segment centres in the clustered space.
pub(super) struct Candidate {
    pub k: usize,
    pub labels: Vec<u32>,
    pub centres: Array2<f64>,
    pub restarts: Option<Restarts>,
    /// For methods whose segments centre on a record (k-medoids, a tree
    /// on Gower's dissimilarity): each segment's medoid, as its place
    /// among the kept records.
    pub medoids: Option<Vec<usize>>,
    /// Records per segment over every record, when `labels` label only a
    /// sample of them (`read passes`): what sizes and the floor count.
    pub sizes: Option<Vec<u64>>,
}

impl Candidate {
    /// The same segmentation with segment `order[i]` numbered `i`.
    pub(super) fn renumbered(&self, order: &[usize]) -> Candidate {
        let mut new_of = vec![0u32; order.len()];
        for (i, &s) in order.iter().enumerate() {
            new_of[s] = i as u32;
        }
        Candidate {
            k: self.k,
            labels: self.labels.iter().map(|&l| new_of[l as usize]).collect(),
            centres: self.centres.select(ndarray::Axis(0), order),
            restarts: self.restarts.clone(),
            medoids: self
                .medoids
                .as_ref()
                .map(|m| order.iter().map(|&s| m[s]).collect()),
            sizes: self
                .sizes
                .as_ref()
                .map(|z| order.iter().map(|&s| z[s]).collect()),
        }
    }
}

fn fit_kmeans(
    plan: &Plan,
    km: &KMeansPlan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    last: Option<&previous::PreviousRun>,
    progress: &dyn Fn(Step),
) -> Result<Vec<Candidate>, RunError> {
    // The data's spread, for every k's tolerance, measured once.
    let spread = kmeans::Spread::of(x, w);
    each_k(km, progress, |k| {
        let settings = kmeans::KMeansSettings {
            // Last run's centres start one more restart at its k.
            start: last.filter(|l| l.k() == k).map(|l| l.start()),
            ..settings_at(plan, km, k)
        };
        let fit = kmeans::kmeans_weighted_spread(x, w, &settings, &spread)
            .map_err(|source| engine_error(k, source))?;
        Ok(Candidate {
            k,
            restarts: Some(Restarts {
                at_best: fit.restarts_at_best,
                of: fit.restarts,
                converged: fit.converged,
                sampled: fit.sampled,
                by_key: false,
            }),
            labels: fit.labels,
            centres: fit.centroids,
            medoids: None,
            sizes: None,
        })
    })
}

/// `fit` at every k of the recipe, in order, saying so to `progress`.
pub(super) fn each_k<T>(
    km: &KMeansPlan,
    progress: &dyn Fn(Step),
    mut fit: impl FnMut(usize) -> Result<T, RunError>,
) -> Result<Vec<T>, RunError> {
    (km.ks.iter().enumerate())
        .map(|(i, &k)| {
            progress(Step {
                what: "fitting k-means",
                done: i,
                total: km.ks.len(),
            });
            fit(k)
        })
        .collect()
}

/// The k-means settings of a recipe at `k`, without a given start.
pub(super) fn settings_at(plan: &Plan, km: &KMeansPlan, k: usize) -> kmeans::KMeansSettings {
    kmeans::KMeansSettings {
        k,
        restarts: km.restarts,
        max_rounds: km.rounds,
        tolerance: km.tolerance,
        seeding: km.seeding,
        seed: plan.seed,
        sample: km.sample,
        start: None,
    }
}

/// A tree as built for a recipe: over the records, or over k-means
/// micro-segments (then `leaf_of` maps each record to its leaf).
pub(super) struct BuiltTree {
    tree: tree::Dendrogram,
    leaf_of: Option<Vec<u32>>,
    /// The points the tree was built on (records, or micro-segment centres).
    leaves: Array2<f64>,
}

impl BuiltTree {
    /// Each record's segment when the tree is cut at `height` (into `k`
    /// segments), canonical.
    fn cut_at_height(&self, height: f64, k: usize) -> Vec<u32> {
        self.per_record(self.tree.cut_at_height(height), k)
    }

    /// Each record's segment when the tree is cut into `k`, canonical.
    pub(super) fn cut(&self, k: usize) -> Vec<u32> {
        self.per_record(self.tree.cut(k), k)
    }

    /// A cut of the leaves as each record's segment: over micro-segments,
    /// each record takes its micro-segment's, renumbered canonically.
    fn per_record(&self, cut: Vec<u32>, k: usize) -> Vec<u32> {
        match &self.leaf_of {
            Some(micro) => {
                kmeans::canonical(
                    &micro.iter().map(|&m| cut[m as usize]).collect::<Vec<_>>(),
                    k,
                )
                .0
            }
            None => cut,
        }
    }
}

/// Builds the tree a plan asks for; on failure, the k (or micro count) that
/// failed and why.
pub(super) fn build_tree(
    t: &TreePlan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    seed: u64,
) -> Result<BuiltTree, RunError> {
    match &t.micro {
        Some(m) => {
            let settings = kmeans::KMeansSettings {
                k: m.segments,
                restarts: m.restarts,
                max_rounds: m.rounds,
                tolerance: m.tolerance,
                seeding: kmeans::Seeding::KMeansPlusPlus,
                seed,
                sample: None,
                start: None,
            };
            let engine = |source| engine_error(m.segments, source);
            let fit = kmeans::kmeans_weighted(x, w, &settings).map_err(engine)?;
            let mut sizes = vec![0usize; m.segments];
            fit.labels.iter().for_each(|&l| sizes[l as usize] += 1);
            let weights = w.per_segment(&fit.labels, m.segments);
            let stands_for = tree::Sizes {
                counts: Some(&sizes),
                weights: w.is_weighted().then_some(weights.as_slice()),
            };
            let tree =
                tree::linkage_weighted(fit.centroids.view(), stands_for, t.linkage, metric_of(t))
                    .map_err(engine)?;
            Ok(BuiltTree {
                tree,
                leaf_of: Some(fit.labels),
                leaves: fit.centroids,
            })
        }
        None => Ok(BuiltTree {
            tree: tree::linkage_weighted(
                x,
                tree::Sizes {
                    counts: None,
                    weights: w.as_slice(),
                },
                t.linkage,
                metric_of(t),
            )
            .map_err(|source| RunError::Engine { k: 1, source })?,
            leaf_of: None,
            leaves: x.to_owned(),
        }),
    }
}

/// The k a tree is cut at: the recipe's, or the number of segments a cut
/// at its height leaves (at least 2, or the height is too high).
pub(super) fn ks_of_cut(t: &TreePlan, tree: &tree::Dendrogram) -> Result<Vec<usize>, RunError> {
    let Some(h) = t.height else {
        return Ok(t.ks.clone());
    };
    let k = tree
        .cut_at_height(h)
        .iter()
        .copied()
        .max()
        .map_or(1, |m| m as usize + 1);
    if k < 2 {
        let top = tree.merges.last().map_or(0.0, |m| m.height);
        return Err(RunError::HeightTooHigh { height: h, top });
    }
    Ok(vec![k])
}

/// The row distance of a tree not on Gower's dissimilarity (which the fit
/// routes elsewhere).
fn metric_of(t: &TreePlan) -> tree::Metric {
    t.distance.metric().unwrap_or(tree::Metric::Euclidean)
}

/// Builds one tree and cuts it at every k.
fn fit_tree(
    plan: &Plan,
    t: &TreePlan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    table: &load::Table,
    kept: &[usize],
) -> Result<(Vec<Candidate>, TreeResult), RunError> {
    let built = build_tree(t, (x, w), plan.seed)?;
    let ks = ks_of_cut(t, &built.tree)?;
    let candidates = ks
        .iter()
        .map(|&k| {
            let labels = match t.height {
                Some(h) => built.cut_at_height(h, k),
                None => built.cut(k),
            };
            let centres = criteria::centres_weighted(x, w, &labels, k);
            let centres = Array2::from_shape_fn((k, x.ncols()), |(s, f)| centres[s][f]);
            Candidate {
                k,
                labels,
                centres,
                restarts: None,
                medoids: None,
                sizes: None,
            }
        })
        .collect();
    let leaf_names = match &built.leaf_of {
        Some(_) => (1..=built.leaves.nrows())
            .map(|i| format!("micro-{i}"))
            .collect(),
        None => kept
            .iter()
            .map(|&r| table.keys.get(r).to_string())
            .collect(),
    };
    let (cophenetic, cophenetic_leaves) = built.tree.cophenetic_estimate(
        built.leaves.view(),
        metric_of(t),
        COPHENETIC_SAMPLE,
        plan.seed,
        COPHENETIC_STREAM,
    );
    let result = TreeResult {
        linkage: t.linkage,
        distance: t.distance,
        leaves: built.leaves.nrows(),
        two_stage: built.leaf_of.is_some(),
        cophenetic,
        cophenetic_leaves,
        inversions: built.tree.inversions(),
        dendrogram: built.tree,
        leaf_names,
    };
    Ok((candidates, result))
}
