//! Run: the interpreter. Takes a checked [`Plan`] (nothing else), reads the
//! data, prepares the matrix, fits k-means for every k asked for, judges
//! each k, chooses one, and builds profiles in original units.
//!
//! Nothing is written here: [`crate::output`] turns the [`Outcome`] into
//! tables and files, only once the whole run has succeeded.

mod blocks;
pub mod comparison;
mod driven;
pub mod error;
mod fit;
mod judge;
pub mod load;
pub mod measure;
mod mixed;
pub mod model;
mod number;
pub mod passes;
pub mod prepare;
pub mod previous;
mod profile;
pub mod rules;
pub mod stages;
pub mod values;

pub use judge::best_k;

use crate::engine::tree;
use crate::plan::{Criterion, MethodPlan, Plan, TreePlan};
use crate::text;
pub use error::RunError;
use ndarray::Array2;
use prepare::Prepared;
use serde::Serialize;

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
    /// Records in the smallest segment.
    pub smallest: usize,
    /// With record weights: the members the smallest segment stands for.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub smallest_weighted: Option<f64>,
    /// The smallest segment is below the recipe's size floor, so this k is
    /// never chosen.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub below_floor: bool,
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
    /// The sample was drawn by key rank and refined with exact sums
    /// (`sample N by key`).
    pub by_key: bool,
}

/// The tree a `tree` recipe built.
#[derive(Debug, Clone)]
pub struct TreeResult {
    pub linkage: crate::plan::Linkage,
    pub distance: crate::plan::Distance,
    /// Records, or micro-segments in the micro-segment route.
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
    /// Gaps the recipe's `missing fill` filled here: counted in the mean,
    /// median and quartiles as the fill value.
    pub filled: usize,
}

/// One segment (or, for the overall profile, all records).
#[derive(Debug, Clone, Serialize)]
pub struct Profile {
    pub segment: Option<usize>,
    pub label: Option<String>,
    /// Records in the segment.
    pub size: usize,
    /// With record weights: the members the segment stands for (its
    /// summed weight).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weighted: Option<f64>,
    /// The segment's share of the members: of the records, or with record
    /// weights of the summed weight.
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
    /// The key of the segment's medoid, a typical member (k-medoids, and
    /// trees on Gower's dissimilarity).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub medoid: Option<String>,
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
    /// The digest of a table's values as read ([`load::Table::digest`]);
    /// a file's digest is taken of the file.
    pub read_digest: Option<String>,
    /// Where a connection led ([`load::Table::target`]).
    pub read_target: Option<String>,
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
    /// How the method compares a record with a segment's centre; the
    /// model scores new records by it.
    pub measure: measure::Measure,
    /// Each stage's wall time and the peak memory when it ended: for
    /// `--json` and `--times`, never for the run record.
    pub stages: Vec<stages::StageTime>,
    /// With `read passes`: what writing the assignments reads again; the
    /// `assignments` above are then the sample's.
    pub in_passes: Option<passes::InPasses>,
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
    decimal: crate::plan::DecimalMark,
    key: String,
    numeric: Vec<String>,
    kinds: Vec<crate::plan::FeatureKind>,
    text: Vec<String>,
    len: u64,
    modified: Option<std::time::SystemTime>,
    /// The records put in key order (`sample ... by key`).
    in_key_order: bool,
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
                .chain(plan.record_weights.iter().cloned())
                .collect(),
            kinds: plan.features.iter().map(|f| f.kind.clone()).collect(),
            text: plan.categories.iter().map(|c| c.column.clone()).collect(),
            len: meta.as_ref().map_or(0, |m| m.len()),
            modified: meta.and_then(|m| m.modified().ok()),
            in_key_order: matches!(&plan.method, crate::plan::MethodPlan::KMeans(km) if km.by_key),
        };
        // A table carries no size or time to tell a change by: read anew.
        let stale = plan.input.database.is_some();
        if stale || self.entry.as_ref().is_none_or(|(k, _)| *k != key) {
            let cols = load::Columns {
                key: (!plan.input.keyless).then_some(key.key.as_str()),
                numeric: &key.numeric,
                kinds: &key.kinds,
                text: &key.text,
                decimal: plan.input.decimal,
            };
            let table = match plan.input.source() {
                Some(source) => {
                    load::load_source(&source, &cols, &|name| std::env::var(name).ok())?
                }
                None => load::load(
                    &plan.input.resolved,
                    &plan.input.path,
                    plan.input.separator,
                    &cols,
                )?,
            };
            let table = match key.in_key_order {
                true => table.in_key_order(),
                false => table,
            };
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

/// Runs a plan, telling `progress` how far it has got: the stages in
/// order, each a function in its own room.
pub fn run_with(
    plan: &Plan,
    cache: &mut DataCache,
    progress: &dyn Fn(Step),
) -> Result<Outcome, RunError> {
    if let (true, MethodPlan::KMeans(km)) = (plan.input.passes, &plan.method) {
        return run_in_passes(plan, km, progress);
    }
    let mut clock = stages::Clock::start();
    let table = cache.table(plan)?;
    clock.lap("read");
    let prepared = prepare::prepare(plan, table)?;
    enough_records(plan, prepared.kept.len())?;
    clock.lap("prepare");
    let last = previous::PreviousRun::read_if(plan, &prepared, table.digest.as_deref())?;
    let fitted = fit::fit(plan, &prepared, table, last.as_ref(), progress)?;
    go_on("after fitting")?;
    clock.lap("fit");
    let read = Read {
        table,
        records: table.keys.len(),
        last,
        passes: None,
    };
    conclude(plan, read, prepared, fitted, clock, progress)
}

/// `read passes`: the parameters, the rounds and the chosen segments'
/// sums over every record in passes, the rest over the sample
/// ([`passes`]).
fn run_in_passes(
    plan: &Plan,
    km: &crate::plan::KMeansPlan,
    progress: &dyn Fn(Step),
) -> Result<Outcome, RunError> {
    let mut clock = stages::Clock::start();
    let mut measured = passes::measure(plan, km, progress)?;
    let (kept, dropped) = measured.kept();
    enough_records(plan, kept as usize)?;
    go_on("after fitting")?;
    clock.lap("fit");
    let candidates = std::mem::take(&mut measured.candidates);
    let mut prepared = measured.prepared.clone();
    prepared.dropped = dropped as usize;
    prepared.dropped_by = measured.dropped_by.clone();
    let read = Read {
        table: &measured.table,
        records: measured.look_records as usize,
        last: None,
        passes: Some(&measured),
    };
    conclude(
        plan,
        read,
        prepared,
        fit::Fitted::of(candidates, None),
        clock,
        progress,
    )
}

/// What the stages after the fit read: the records (all of them, or with
/// `read passes` the sample), how many the input holds, last run's model,
/// and the passes.
struct Read<'a> {
    table: &'a load::Table,
    records: usize,
    last: Option<previous::PreviousRun>,
    passes: Option<&'a passes::Measured>,
}

