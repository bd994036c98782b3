//! The judge stage: every candidate k measured (within-cluster sum of
//! squares, silhouette, Calinski-Harabasz, Davies-Bouldin), the evidence
//! that reclusters (gap statistic, bootstrap stability) when asked for,
//! then the choice of k by the recipe's rule, with the disagreement of
//! the criteria and advice on restarts in words.

use super::fit::{build_tree, Candidate};
use super::measure::{Decoded, Layout, Measure};
use super::{error::RunError, go_on, Step, SweepRow, RESTART_ADVICE_SHARE, SILHOUETTE_STREAM};
use crate::engine::matrix::Condensed;
use crate::engine::{criteria, evidence, kmeans, silhouette, weights::Weights};
use crate::plan::{ChooseK, Criterion, MethodPlan, Plan, SilhouetteMode, SizeFloor, TreePlan};
use crate::text::thousands;
use ndarray::ArrayView2;
use rayon::prelude::*;

/// What the judge stage found.
pub(super) struct Judged {
    pub sweep: Vec<SweepRow>,
    /// Per candidate, each segment's mean silhouette.
    pub per_segment_silhouette: Vec<Vec<f64>>,
    /// Per candidate, each segment's silhouettes, highest first.
    pub silhouette_values: Vec<Vec<Vec<f64>>>,
    /// Per candidate, bootstrap stability, when asked for.
    pub stability: Option<Vec<evidence::Stability>>,
    pub chosen: usize,
    /// The chosen candidate's place in the sweep.
    pub at: usize,
    pub reason: String,
    pub disagreement: Option<String>,
    pub advice: Vec<String>,
    /// The gap statistic's one-standard-error rule answered k = 1.
    pub no_structure: bool,
}

/// Measures every candidate, gathers the evidence asked for and chooses k.
/// `own`: the method's own measure, for methods judged on it.
pub(super) fn judge(
    plan: &Plan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    candidates: &[Candidate],
    own: Option<&Own<'_>>,
    progress: &dyn Fn(Step),
) -> Result<Judged, RunError> {
    let measured = measure_each_k(plan, (x, w), candidates, own, progress)?;
    let mut sweep = measured.sweep;
    let (gaps, stability) = gather_evidence(plan, (x, w), candidates, &mut sweep, progress);
    go_on("while gathering the evidence for k")?;
    // With record weights the floor counts the members segments stand for.
    // Candidates that label a sample count every record.
    let records = (candidates.first().and_then(|c| c.sizes.as_ref()))
        .map_or(x.nrows(), |s| s.iter().sum::<u64>() as usize);
    let size = Sizes::of(w, records);
    let floor = plan.floor.map(|f| (f, f.records(size.n)));
    if let Some((_, least)) = floor {
        sweep
            .iter_mut()
            .for_each(|r| r.below_floor = Sizes::smallest(r) < least as f64);
    }
    // The criteria choose among the k the floor leaves.
    let eligible: Vec<SweepRow> = sweep.iter().filter(|r| !r.below_floor).cloned().collect();
    let eligible_gaps: Option<Vec<evidence::Gap>> = gaps.as_ref().map(|g| {
        g.iter()
            // The gap statistic also measures k = 1, which has no row.
            .filter(|g| !sweep.iter().any(|r| r.k == g.k && r.below_floor))
            .cloned()
            .collect()
    });
    if let Some((f, _)) = floor {
        if eligible.is_empty() {
            return Err(below_floor(f, size, &sweep, plan));
        }
    }
    let picks = Picks::new(&eligible, eligible_gaps.as_deref());
    let (chosen, mut reason) = choose(plan, &eligible, &picks);
    if let Some((f, _)) = floor {
        if let Some(row) = sweep.iter().find(|r| r.k == chosen && r.below_floor) {
            // A k the recipe fixed, or the one a tree's height leaves.
            return Err(below_floor(f, size, std::slice::from_ref(row), plan));
        }
        reason.push_str(&floor_words(f, size, &sweep, gaps.as_deref(), plan));
    }
    Ok(Judged {
        disagreement: disagreement(&picks, chosen),
        advice: advice(&sweep, &plan.method),
        at: candidates.iter().position(|c| c.k == chosen).unwrap_or(0),
        no_structure: picks.gap == Some(1) && plan.choose != ChooseK::By(Criterion::Gap),
        sweep,
        per_segment_silhouette: measured.per_segment_silhouette,
        silhouette_values: measured.silhouette_values,
        stability,
        chosen,
        reason,
    })
}

/// Records in a candidate's smallest segment: over every record when it
/// labels only a sample.
fn smallest_of(c: &Candidate) -> usize {
    match &c.sizes {
        Some(sizes) => sizes.iter().min().map_or(0, |&s| s as usize),
        None => smallest_segment(&c.labels, c.k),
    }
}

