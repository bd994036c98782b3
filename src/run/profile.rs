//! The profile stage: every segment's size and share, each feature's mean,
//! median and quartiles in original units with its standardised difference
//! in the clustered space, category shares, centre, silhouette and
//! stability; and the notes the evidence calls for (a sampled fit, no
//! structure, unstable segments).

use super::fit::Fitted;
use super::judge::{Judged, NO_STRUCTURE};
use super::number::Numbered;
use super::prepare::{self, Prepared};
use super::{load, FeatureSummary, Profile};
use crate::engine::{self, evidence, kmeans};
use rayon::prelude::*;

/// Every segment's profile, in number order, and the profile of all
/// records.
/// `exact`: the means are exact sums ([`crate::engine::exact::Sum`], for
/// `sample ... by key`), so that they do not depend on the records' order
/// and a run in passes gives them to the bit.
pub(super) fn profiles(
    prepared: &Prepared,
    table: &load::Table,
    numbered: &Numbered,
    judged: &Judged,
    exact: bool,
) -> (Vec<Profile>, Profile) {
    let (fit, at) = (&numbered.fit, judged.at);
    let means = FeatureMeans::new(prepared, table, &fit.labels, fit.k, exact);
    let overall = profile(prepared, means.overall(), None, None, None);
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); fit.k];
    for (i, &l) in fit.labels.iter().enumerate() {
        members[l as usize].push(i);
    }
    let profiles = (0..fit.k)
        .map(|s| {
            let centre: Vec<f64> = prepared
                .features
                .iter()
                .enumerate()
                .map(|(f, p)| p.to_original(fit.centres[[s, f]]))
                .collect();
            let from = numbered.order[s];
            let mut p = profile(
                prepared,
                means.segment(s),
                Some(&members[s]),
                Some(centre),
                judged.per_segment_silhouette[at].get(from).copied(),
            );
            p.segment = Some(numbered.numbers[s]);
            p.label = numbered.label_at(s);
            p.medoid = fit
                .medoids
                .as_ref()
                .map(|m| table.keys.get(prepared.kept[m[s]]).to_string());
            p.stability = judged
                .stability
                .as_ref()
                .and_then(|st| st[at].jaccard.get(from).copied());
            p
        })
        .collect();
    (profiles, overall)
}