/// The stages after the fit, each a function in its own room: judging,
/// numbering, placing, profiles, tallies, the comparison and the rules.
fn conclude(
    plan: &Plan,
    read: Read<'_>,
    prepared: Prepared,
    fitted: fit::Fitted,
    mut clock: stages::Clock,
    progress: &dyn Fn(Step),
) -> Result<Outcome, RunError> {
    let (table, last) = (read.table, read.last.as_ref());
    let own = mixed::own(plan, &prepared, &fitted);
    let weighed = (prepared.matrix.view(), prepared.weights());
    let mut judged = judge::judge(plan, weighed, &fitted.candidates, own.as_ref(), progress)?;
    clock.lap("judge");
    let chosen = &fitted.candidates[judged.at];
    let numbered = number::number(plan, chosen, last, &prepared, table);
    let assignments = number::place(&prepared, table, &numbered, &fitted.measure);
    clock.lap("place");
    let exact = prepare::exact_sums(plan);
    let (mut profiles, mut overall) =
        profile::profiles(&prepared, table, &numbered, &judged, exact);
    let in_passes = read
        .passes
        .map(|m| m.every_record(plan, &numbered, &mut profiles, &mut overall))
        .transpose()?;
    // Records kept: every one read, less those `missing drop` left out.
    let kept = read.records - prepared.dropped;
    let mut notes = profile::notes(&fitted, &judged, &profiles, kept);
    notes.extend(in_passes.as_ref().map(|p| passes_note(p, read.records)));
    notes.extend(data_notes(plan, &prepared, table));
    let values = tallies(plan, &prepared, table, &numbered.fit, in_passes.as_ref());
    clock.lap("profile");
    let against = comparison::against(plan, &assignments, &numbered, last)?;
    let fit = &numbered.fit;
    let compared = against.compared_with.as_deref();
    let centres = fit.centres.view();
    previous::check_labels_stay(
        plan,
        compared,
        &assignments,
        &prepared,
        &fit.labels,
        centres,
    )?;
    let drift = last.and_then(|l| l.drift(&prepared));
    clock.lap("compare");
    let rules = segment_rules(plan, &prepared, table, fit, &profiles);
    clock.lap("rules");
    Ok(Outcome {
        plan: plan.clone(),
        records: read.records,
        read_digest: table.digest.clone(),
        read_target: table.target.clone(),
        silhouettes: chosen_silhouettes(&mut judged, &numbered),
        sweep: judged.sweep,
        chosen: judged.chosen,
        reason: judged.reason,
        disagreement: judged.disagreement,
        advice: judged.advice,
        notes,
        assignments,
        profiles,
        overall,
        validation: against.validation,
        tree: fitted.tree,
        centres: fit.centres.clone(),
        comparison: against.comparison,
        then: last.map(|l| l.then()),
        drift,
        matching: numbered.matching,
        values,
        rules,
        prepared,
        measure: fitted.measure,
        stages: clock.laps,
        in_passes,
    })
}

