//! Run: the interpreter. Takes a checked [`Plan`] (nothing else), reads the
//! data, prepares the matrix, fits k-means for every k asked for, judges
//! each k, chooses one, and builds profiles in original units.
//!
//! Nothing is written here: [`crate::output`] turns the [`Outcome`] into
//! tables and files, only once the whole run has succeeded.

pub mod comparison;
pub mod error;
pub mod load;
pub mod model;
pub mod prepare;
pub mod previous;
pub mod rules;
pub mod values;

use crate::engine::{self, compare, criteria, evidence, kmeans, silhouette, tree, EngineError};
use crate::plan::{ChooseK, Criterion, KMeansPlan, MethodPlan, Plan, SilhouetteMode, TreePlan};
pub use error::RunError;
use ndarray::{Array2, ArrayView2};
use prepare::Prepared;
use serde::Serialize;
use std::collections::HashMap;

/// Stream number base for silhouette samples (k-means uses `(k << 32) | r`).
const SILHOUETTE_STREAM: u64 = 1 << 63;

/// Stream for the sample of leaves the cophenetic correlation is measured
/// over on large trees.
const COPHENETIC_STREAM: u64 = (1 << 63) | (1 << 62);

/// Leaves up to which the cophenetic correlation is exact (all pairs);
/// above, it is measured over the pairs of this many sampled leaves, at a
/// cost that does not grow with the square of the records.
pub const COPHENETIC_SAMPLE: usize = 4_000;

/// When fewer than this share of restarts reach the best partition (or only
/// one does), the run advises more restarts.
pub const RESTART_ADVICE_SHARE: f64 = 0.2;

/// One row of the sweep: a k and what judged it.
#[derive(Debug, Clone, Serialize)]
pub struct SweepRow {
    pub k: usize,
    pub within_ss: f64,
    pub silhouette: f64,
    pub silhouette_evaluated: usize,
    /// Standard error of an estimated silhouette; `None` when exact.
    pub silhouette_se: Option<f64>,
    pub calinski_harabasz: f64,
    pub davies_bouldin: f64,
    /// The gap statistic and its standard error, when asked for.
    pub gap: Option<(f64, f64)>,
    /// Mean adjusted Rand index under bootstrap resampling, when asked for.
    pub stability: Option<f64>,
    /// For k-means: how the restarts went.
    pub restarts: Option<Restarts>,
}

/// How k-means restarts went for one k.
#[derive(Debug, Clone, Serialize)]
pub struct Restarts {
    /// Restarts that reached the best partition.
    pub at_best: usize,
    pub of: usize,
    /// Whether the best restart stopped before its round cap.
    pub converged: bool,
    /// Records the restarts ran on, when they ran on a sample (the best
    /// then refined on every record).
    pub sampled: Option<usize>,
}

/// The tree a `tree` recipe built.
#[derive(Debug, Clone)]
pub struct TreeResult {
    pub linkage: crate::plan::Linkage,
    pub distance: crate::plan::Metric,
    /// Records, or micro-segments in the two-stage route.
    pub leaves: usize,
    pub two_stage: bool,
    pub cophenetic: f64,
    /// Leaves whose pairs the cophenetic correlation was measured over
    /// (all of them up to [`COPHENETIC_SAMPLE`], else a seeded sample).
    pub cophenetic_leaves: usize,
    pub inversions: usize,
    pub dendrogram: tree::Dendrogram,
    pub leaf_names: Vec<String>,
}

impl SweepRow {
    pub fn value(&self, c: Criterion) -> f64 {
        match c {
            Criterion::Silhouette => self.silhouette,
            Criterion::CalinskiHarabasz => self.calinski_harabasz,
            Criterion::DaviesBouldin => self.davies_bouldin,
            Criterion::Stability => self.stability.unwrap_or(f64::NAN),
            // Chosen from the whole sweep, not row by row.
            Criterion::Elbow | Criterion::Gap => f64::NAN,
        }
    }
}

/// A record's place in the chosen segmentation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Assignment<'a> {
    pub key: &'a str,
    /// 1-based segment number.
    pub segment: usize,
    pub distance: f64,
    pub margin: f64,
}

/// Every segmented record's place, by columns: the keys in one buffer
/// rather than a string per record (at 10 million records, 24 bytes a
/// record instead of about 80).
#[derive(Debug, Clone, Default)]
pub struct Assignments {
    keys: load::Keys,
    /// 1-based segment numbers.
    segments: Vec<u32>,
    distances: Vec<f64>,
    margins: Vec<f64>,
}

impl Assignments {
    pub fn with_capacity(n: usize) -> Assignments {
        Assignments {
            keys: load::Keys::default(),
            segments: Vec::with_capacity(n),
            distances: Vec::with_capacity(n),
            margins: Vec::with_capacity(n),
        }
    }

    pub fn push(&mut self, a: Assignment<'_>) {
        self.keys.push(a.key);
        // Segment numbers are at most k, which the checker holds far below
        // u32::MAX (MAX_K).
        self.segments.push(a.segment as u32);
        self.distances.push(a.distance);
        self.margins.push(a.margin);
    }