/// Records in the smallest of `k` segments.
fn smallest_segment(labels: &[u32], k: usize) -> usize {
    let mut sizes = vec![0usize; k];
    labels.iter().for_each(|&l| sizes[l as usize] += 1);
    sizes.into_iter().min().unwrap_or(0)
}

/// With record weights, the members the smallest of `k` segments stands
/// for (its summed weight).
fn smallest_weighted(labels: &[u32], w: Weights<'_>, k: usize) -> Option<f64> {
    w.is_weighted()
        .then(|| (w.per_segment(labels, k).into_iter()).fold(f64::INFINITY, f64::min))
}

/// The stop when no k fitted keeps every segment at or above the floor.
fn below_floor(floor: SizeFloor, size: Sizes, rows: &[SweepRow], plan: &Plan) -> RunError {
    // Methods that take the same columns.
    let others = match &plan.method {
        MethodPlan::Tree(t) if t.distance == crate::plan::Distance::Gower => {
            "k-medoids or k-prototypes, which take the same columns"
        }
        MethodPlan::KMedoids(_) => "k-prototypes",
        MethodPlan::KPrototypes(_) => "k-medoids",
        MethodPlan::KMeans(_) => {
            "k-medoids, whose centres are members, or a tree with Ward linkage"
        }
        MethodPlan::Tree(_) => "k-means, or a tree with Ward linkage",
    };
    let smallest: Vec<String> = rows
        .iter()
        .map(|r| format!("k = {} has a segment of {}", r.k, Sizes::shown(r)))
        .collect();
    let most = rows.iter().map(Sizes::smallest).fold(0.0, f64::max);
    RunError::BelowFloor {
        floor: floor.words(size.n, size.noun),
        smallest: smallest.join(", "),
        help: format!(
            "lower the floor to {} or less, fit smaller k, or try a method less drawn to outlying records ({others}); a floor no k meets says the data holds small groups or outliers worth a look of their own",
            thousands(most.floor() as u64)
        ),
    }
}

/// What a size floor counts: records, or with record weights the members
/// they stand for (the summed weight).
#[derive(Clone, Copy)]
struct Sizes {
    /// Records, or the summed weight rounded to the nearest whole member.
    n: usize,
    noun: &'static str,
}

impl Sizes {
    fn of(w: Weights<'_>, n: usize) -> Sizes {
        if w.is_weighted() {
            Sizes {
                n: w.total(n).round() as usize,
                noun: "weighted members",
            }
        } else {
            Sizes { n, noun: "records" }
        }
    }

    /// A row's smallest segment in what the floor counts.
    fn smallest(r: &SweepRow) -> f64 {
        r.smallest_weighted.unwrap_or(r.smallest as f64)
    }

    /// A row's smallest segment in words.
    fn shown(r: &SweepRow) -> String {
        match r.smallest_weighted {
            Some(w) => crate::text::members(w),
            None => thousands(r.smallest),
        }
    }
}

/// The sentence the choice gains from a floor: the k it set aside, and
/// the k the criterion would have chosen without it.
fn floor_words(
    floor: SizeFloor,
    size: Sizes,
    sweep: &[SweepRow],
    gaps: Option<&[evidence::Gap]>,
    plan: &Plan,
) -> String {
    let below: Vec<String> = sweep
        .iter()
        .filter(|r| r.below_floor)
        .map(|r| format!("k = {} ({})", r.k, Sizes::shown(r)))
        .collect();
    if below.is_empty() {
        return format!(
            "; every k keeps its segments at or above the floor of {}",
            floor.words(size.n, size.noun)
        );
    }
    let unfloored = choose(plan, sweep, &Picks::new(sweep, gaps)).0;
    let passed_over = if sweep.iter().any(|r| r.k == unfloored && r.below_floor) {
        format!("; without the floor k = {unfloored} would have been chosen")
    } else {
        String::new()
    };
    format!(
        "; set aside for a segment below the floor of {}: {} (smallest segment in brackets){passed_over}",
        floor.words(size.n, size.noun),
        below.join(", ")
    )
}

/// The sweep's rows before the reclustering evidence.
struct Measured {
    sweep: Vec<SweepRow>,
    per_segment_silhouette: Vec<Vec<f64>>,
    silhouette_values: Vec<Vec<Vec<f64>>>,
}