/// What the evidence says beyond the choice: restarts on a sample, no
/// cluster structure, unstable segments.
pub(super) fn notes(
    fitted: &Fitted,
    judged: &Judged,
    profiles: &[Profile],
    n: usize,
) -> Vec<String> {
    let candidates = &fitted.candidates;
    let mut notes = Vec::new();
    if fitted.apart > 0 {
        notes.push(format!(
            "{} pairs of records had no column with a value in both, so Gower's dissimilarity could not compare them; each such pair was taken as far apart as Gower allows (1)",
            crate::text::thousands(fitted.apart)
        ));
    }
    if let Some((s, by_key)) = candidates.iter().find_map(|c| {
        c.restarts
            .as_ref()
            .and_then(|r| r.sampled.map(|s| (s, r.by_key)))
    }) {
        let (seeded, drawn, refined) = match by_key {
            true => (
                "",
                " drawn by key",
                "with exact sums (`sample ... by key` in the recipe: the segments do not depend on the order of the records)",
            ),
            false => ("seeded ", "", "(`sample` in the recipe)"),
        };
        notes.push(format!(
            "k-means restarts ran on a {seeded}sample of {} of {} records{drawn}; for each k the best {} were refined on every record {refined}",
            crate::text::thousands(s),
            crate::text::thousands(n),
            kmeans::REFINED.min(candidates[0].restarts.as_ref().map_or(1, |r| r.of)),
        ));
    }
    if judged.no_structure {
        notes.push(NO_STRUCTURE.to_string());
    }
    for p in profiles {
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
    notes
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
    fn new(
        p: &Prepared,
        table: &load::Table,
        labels: &[u32],
        k: usize,
        exact: bool,
    ) -> FeatureMeans {
        let mut out = FeatureMeans {
            overall: Vec::new(),
            by_segment: vec![Vec::new(); k],
        };
        let w = p.weights.as_deref();
        let mut weights_of: Vec<Vec<f64>> = vec![Vec::new(); k];
        if let Some(w) = w {
            for (&l, &wi) in labels.iter().zip(w) {
                weights_of[l as usize].push(wi);
            }
        }
        let w_of = |s: usize| w.map(|_| weights_of[s].as_slice());
        // Features are independent: summarised in parallel, each into its
        // own slot.
        let per_feature: Vec<(FeatureSummary, Vec<FeatureSummary>)> = (p.features.par_iter())
            .enumerate()
            .map(|(f, fp)| {
                let values = prepare::original(table, &p.kept, f, fp.fill);
                let clustered = p.matrix.column(f).to_vec();
                let (centre, sd) = mean_and_sd(&clustered, w);
                let raw = &table.numeric[f];
                let mut gaps = vec![0usize; k];
                let mut groups: Vec<(Vec<f64>, Vec<f64>)> = vec![(Vec::new(), Vec::new()); k];
                for (((v, c), &l), &row) in values.iter().zip(&clustered).zip(labels).zip(&p.kept) {
                    groups[l as usize].0.push(*v);
                    groups[l as usize].1.push(*c);
                    gaps[l as usize] += usize::from(raw.get(row).is_none());
                }
                // Exact means take the bound of every value of the feature.
                let bound = crate::engine::exact::largest(&values);
                let exactly = |mut summary: FeatureSummary, vals: &[f64]| {
                    if let (true, Ok(Some(m))) = (exact, crate::engine::exact::mean(vals, bound)) {
                        summary.mean = m;
                    }
                    summary
                };
                let overall = exactly(summary(&values, w, 0.0, gaps.iter().sum()), &values);
                let segments = (groups.iter().enumerate())
                    .map(|(s, (vals, clus))| {
                        let mean = weighted_mean(clus, w_of(s)).unwrap_or(centre);
                        let diff = if sd > 0.0 { (mean - centre) / sd } else { 0.0 };
                        exactly(summary(vals, w_of(s), diff, gaps[s]), vals)
                    })
                    .collect();
                (overall, segments)
            })
            .collect();
        for (overall, segments) in per_feature {
            out.overall.push(overall);
            for (s, summary) in segments.into_iter().enumerate() {
                out.by_segment[s].push(summary);
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

/// The mean, weighted when the records carry weights.
fn weighted_mean(values: &[f64], w: Option<&[f64]>) -> Option<f64> {
    match w {
        Some(w) => engine::stats::mean_weighted(values, w),
        None => engine::stats::mean(values),
    }
}

/// The mean and population standard deviation, weighted when the records
/// carry weights (0 for no values).
fn mean_and_sd(values: &[f64], w: Option<&[f64]>) -> (f64, f64) {
    let sd = match w {
        Some(w) => engine::stats::sd_population_weighted(values, w),
        None => engine::stats::sd_population(values),
    };
    (weighted_mean(values, w).unwrap_or(0.0), sd.unwrap_or(0.0))
}

/// Mean, median and quartiles of some values (weighted when `w` holds
/// their weights), with a standardised difference measured elsewhere and
/// the count of filled gaps among them.
fn summary(values: &[f64], w: Option<&[f64]>, std_diff: f64, filled: usize) -> FeatureSummary {
    let [q1, median, q3] = prepare::quartiles(values, w).unwrap_or([0.0; 3]);
    FeatureSummary {
        mean: weighted_mean(values, w).unwrap_or(0.0),
        median,
        q1,
        q3,
        std_diff,
        filled,
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
    let w = p.weights();
    // Members counted by weight (records, without weights).
    let counted: f64 = members.iter().map(|&i| w.at(i)).sum();
    let categories = p
        .categories
        .iter()
        .zip(&p.codes)
        .map(|(cat, codes)| {
            let mut counts = vec![0.0f64; cat.levels.len()];
            members.iter().for_each(|&i| counts[codes[i]] += w.at(i));
            let of = if counted > 0.0 { counted } else { 1.0 };
            counts.iter().map(|&c| c / of).collect()
        })
        .collect();
    let everyone = if n == 0 { 1.0 } else { w.total(n) };
    Profile {
        segment: None,
        label: None,
        size,
        weighted: w.is_weighted().then_some(counted),
        share: counted / everyone,
        features,
        categories,
        centre,
        silhouette,
        stability: None,
        medoid: None,
    }
}