    pub fn len(&self) -> usize {
        self.segments.len()
    }

    pub fn is_empty(&self) -> bool {
        self.segments.is_empty()
    }

    pub fn get(&self, i: usize) -> Assignment<'_> {
        Assignment {
            key: self.keys.get(i),
            segment: self.segments[i] as usize,
            distance: self.distances[i],
            margin: self.margins[i],
        }
    }

    pub fn iter(&self) -> impl Iterator<Item = Assignment<'_>> + '_ {
        (0..self.len()).map(|i| self.get(i))
    }
}

/// A feature's summary within a group of records: the mean, median and
/// quartiles in original units (gaps filled as the recipe fills them), and
/// the standardised difference measured where the segments were made.
#[derive(Debug, Clone, Serialize)]
pub struct FeatureSummary {
    pub mean: f64,
    pub median: f64,
    /// First and third quartiles (Hyndman and Fan's definition 7).
    pub q1: f64,
    pub q3: f64,
    /// In the clustered space (after clipping, the transform, scaling and
    /// weight): (group mean - overall mean) / overall standard deviation of
    /// the feature's clustered values. Scaling and weights multiply and
    /// shift, which this ratio ignores, so it is the difference the
    /// transform leaves: for a log-transformed feature, the difference on
    /// the log scale that drove the segments, not on the raw scale.
    pub std_diff: f64,
}

/// One segment (or, for the overall profile, all records).
#[derive(Debug, Clone, Serialize)]
pub struct Profile {
    pub segment: Option<usize>,
    pub label: Option<String>,
    pub size: usize,
    pub share: f64,
    pub features: Vec<FeatureSummary>,
    /// Per category, the share of each level (in the level order of
    /// [`prepare::CategoryParams::levels`]).
    pub categories: Vec<Vec<f64>>,
    /// The segment's centre in original units (none for the overall row).
    pub centre: Option<Vec<f64>>,
    pub silhouette: Option<f64>,
    /// Mean Jaccard recovery under bootstrap resampling, when asked for.
    pub stability: Option<f64>,
}

/// How the segments compare with a known grouping.
#[derive(Debug, Clone, Serialize)]
pub struct Validation {
    pub column: String,
    pub adjusted_rand_index: f64,
    pub matched: usize,
    /// Segmented records with no entry in the known grouping.
    pub unmatched: usize,
    /// Records in the known grouping's file.
    pub records: usize,
}

/// Everything a run found.
#[derive(Debug, Clone)]
pub struct Outcome {
    pub plan: Plan,
    pub records: usize,
    pub prepared: Prepared,
    pub sweep: Vec<SweepRow>,
    pub chosen: usize,
    /// One sentence: the rule that chose k.
    pub reason: String,
    /// When the criteria would choose different k, in plain words.
    pub disagreement: Option<String>,
    /// Advice on restarts, one sentence per k that needs it.
    pub advice: Vec<String>,
    /// What the evidence says beyond the choice: no structure, unstable
    /// segments.
    pub notes: Vec<String>,
    pub assignments: Assignments,
    pub profiles: Vec<Profile>,
    pub overall: Profile,
    pub validation: Option<Validation>,
    /// For `tree` recipes: the tree and its summary.
    pub tree: Option<TreeResult>,
    /// The chosen segments' centres in the clustered space, k rows.
    pub centres: Array2<f64>,
    /// The comparison with an earlier segmentation, when asked for.
    pub comparison: Option<comparison::Comparison>,
    /// For the chosen k, each segment's silhouettes, highest first.
    pub silhouettes: Vec<Vec<f64>>,
    /// With `previous`: how this run's segments were matched with last
    /// run's, and last run's segments as the model recorded them.
    pub matching: Option<previous::Matching>,
    pub then: Option<previous::Then>,
    /// With `previous`: this run's data against last run's training data.
    pub drift: Option<model::Drift>,
    /// The `tally` columns, per segment.
    pub values: Vec<values::ValueProfile>,
    /// Each segment's readable rule, in profile order.
    pub rules: Vec<rules::SegmentRule>,
}

/// Runs a plan.
pub fn run(plan: &Plan) -> Result<Outcome, RunError> {
    run_cached(plan, &mut DataCache::default())
}

/// The last data read, kept so that a session trying variations (another
/// k, another scaling) does not read the file again. The file's size and
/// modification time are part of the key, so an edited file is read anew.
#[derive(Debug, Default)]
pub struct DataCache {
    entry: Option<(CacheKey, load::Table)>,
    /// How many times a file was actually read.
    pub loads: usize,
}

#[derive(Debug, Clone, PartialEq)]
struct CacheKey {
    path: std::path::PathBuf,
    separator: char,
    decimal: crate::check::probe::DecimalMark,
    key: String,
    numeric: Vec<String>,
    text: Vec<String>,
    len: u64,
    modified: Option<std::time::SystemTime>,
}