/// Each candidate's criteria, one row of the sweep per k.
fn measure_each_k(
    plan: &Plan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    candidates: &[Candidate],
    own: Option<&Own<'_>>,
    progress: &dyn Fn(Step),
) -> Result<Measured, RunError> {
    let mut out = Measured {
        sweep: Vec::with_capacity(candidates.len()),
        per_segment_silhouette: Vec::with_capacity(candidates.len()),
        silhouette_values: Vec::with_capacity(candidates.len()),
    };
    // The mean of every record, the same for every k.
    let mut grand: Option<Vec<f64>> = None;
    for (i, c) in candidates.iter().enumerate() {
        progress(Step {
            what: "judging each k",
            done: i,
            total: candidates.len(),
        });
        go_on("while judging each k")?;
        if let Some(own) = own {
            let (row, sil) = own.judge(plan, c, w);
            out.sweep.push(row);
            out.per_segment_silhouette.push(sil.per_segment);
            out.silhouette_values.push(sil.values);
            continue;
        }
        let k = c.k;
        let exact = plan.evidence.silhouette == SilhouetteMode::Exact;
        let draw = (plan.seed, SILHOUETTE_STREAM | k as u64);
        let sil = silhouette::silhouette_weighted(x, w, &c.labels, k, draw, exact);
        let grand = grand.get_or_insert_with(|| criteria::grand_mean_weighted(x, w));
        let judged = criteria::judged_weighted(x, w, &c.labels, k, grand);
        out.sweep.push(SweepRow {
            k,
            within_ss: judged.within_ss,
            silhouette: sil.mean,
            silhouette_evaluated: sil.evaluated,
            silhouette_se: sil.std_error,
            calinski_harabasz: judged.calinski_harabasz,
            davies_bouldin: judged.davies_bouldin,
            restarts: c.restarts.clone(),
            gap: None,
            stability: None,
            smallest: smallest_of(c),
            smallest_weighted: smallest_weighted(&c.labels, w, k),
            below_floor: false,
        });
        out.per_segment_silhouette.push(sil.per_segment);
        out.silhouette_values.push(sil.values);
    }
    Ok(out)
}

/// A method's own measure, for judging its candidates on it: the
/// prepared records decoded, the matrix of every pair when the method
/// holds one, and the centre of all records as one segment (the overall
/// medoid, or the overall means and modes).
pub(super) struct Own<'a> {
    pub measure: &'a Measure,
    pub layout: Layout,
    pub x: Decoded<'a>,
    pub matrix: Option<&'a Condensed>,
    pub overall: ndarray::Array2<f64>,
}

impl Own<'_> {
    /// One row of the sweep on the method's own measure: the objective
    /// (total deviation or cost) in place of the within-cluster sum of
    /// squares, Calinski-Harabasz on that objective, Davies-Bouldin with
    /// the segments' centres (medoids, prototypes) and the measure's
    /// distance, and the silhouette over that distance.
    fn judge(
        &self,
        plan: &Plan,
        c: &Candidate,
        w: Weights<'_>,
    ) -> (SweepRow, silhouette::Silhouette) {
        let k = c.k;
        let n = self.x.len();
        let centres = Decoded::new(c.centres.view(), &self.layout);
        let overall = Decoded::new(self.overall.view(), &self.layout);
        let m = self.measure;
        let costs: Vec<(f64, f64, f64)> = (0..n)
            .into_par_iter()
            .map(|i| {
                let own = c.labels[i] as usize;
                (
                    m.cost(&self.x, i, &centres, own),
                    m.distance(&self.x, i, &centres, own),
                    m.cost(&self.x, i, &overall, 0),
                )
            })
            .collect();
        let within: f64 = (costs.iter().enumerate()).map(|(i, c)| w.at(i) * c.0).sum();
        let total: f64 = (costs.iter().enumerate()).map(|(i, c)| w.at(i) * c.2).sum();
        let mut scatter = vec![0.0; k];
        let sizes = w.per_segment(&c.labels, k);
        for (i, (&l, cost)) in c.labels.iter().zip(&costs).enumerate() {
            scatter[l as usize] += w.at(i) * cost.1;
        }
        for (s, &size) in scatter.iter_mut().zip(&sizes) {
            *s /= if size > 0.0 { size } else { 1.0 };
        }
        let draw = (plan.seed, SILHOUETTE_STREAM | k as u64);
        let exact = plan.evidence.silhouette == SilhouetteMode::Exact;
        let sil = match self.matrix {
            Some(mx) => silhouette::silhouette_by_weighted(
                &|i, j| mx.get(i, j),
                w,
                &c.labels,
                k,
                draw,
                exact,
            ),
            None => silhouette::silhouette_by_weighted(
                &|i, j| m.distance(&self.x, i, &self.x, j),
                w,
                &c.labels,
                k,
                draw,
                exact,
            ),
        };
        let row = SweepRow {
            k,
            within_ss: within,
            silhouette: sil.mean,
            silhouette_evaluated: sil.evaluated,
            silhouette_se: sil.std_error,
            calinski_harabasz: criteria::calinski_harabasz_from(total, within, w.total(n), k),
            davies_bouldin: criteria::davies_bouldin_from(&scatter, |s, t| {
                m.distance(&centres, s, &centres, t)
            }),
            restarts: c.restarts.clone(),
            gap: None,
            stability: None,
            smallest: smallest_of(c),
            smallest_weighted: smallest_weighted(&c.labels, w, k),
            below_floor: false,
        };
        (row, sil)
    }
}