/// What a run in passes measured where, in plain words.
fn passes_note(p: &passes::InPasses, records: usize) -> String {
    format!(
        "the records were read in passes (`read passes`), never all in memory: the preparation's parameters, the refinement, and each segment's size, share, means and tallies are over every one of the {} records, exactly; the criteria for k, the medians, quartiles and standardised differences, the rules and the evidence are measured on the sample of {} drawn by key",
        text::thousands(records),
        text::thousands(p.sample),
    )
}

/// The `tally` columns per segment of the chosen segmentation; in passes
/// their counts, means, totals and shares over every record.
fn tallies(
    plan: &Plan,
    prepared: &Prepared,
    table: &load::Table,
    fit: &fit::Candidate,
    in_passes: Option<&passes::InPasses>,
) -> Vec<values::ValueProfile> {
    let mut described = values::profiles(
        table,
        plan.features.len(),
        &plan.tally,
        (&prepared.kept, prepared.weights.as_deref()),
        (&fit.labels, fit.k),
        prepare::exact_sums(plan),
    );
    if let Some(p) = in_passes {
        for (j, v) in described.iter_mut().enumerate() {
            values::exact(v, &p.tally_sums(j));
        }
    }
    described
}

/// Each segment's readable rule, numbered and named as its profile.
fn segment_rules(
    plan: &Plan,
    prepared: &Prepared,
    table: &load::Table,
    fit: &fit::Candidate,
    profiles: &[Profile],
) -> Vec<rules::SegmentRule> {
    let (numbers, names): (Vec<usize>, Vec<Option<String>>) = profiles
        .iter()
        .map(|p| (p.segment.unwrap_or(0), p.label.clone()))
        .unzip();
    rules::rules(plan, prepared, table, &fit.labels, &numbers, &names)
}

/// The chosen k's silhouettes per segment, in number order.
fn chosen_silhouettes(judged: &mut judge::Judged, numbered: &number::Numbered) -> Vec<Vec<f64>> {
    let mut per = judged.silhouette_values.swap_remove(judged.at);
    numbered
        .order
        .iter()
        .map(|&s| std::mem::take(&mut per[s]))
        .collect()
}

/// What the data calls for saying: which steps used record weights, and
/// category values with odd spaces.
fn data_notes(plan: &Plan, prepared: &Prepared, table: &load::Table) -> Vec<String> {
    let categories: Vec<String> = plan.categories.iter().map(|c| c.column.clone()).collect();
    let spaces = load::odd_space_notes(table, &categories);
    weights_note(plan, prepared)
        .into_iter()
        .chain(spaces)
        .collect()
}

/// With record weights, which steps used them, in plain words.
fn weights_note(plan: &Plan, prepared: &Prepared) -> Option<String> {
    let column = plan.record_weights.as_ref()?;
    let total: f64 = prepared.weights.as_ref()?.iter().sum();
    let evidence = match (
        plan.evidence.gap.is_some(),
        plan.evidence.stability.is_some(),
    ) {
        (true, true) => ", the gap statistic and the bootstrap (records drawn by weight)",
        (true, false) => ", the gap statistic",
        (false, true) => ", the bootstrap (records drawn by weight)",
        (false, false) => "",
    };
    Some(format!(
        "each record stands for as many members as `{column}` says: {} records stand for {} weighted members; the weights were used in the fills and the scaling, the fit ({}), every criterion{evidence}, the size floor, the profiles, the rules and the tallies; not in assigning records to segments (a record goes to its nearest centre whatever its weight), in the drift check or in the projection chart",
        text::thousands(prepared.kept.len()),
        text::members(total),
        fit_words(&plan.method),
    ))
}

/// How the weights entered a method's fit.
fn fit_words(method: &MethodPlan) -> &'static str {
    match method {
        MethodPlan::KMeans(_) => "seeding by weight and weighted centres",
        MethodPlan::KMedoids(_) => "seeding by weight and the weighted total deviation",
        MethodPlan::KPrototypes(_) => "seeding by weight, weighted means and modes",
        MethodPlan::Tree(_) => {
            "the merge formulas of Ward, centroid and average linkage, each record counting as its weight (single and complete linkage do not depend on sizes)"
        }
    }
}

/// Refuses a run with fewer records than segments (or micro-segments),
/// and a tree over more records than its linkage can take: the checker
/// refuses both from the counted records, and the run holds the line for
/// a file that grew in between.
fn enough_records(plan: &Plan, n: usize) -> Result<(), RunError> {
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
        let limit = crate::plan::TreeLimit::of(*linkage);
        if n > limit.records {
            return Err(RunError::TreeTooLarge {
                n,
                why: limit.reason(n, linkage.name()),
            });
        }
    }
    Ok(())
}