impl DataCache {
    fn table(&mut self, plan: &Plan) -> Result<&load::Table, RunError> {
        let meta = std::fs::metadata(&plan.input.resolved).ok();
        let key = CacheKey {
            path: plan.input.resolved.clone(),
            separator: plan.input.separator,
            decimal: plan.input.decimal,
            key: plan.input.key.clone(),
            numeric: plan
                .features
                .iter()
                .map(|f| f.column.clone())
                .chain(plan.tally.iter().cloned())
                .collect(),
            text: plan.categories.iter().map(|c| c.column.clone()).collect(),
            len: meta.as_ref().map_or(0, |m| m.len()),
            modified: meta.and_then(|m| m.modified().ok()),
        };
        if self.entry.as_ref().is_none_or(|(k, _)| *k != key) {
            let table = load::load(
                &plan.input.resolved,
                &plan.input.path,
                plan.input.separator,
                &load::Columns {
                    key: &key.key,
                    numeric: &key.numeric,
                    text: &key.text,
                    decimal: plan.input.decimal,
                },
            )?;
            self.loads += 1;
            self.entry = Some((key, table));
        }
        // Filled just above when it was empty or stale.
        Ok(&self.entry.as_ref().expect("the cache was filled above").1)
    }
}

/// Runs a plan, reading the data through `cache`.
pub fn run_cached(plan: &Plan, cache: &mut DataCache) -> Result<Outcome, RunError> {
    run_with(plan, cache, &|_| {})
}

/// An engine error as the run reports it: a stop on request is no fault
/// of the data.
fn engine_error(k: usize, source: EngineError) -> RunError {
    match source {
        EngineError::Stopped => RunError::Stopped {
            during: "while fitting k-means",
        },
        source => RunError::Engine { k, source },
    }
}

/// Fails with [`RunError::Stopped`] when a stop was asked for.
fn go_on(during: &'static str) -> Result<(), RunError> {
    if crate::engine::stop::requested() {
        Err(RunError::Stopped { during })
    } else {
        Ok(())
    }
}

/// A stage of a run, for a progress display.
#[derive(Debug, Clone, Copy)]
pub struct Step {
    pub what: &'static str,
    pub done: usize,
    pub total: usize,
}