/// Evidence that reclusters (reference sets for the gap statistic,
/// resamples for stability), written into the sweep's rows.
fn gather_evidence(
    plan: &Plan,
    (x, w): (ArrayView2<'_, f64>, Weights<'_>),
    candidates: &[Candidate],
    sweep: &mut [SweepRow],
    progress: &dyn Fn(Step),
) -> (Option<Vec<evidence::Gap>>, Option<Vec<evidence::Stability>>) {
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
        .map(|b| evidence::gap_statistic((x, w), &ks, b, plan.seed, &*recluster));
    if let Some(g) = &gaps {
        for row in sweep.iter_mut() {
            row.gap = g.iter().find(|x| x.k == row.k).map(|x| (x.gap, x.se));
        }
    }
    let stability = plan.evidence.stability.map(|b| {
        let labels: Vec<Vec<u32>> = candidates.iter().map(|c| c.labels.clone()).collect();
        evidence::bootstrap_stability((x, w), &ks, &labels, b, plan.seed, &*recluster)
    });
    if let Some(st) = &stability {
        for (row, s) in sweep.iter_mut().zip(st) {
            row.stability = Some(s.mean_ari);
        }
    }
    (gaps, stability)
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
pub(super) const NO_STRUCTURE: &str = "the gap statistic finds no cluster structure (its one-standard-error rule answers k = 1): the records look like one cloud, so read the segments as a partition of convenience, not as groups the data holds";

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
fn disagreement(picks: &Picks, chosen: usize) -> Option<String> {
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
    // The run profiles one k; say how to see the others' segments.
    let others: Vec<String> = ks
        .iter()
        .filter(|&&k| k != chosen)
        .map(|k| format!("`choose k {k}`"))
        .collect();
    let how = match others.split_last() {
        None => String::new(),
        Some((one, [])) => format!(", and {one} in the recipe profiles the other"),
        Some((last, rest)) => format!(
            ", and {} or {last} in the recipe profiles another",
            rest.join(", ")
        ),
    };
    Some(format!(
        "the criteria disagree: {}; compare the segments of each before settling: this run profiles k = {chosen}{how}",
        parts.join("; ")
    ))
}

/// How evidence reclusters a reference set or a resample: the recipe's
/// method at every k, k-means with at most the plan's evidence restarts.
fn reclusterer(plan: &Plan) -> Box<evidence::Recluster<'static>> {
    let method = plan.method.clone();
    let restarts_cap = plan.evidence.restarts;
    Box::new(
        move |data: ArrayView2<'_, f64>,
              w: Weights<'_>,
              ks: &[usize],
              seed: u64|
              -> Vec<Vec<u32>> {
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
                        kmeans::kmeans_weighted(data, w, &settings)
                            .map(|f| f.labels)
                            .unwrap_or_else(|_| fallback())
                    })
                    .collect(),
                MethodPlan::Tree(t) => match build_tree(t, (data, w), seed) {
                    Ok(built) => ks.iter().map(|&k| built.cut(k)).collect(),
                    Err(_) => ks.iter().map(|_| fallback()).collect(),
                },
                // The checker refuses reclustering evidence for methods
                // with their own measure.
                MethodPlan::KMedoids(_) | MethodPlan::KPrototypes(_) => {
                    ks.iter().map(|_| fallback()).collect()
                }
            }
        },
    )
}

fn advice(sweep: &[SweepRow], method: &MethodPlan) -> Vec<String> {
    let rare: Vec<(usize, &super::Restarts)> = sweep
        .iter()
        .filter_map(|r| r.restarts.as_ref().map(|x| (r.k, x)))
        .filter(|(_, x)| {
            x.of > 1 && ((x.at_best as f64) < RESTART_ADVICE_SHARE * x.of as f64 || x.at_best == 1)
        })
        .collect();
    let which = match rare.as_slice() {
        [] => return Vec::new(),
        [(k, x)] => format!("for k = {k} only {} of {} restarts", x.at_best, x.of),
        _ => {
            let each: Vec<String> = rare
                .iter()
                .map(|(k, x)| format!("k = {k} ({} of {})", x.at_best, x.of))
                .collect();
            format!("for {} few restarts", crate::text::and_list(&each))
        }
    };
    // One sentence for every such k: the reason is the same for each.
    vec![format!(
        "{which} reached the best partition; {} finds local optima, so more restarts are advisable, and a k whose best is rarely reached is often one the data does not support",
        match method {
            MethodPlan::KMedoids(_) => "k-medoids",
            MethodPlan::KPrototypes(_) => "k-prototypes",
            _ => "k-means",
        }
    )]
}