/// Runs a plan, telling `progress` how far it has got.
pub fn run_with(
    plan: &Plan,
    cache: &mut DataCache,
    progress: &dyn Fn(Step),
) -> Result<Outcome, RunError> {
    let table = cache.table(plan)?;
    let prepared = prepare::prepare(plan, table)?;
    let n = prepared.kept.len();
    let most = plan.ks().last().copied().unwrap_or(0);
    let needed = match &plan.method {
        MethodPlan::Tree(TreePlan { micro: Some(m), .. }) => m.segments,
        _ => most,
    };
    if needed > n {
        return Err(RunError::TooFewRecords { k: needed, n });
    }
    if let MethodPlan::Tree(TreePlan {
        micro: None,
        linkage,
        ..
    }) = &plan.method
    {
        // The checker refuses this from the counted records; the run holds
        // the line for a file that grew in between.
        let limit = crate::plan::TreeLimit::of(*linkage);
        if n > limit.records {
            return Err(RunError::TreeTooLarge {
                n,
                why: limit.reason(n, linkage.name()),
            });
        }
    }

    let x = prepared.matrix.view();
    let last = match &plan.previous {
        Some(p) => Some(previous::PreviousRun::read(p, &prepared)?),
        None => None,
    };
    let (candidates, tree) = match &plan.method {
        MethodPlan::KMeans(km) => (fit_kmeans(plan, km, x, last.as_ref(), progress)?, None),
        MethodPlan::Tree(t) => {
            progress(Step {
                what: "building the tree",
                done: 0,
                total: 1,
            });
            let (c, tree) = fit_tree(plan, t, x, table, &prepared.kept)?;
            (c, Some(tree))
        }
    };

    go_on("after fitting")?;
    let mut sweep = Vec::with_capacity(candidates.len());
    let mut per_segment_silhouette = Vec::with_capacity(candidates.len());
    let mut silhouette_values = Vec::with_capacity(candidates.len());
    for (i, c) in candidates.iter().enumerate() {
        progress(Step {
            what: "judging each k",
            done: i,
            total: candidates.len(),
        });
        go_on("while judging each k")?;
        let k = c.k;
        let sil = match plan.evidence.silhouette {
            SilhouetteMode::Exact => silhouette::exact(x, &c.labels, k),
            SilhouetteMode::Estimate => {
                silhouette::silhouette(x, &c.labels, k, plan.seed, SILHOUETTE_STREAM | k as u64)
            }
        };
        sweep.push(SweepRow {
            k,
            within_ss: criteria::within_ss(x, &c.labels, k),
            silhouette: sil.mean,
            silhouette_evaluated: sil.evaluated,
            silhouette_se: sil.std_error,
            calinski_harabasz: criteria::calinski_harabasz(x, &c.labels, k),
            davies_bouldin: criteria::davies_bouldin(x, &c.labels, k),
            restarts: c.restarts.clone(),
            gap: None,
            stability: None,
        });
        per_segment_silhouette.push(sil.per_segment);
        silhouette_values.push(sil.values);
    }

    // Evidence that reclusters: reference sets and resamples.
    let recluster = reclusterer(plan);
    if plan.evidence.gap.is_some() || plan.evidence.stability.is_some() {
        progress(Step {
            what: "gap and stability evidence",
            done: 0,
            total: 1,
        });
    }
    let ks: Vec<usize> = candidates.iter().map(|c| c.k).collect();
    let gaps = plan
        .evidence
        .gap
        .map(|b| evidence::gap_statistic(x, &ks, b, plan.seed, &*recluster));
    if let Some(g) = &gaps {
        for row in sweep.iter_mut() {
            row.gap = g.iter().find(|x| x.k == row.k).map(|x| (x.gap, x.se));
        }
    }
    let stability = plan.evidence.stability.map(|b| {
        let labels: Vec<Vec<u32>> = candidates.iter().map(|c| c.labels.clone()).collect();
        evidence::bootstrap_stability(x, &ks, &labels, b, plan.seed, &*recluster)
    });
    if let Some(st) = &stability {
        for (row, s) in sweep.iter_mut().zip(st) {
            row.stability = Some(s.mean_ari);
        }
    }
    go_on("while gathering the evidence for k")?;
    let picks = Picks::new(&sweep, gaps.as_deref());

    let (chosen, reason) = choose(plan, &sweep, &picks);
    let disagreement = disagreement(&picks);
    let advice = advice(&sweep);
    let at = candidates.iter().position(|c| c.k == chosen).unwrap_or(0);
    // Segment numbers: 1..k by size, or, with a previous model, the
    // numbers of the segments matched. `order[i]` is the size-ordered
    // segment that comes i-th by number.
    let matching = last.as_ref().map(|prev| {
        let c = &candidates[at];
        previous::match_segments(
            prev,
            &c.labels,
            c.centres.view(),
            prepared.kept.iter().map(|&r| table.keys.get(r)),
        )
    });
    let (order, numbers) = match &matching {
        Some(m) => m.order(),
        None => ((0..chosen).collect(), (1..=chosen).collect()),
    };
    let fit = &candidates[at].renumbered(&order);
    let label_of = |number: usize| -> Option<String> {
        plan.labels.get(&number).cloned().or_else(|| {
            let prev = last.as_ref()?;
            let matched = matching
                .as_ref()?
                .pairs
                .iter()
                .any(|p| p.previous == Some(number));
            matched.then(|| prev.label_of(number)).flatten()
        })
    };

    let measured = kmeans::distance_and_margin(x, fit.centres.view(), &fit.labels);
    let mut assignments = Assignments::with_capacity(n);
    for ((&r, &seg), &(distance, margin)) in prepared.kept.iter().zip(&fit.labels).zip(&measured) {
        assignments.push(Assignment {
            key: table.keys.get(r),
            segment: numbers[seg as usize],
            distance,
            margin,
        });
    }
    drop(measured);

    let means = FeatureMeans::new(&prepared, table, &fit.labels, chosen);
    let overall = profile(&prepared, means.overall(), None, None, None);
    let profiles = (0..chosen)
        .map(|s| {
            let members: Vec<usize> = fit
                .labels
                .iter()
                .enumerate()
                .filter(|(_, &l)| l as usize == s)
                .map(|(i, _)| i)
                .collect();
            let centre: Vec<f64> = prepared
                .features
                .iter()
                .enumerate()
                .map(|(f, p)| p.to_original(fit.centres[[s, f]]))
                .collect();
            let mut p = profile(
                &prepared,
                means.segment(s),
                Some(&members),
                Some(centre),
                per_segment_silhouette[at].get(order[s]).copied(),
            );
            p.segment = Some(numbers[s]);
            p.label = label_of(numbers[s]);
            p.stability = stability
                .as_ref()
                .and_then(|st| st[at].jaccard.get(order[s]).copied());
            p
        })
        .collect::<Vec<_>>();
    let mut notes = Vec::new();
    if let Some(s) = candidates
        .iter()
        .find_map(|c| c.restarts.as_ref().and_then(|r| r.sampled))
    {
        notes.push(format!(
            "k-means restarts ran on a seeded sample of {} of {} records; for each k the best {} were refined on every record (`sample` in the recipe)",
            crate::text::thousands(s),
            crate::text::thousands(n),
            kmeans::REFINED.min(candidates[0].restarts.as_ref().map_or(1, |r| r.of)),
        ));
    }
    if picks.gap == Some(1) && plan.choose != ChooseK::By(Criterion::Gap) {
        notes.push(NO_STRUCTURE.to_string());
    }
    for p in &profiles {
        if let (Some(j), Some(seg)) = (p.stability, p.segment) {
            if j < evidence::UNSTABLE_BELOW {
                let name = p
                    .label
                    .as_ref()
                    .map(|l| format!(" ({l})"))
                    .unwrap_or_default();
                notes.push(format!(
                    "segment {seg}{name} is unstable: resampled, it is recovered with a mean Jaccard of {j:.2}, below {}; do not present it as a group the data holds",
                    evidence::UNSTABLE_BELOW
                ));
            }
        }
    }

    let validation = match &plan.validate {
        Some(v) => Some(validate(plan, v, &assignments)?),
        None => None,
    };
    // The `compare with` file, read once for the comparison and the guard.
    let compared_with = match &plan.compare {
        Some(c) => Some(comparison::read_assignments(&c.resolved, &c.path)?),
        None => None,
    };
    let comparison = match (&plan.compare, &compared_with) {
        (Some(c), Some(old)) => {
            let new = comparison::from_run(&assignments, |s| label_of(s).unwrap_or_default());
            Some(
                comparison::compare(&c.path, old, "this run", &new)?.with_key_names(
                    comparison::key_name(&c.resolved).as_deref(),
                    Some(&plan.input.key),
                ),
            )
        }
        // Last run's assignments, given with `previous`, show the migration.
        _ => match last.as_ref().and_then(|l| l.assignments.as_ref()) {
            Some((path, old)) => {
                let new = comparison::from_run(&assignments, |s| label_of(s).unwrap_or_default());
                Some(comparison::compare(path, old, "this run", &new)?)
            }
            None => None,
        },
    };

    previous::check_labels_stay(
        plan,
        compared_with.as_deref(),
        &assignments,
        &prepared,
        &fit.labels,
        fit.centres.view(),
    )?;
    let drift = last.as_ref().and_then(|l| l.drift(&prepared));
    let values = values::profiles(
        table,
        plan.features.len(),
        &plan.tally,
        &prepared.kept,
        &fit.labels.iter().map(|&l| l as usize).collect::<Vec<_>>(),
        chosen,
    );

    let rules = rules::rules(
        &prepared,
        table,
        &fit.labels,
        &profiles
            .iter()
            .map(|p| p.segment.unwrap_or(0))
            .collect::<Vec<_>>(),
        &profiles.iter().map(|p| p.label.clone()).collect::<Vec<_>>(),
    );

    Ok(Outcome {
        plan: plan.clone(),
        records: table.keys.len(),
        prepared,
        sweep,
        chosen,
        reason,
        disagreement,
        advice,
        notes,
        assignments,
        profiles,
        overall,
        validation,
        tree,
        centres: fit.centres.clone(),
        comparison,
        silhouettes: {
            let mut per = silhouette_values.swap_remove(at);
            order.iter().map(|&s| std::mem::take(&mut per[s])).collect()
        },
        then: last.as_ref().map(|l| l.then()),
        drift,
        matching,
        values,
        rules,
    })
}

/// One candidate segmentation: a k, each record's segment (0-based,
/// canonical) and the segment centres in the clustered space.
struct Candidate {
    k: usize,
    labels: Vec<u32>,
    centres: Array2<f64>,
    restarts: Option<Restarts>,
}

impl Candidate {
    /// The same segmentation with segment `order[i]` numbered `i`.
    fn renumbered(&self, order: &[usize]) -> Candidate {
        let mut new_of = vec![0u32; order.len()];
        for (i, &s) in order.iter().enumerate() {
            new_of[s] = i as u32;
        }
        Candidate {
            k: self.k,
            labels: self.labels.iter().map(|&l| new_of[l as usize]).collect(),
            centres: self.centres.select(ndarray::Axis(0), order),
            restarts: self.restarts.clone(),
        }
    }
}

fn fit_kmeans(
    plan: &Plan,
    km: &KMeansPlan,
    x: ArrayView2<'_, f64>,
    last: Option<&previous::PreviousRun>,
    progress: &dyn Fn(Step),
) -> Result<Vec<Candidate>, RunError> {
    km.ks
        .iter()
        .enumerate()
        .map(|(i, &k)| {
            progress(Step {
                what: "fitting k-means",
                done: i,
                total: km.ks.len(),
            });
            let settings = kmeans::KMeansSettings {
                k,
                restarts: km.restarts,
                max_rounds: km.rounds,
                tolerance: km.tolerance,
                seeding: km.seeding,
                seed: plan.seed,
                sample: km.sample,
                // Last run's centres start one more restart at its k.
                start: last.filter(|l| l.k() == k).map(|l| l.start()),
            };
            let fit = kmeans::kmeans(x, &settings).map_err(|source| engine_error(k, source))?;
            Ok(Candidate {
                k,
                restarts: Some(Restarts {
                    at_best: fit.restarts_at_best,
                    of: fit.restarts,
                    converged: fit.converged,
                    sampled: fit.sampled,
                }),
                labels: fit.labels,
                centres: fit.centroids,
            })
        })
        .collect()
}

/// A tree as built for a recipe: over the records, or over k-means
/// micro-segments (then `leaf_of` maps each record to its leaf).
struct BuiltTree {
    tree: tree::Dendrogram,
    leaf_of: Option<Vec<u32>>,
    /// The points the tree was built on (records, or micro-segment centres).
    leaves: Array2<f64>,
}

impl BuiltTree {
    /// Each record's segment when the tree is cut at `height` (into `k`
    /// segments), canonical.
    fn cut_at_height(&self, height: f64, k: usize) -> Vec<u32> {
        let cut = self.tree.cut_at_height(height);
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

    /// Each record's segment when the tree is cut into `k`, canonical.
    fn cut(&self, k: usize) -> Vec<u32> {
        let cut = self.tree.cut(k);
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
fn build_tree(t: &TreePlan, x: ArrayView2<'_, f64>, seed: u64) -> Result<BuiltTree, RunError> {
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
            let fit = kmeans::kmeans(x, &settings).map_err(engine)?;
            let mut sizes = vec![0usize; m.segments];
            fit.labels.iter().for_each(|&l| sizes[l as usize] += 1);
            let tree =
                tree::linkage_weighted(fit.centroids.view(), Some(&sizes), t.linkage, t.distance)
                    .map_err(engine)?;
            Ok(BuiltTree {
                tree,
                leaf_of: Some(fit.labels),
                leaves: fit.centroids,
            })
        }
        None => Ok(BuiltTree {
            tree: tree::linkage(x, t.linkage, t.distance)
                .map_err(|source| RunError::Engine { k: 1, source })?,
            leaf_of: None,
            leaves: x.to_owned(),
        }),
    }
}

/// Builds one tree and cuts it at every k.
fn fit_tree(
    plan: &Plan,
    t: &TreePlan,
    x: ArrayView2<'_, f64>,
    table: &load::Table,
    kept: &[usize],
) -> Result<(Vec<Candidate>, TreeResult), RunError> {
    let built = build_tree(t, x, plan.seed)?;
    let ks = match t.height {
        Some(h) => {
            // The number of segments a cut at this height leaves.
            let k = built
                .tree
                .cut_at_height(h)
                .iter()
                .copied()
                .max()
                .map_or(1, |m| m as usize + 1);
            if k < 2 {
                let top = built.tree.merges.last().map_or(0.0, |m| m.height);
                return Err(RunError::HeightTooHigh { height: h, top });
            }
            vec![k]
        }
        None => t.ks.clone(),
    };
    let candidates = ks
        .iter()
        .map(|&k| {
            let labels = match t.height {
                Some(h) => built.cut_at_height(h, k),
                None => built.cut(k),
            };
            let centres = criteria::centres(x, &labels, k);
            let centres = Array2::from_shape_fn((k, x.ncols()), |(s, f)| centres[s][f]);
            Candidate {
                k,
                labels,
                centres,
                restarts: None,
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
        t.distance,
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

/// The k a criterion prefers: best value, ties to the smaller k. A value
/// that is not a number never wins.
pub fn best_k(sweep: &[SweepRow], c: Criterion) -> Option<&SweepRow> {
    let better = |a: f64, b: f64| if c.higher_is_better() { a > b } else { a < b };
    let mut best: Option<&SweepRow> = None;
    for row in sweep {
        let v = row.value(c);
        if v.is_nan() {
            continue;
        }
        if best.is_none_or(|b| better(v, b.value(c))) {
            best = Some(row);
        }
    }
    best
}

/// The sentence for a gap statistic that finds no cluster structure.
const NO_STRUCTURE: &str = "the gap statistic finds no cluster structure (its one-standard-error rule answers k = 1): the records look like one cloud, so read the segments as a partition of convenience, not as groups the data holds";

/// The k each criterion would choose, where it can.
struct Picks {
    by: Vec<(Criterion, usize)>,
    gap: Option<usize>,
    gap_row: Option<(f64, f64)>,
}

impl Picks {
    fn new(sweep: &[SweepRow], gaps: Option<&[evidence::Gap]>) -> Picks {
        let mut by = Vec::new();
        for c in [
            Criterion::Silhouette,
            Criterion::CalinskiHarabasz,
            Criterion::DaviesBouldin,
        ] {
            if let Some(r) = best_k(sweep, c) {
                by.push((c, r.k));
            }
        }
        let ks: Vec<usize> = sweep.iter().map(|r| r.k).collect();
        let within: Vec<f64> = sweep.iter().map(|r| r.within_ss).collect();
        if let Some(k) = evidence::knee(&ks, &within) {
            by.push((Criterion::Elbow, k));
        }
        let gap = gaps.and_then(evidence::gap_choice);
        let gap_row = gaps
            .and_then(|g| g.iter().find(|x| Some(x.k) == gap))
            .map(|x| (x.gap, x.se));
        if let Some(k) = gap {
            by.push((Criterion::Gap, k));
        }
        if sweep.iter().any(|r| r.stability.is_some()) {
            if let Some(r) = best_k(sweep, Criterion::Stability) {
                by.push((Criterion::Stability, r.k));
            }
        }
        Picks { by, gap, gap_row }
    }

    fn of(&self, c: Criterion) -> Option<usize> {
        self.by.iter().find(|(x, _)| *x == c).map(|(_, k)| *k)
    }
}

fn choose(plan: &Plan, sweep: &[SweepRow], picks: &Picks) -> (usize, String) {
    // The run always fits at least one k, so the sweep has a first row.
    let first = sweep.first().map_or(0, |r| r.k);
    if let MethodPlan::Tree(TreePlan {
        height: Some(h), ..
    }) = &plan.method
    {
        return (
            first,
            format!("k = {first}: the segments left when the tree is cut at height {h}"),
        );
    }
    let ks: Vec<usize> = sweep.iter().map(|r| r.k).collect();
    let span = match ks.as_slice() {
        [k] => format!("k = {k}"),
        _ => format!("k = {first}..{}", ks.last().copied().unwrap_or(first)),
    };
    let c = match plan.choose {
        ChooseK::Fixed(k) if ks.len() == 1 => return (k, format!("k = {k} is the only k fitted")),
        ChooseK::Fixed(k) => return (k, format!("k = {k} was fixed by the recipe (`choose k {k}`); the sweep over {span} is shown as evidence")),
        ChooseK::By(c) => c,
    };
    let Some(k) = picks.of(c) else {
        let why = match c {
            Criterion::Elbow => "the within-cluster sum of squares has no knee here (it needs three k or more, and a bend)",
            _ => "no k had a defined value",
        };
        return (
            first,
            format!("k = {first}: {why}, so the smallest k was kept"),
        );
    };
    if k == 1 {
        return (
            first,
            format!("{NO_STRUCTURE}; k = {first}, the smallest of the range, is shown"),
        );
    }
    let reason = match c {
        Criterion::Elbow => format!(
            "k = {k} is the knee of the within-cluster sum of squares (Kneedle) among {span}"
        ),
        Criterion::Gap => {
            let (g, se) = picks.gap_row.unwrap_or((f64::NAN, f64::NAN));
            format!("k = {k} is the smallest k whose gap ({g:.4}, standard error {se:.4}) is within one standard error of the next k's, among {span}")
        }
        _ => {
            let word = if c.higher_is_better() {
                "highest"
            } else {
                "lowest"
            };
            let v = sweep
                .iter()
                .find(|r| r.k == k)
                .map(|r| r.value(c))
                .unwrap_or(f64::NAN);
            format!(
                "k = {k} has the {word} {} ({}) among {span}",
                c.name(),
                fmt_criterion(v)
            )
        }
    };
    (k, reason)
}

fn fmt_criterion(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.4}")
    } else {
        "infinite".into()
    }
}

/// A sentence when the criteria point at different k.
fn disagreement(picks: &Picks) -> Option<String> {
    if picks.by.windows(2).all(|w| w[0].1 == w[1].1) {
        return None;
    }
    let mut ks: Vec<usize> = picks.by.iter().map(|(_, k)| *k).collect();
    ks.sort_unstable();
    ks.dedup();
    let parts: Vec<String> = ks
        .iter()
        .map(|&k| {
            let names: Vec<&str> = picks
                .by
                .iter()
                .filter(|(_, x)| *x == k)
                .map(|(c, _)| {
                    if *c == Criterion::Elbow {
                        "the knee"
                    } else {
                        c.name()
                    }
                })
                .collect();
            let verb = if names.len() == 1 { "points" } else { "point" };
            let names = match names.split_last() {
                Some((last, rest)) if !rest.is_empty() => format!("{} and {last}", rest.join(", ")),
                _ => names.join(""),
            };
            format!("{names} {verb} to k = {k}")
        })
        .collect();
    Some(format!(
        "the criteria disagree: {}; look at the profiles of each before settling",
        parts.join("; ")
    ))
}

/// How evidence reclusters a reference set or a resample: the recipe's
/// method at every k, k-means with at most the plan's evidence restarts.
fn reclusterer(plan: &Plan) -> Box<evidence::Recluster<'static>> {
    let method = plan.method.clone();
    let restarts_cap = plan.evidence.restarts;
    Box::new(
        move |data: ArrayView2<'_, f64>, ks: &[usize], seed: u64| -> Vec<Vec<u32>> {
            let n = data.nrows();
            let fallback = || vec![0u32; n];
            match &method {
                MethodPlan::KMeans(km) => ks
                    .iter()
                    .map(|&k| {
                        let settings = kmeans::KMeansSettings {
                            k,
                            restarts: km.restarts.min(restarts_cap),
                            max_rounds: km.rounds,
                            tolerance: km.tolerance,
                            seeding: km.seeding,
                            seed,
                            sample: km.sample,
                            start: None,
                        };
                        // A k the draw cannot support (too few distinct
                        // records) counts as a failed recovery.
                        kmeans::kmeans(data, &settings)
                            .map(|f| f.labels)
                            .unwrap_or_else(|_| fallback())
                    })
                    .collect(),
                MethodPlan::Tree(t) => match build_tree(t, data, seed) {
                    Ok(built) => ks.iter().map(|&k| built.cut(k)).collect(),
                    Err(_) => ks.iter().map(|_| fallback()).collect(),
                },
            }
        },
    )
}

fn advice(sweep: &[SweepRow]) -> Vec<String> {
    sweep
        .iter()
        .filter_map(|r| r.restarts.as_ref().map(|x| (r.k, x)))
        .filter(|(_, x)| x.of > 1 && ((x.at_best as f64) < RESTART_ADVICE_SHARE * x.of as f64 || x.at_best == 1))
        .map(|(k, x)| {
            format!(
                "for k = {k} only {} of {} restarts reached the best partition; k-means finds local optima, so more restarts are advisable, and a k whose best is rarely reached is often one the data does not support",
                x.at_best, x.of
            )
        })
        .collect()
}

/// Each feature's mean, median and quartiles over all kept records and
/// within each segment, in original units, and its standardised difference
/// in the clustered space: one pass per feature, its original values
/// rebuilt from the table one feature at a time (so no second copy of
/// every feature is held), its clustered values read from the matrix.
/// Sums run in record order, as [`engine::stats::mean`] sums.
struct FeatureMeans {
    overall: Vec<FeatureSummary>,
    /// `[segment][feature]`.
    by_segment: Vec<Vec<FeatureSummary>>,
}

impl FeatureMeans {
    fn new(p: &Prepared, table: &load::Table, labels: &[u32], k: usize) -> FeatureMeans {
        let mut out = FeatureMeans {
            overall: Vec::new(),
            by_segment: vec![Vec::new(); k],
        };
        for (f, fp) in p.features.iter().enumerate() {
            let values = prepare::original(table, &p.kept, f, fp.fill);
            let clustered = p.matrix.column(f).to_vec();
            let centre = engine::stats::mean(&clustered).unwrap_or(0.0);
            let sd = engine::stats::sd_population(&clustered).unwrap_or(0.0);
            out.overall.push(summary(&values, 0.0));
            let mut groups: Vec<(Vec<f64>, Vec<f64>)> = vec![(Vec::new(), Vec::new()); k];
            for ((v, c), &l) in values.iter().zip(&clustered).zip(labels) {
                groups[l as usize].0.push(*v);
                groups[l as usize].1.push(*c);
            }
            for (s, (vals, clus)) in groups.iter().enumerate() {
                let mean = engine::stats::mean(clus).unwrap_or(centre);
                let diff = if sd > 0.0 { (mean - centre) / sd } else { 0.0 };
                out.by_segment[s].push(summary(vals, diff));
            }
        }
        out
    }

    /// All records: no differences.
    fn overall(&self) -> Vec<FeatureSummary> {
        self.overall.clone()
    }

    /// Segment `s`.
    fn segment(&self, s: usize) -> Vec<FeatureSummary> {
        self.by_segment[s].clone()
    }
}

/// Mean, median and quartiles of some values, with a standardised
/// difference measured elsewhere.
fn summary(values: &[f64], std_diff: f64) -> FeatureSummary {
    let sorted = engine::stats::sorted(values);
    let q = |at| engine::stats::quantile_sorted(&sorted, at).unwrap_or(0.0);
    FeatureSummary {
        mean: engine::stats::mean(values).unwrap_or(0.0),
        median: q(0.5),
        q1: q(0.25),
        q3: q(0.75),
        std_diff,
    }
}

/// The profile of some kept records (`None`: all of them).
fn profile(
    p: &Prepared,
    features: Vec<FeatureSummary>,
    members: Option<&[usize]>,
    centre: Option<Vec<f64>>,
    silhouette: Option<f64>,
) -> Profile {
    let n = p.kept.len();
    let all: Vec<usize>;
    let members = match members {
        Some(m) => m,
        None => {
            all = (0..n).collect();
            &all
        }
    };
    let size = members.len();
    let categories = p
        .categories
        .iter()
        .zip(&p.codes)
        .map(|(cat, codes)| {
            let mut counts = vec![0usize; cat.levels.len()];
            members.iter().for_each(|&i| counts[codes[i]] += 1);
            counts
                .iter()
                .map(|&c| c as f64 / size.max(1) as f64)
                .collect()
        })
        .collect();
    Profile {
        segment: None,
        label: None,
        size,
        share: size as f64 / n.max(1) as f64,
        features,
        categories,
        centre,
        silhouette,
        stability: None,
    }
}

/// Joins the segments with the known grouping on the key and scores the
/// agreement (adjusted Rand index, Hubert and Arabie 1985).
fn validate(
    plan: &Plan,
    v: &crate::plan::ValidatePlan,
    assignments: &Assignments,
) -> Result<Validation, RunError> {
    let cols = [v.column.clone()];
    let known = load::load(
        &v.resolved,
        &v.path,
        plan.input.separator,
        &load::Columns {
            key: &plan.input.key,
            numeric: &[],
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
    Ok(Validation {
        column: v.column.clone(),
        adjusted_rand_index: compare::adjusted_rand_index(&ours, &theirs),
        matched: ours.len(),
        unmatched: assignments.len() - ours.len(),
        records: known.keys.len(),
    })
}
