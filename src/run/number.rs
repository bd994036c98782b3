//! The numbering stage (matching last run): the chosen segmentation's
//! segments get their numbers and names. Without a previous run, numbers
//! follow size (1 the largest); with one, a segment matched to last run's
//! keeps that segment's number and, unless the recipe names it, its name.

use super::fit::Candidate;
use super::measure::{Decoded, Layout, Measure};
use super::prepare::Prepared;
use super::{load, previous, Assignment, Assignments};
use crate::engine::kmeans;
use crate::plan::Plan;

/// The chosen segmentation, numbered and named.
pub(super) struct Numbered {
    /// The chosen candidate with segment `i` the one numbered `numbers[i]`.
    pub fit: Candidate,
    /// `order[i]`: the size-ordered segment that comes i-th by number.
    pub order: Vec<usize>,
    /// Each segment's number, in `fit`'s order.
    pub numbers: Vec<usize>,
    /// With a previous run: how the segments were matched with its.
    pub matching: Option<previous::Matching>,
    /// Each segment's name, in `fit`'s order.
    labels: Vec<Option<String>>,
}

impl Numbered {
    /// The name of the segment numbered `number`, if it has one.
    pub fn label(&self, number: usize) -> Option<String> {
        let s = self.numbers.iter().position(|&n| n == number)?;
        self.labels[s].clone()
    }

    /// The name of segment `s` (0-based, in `fit`'s order).
    pub fn label_at(&self, s: usize) -> Option<String> {
        self.labels.get(s).cloned().flatten()
    }
}

/// Numbers and names the chosen candidate's segments.
pub(super) fn number(
    plan: &Plan,
    chosen: &Candidate,
    last: Option<&previous::PreviousRun>,
    prepared: &Prepared,
    table: &load::Table,
) -> Numbered {
    let matching = last.map(|prev| {
        previous::match_segments(
            prev,
            &chosen.labels,
            chosen.centres.view(),
            prepared.kept.iter().map(|&r| table.keys.get(r)),
        )
    });
    let (order, numbers) = match &matching {
        Some(m) => m.order(),
        None => (by_members(prepared, chosen), (1..=chosen.k).collect()),
    };
    let labels = numbers
        .iter()
        .map(|&number| {
            plan.labels.get(&number).cloned().or_else(|| {
                let prev = last?;
                let matched = matching
                    .as_ref()?
                    .pairs
                    .iter()
                    .any(|p| p.previous == Some(number));
                matched.then(|| prev.label_of(number)).flatten()
            })
        })
        .collect();
    Numbered {
        fit: chosen.renumbered(&order),
        order,
        numbers,
        matching,
        labels,
    }
}

/// The segments in number order without a previous run: as the engine
/// numbered them (by records), or with record weights by the members they
/// stand for, most first (ties keep the engine's order).
fn by_members(prepared: &Prepared, chosen: &Candidate) -> Vec<usize> {
    let mut order: Vec<usize> = (0..chosen.k).collect();
    let w = prepared.weights();
    if w.is_weighted() {
        let members = w.per_segment(&chosen.labels, chosen.k);
        order.sort_by(|&a, &b| members[b].total_cmp(&members[a]));
    }
    order
}

/// Every kept record's segment number, its distance to the segment's
/// centre and how much nearer that centre is than the next.
pub(super) fn place(
    prepared: &Prepared,
    table: &load::Table,
    numbered: &Numbered,
    measure: &Measure,
) -> Assignments {
    let fit = &numbered.fit;
    let x = prepared.matrix.view();
    let measured = match measure {
        Measure::Euclidean => kmeans::distance_and_margin(x, fit.centres.view(), &fit.labels),
        own => {
            let layout = Layout::of(prepared);
            own.distance_and_margin(
                &Decoded::of_prepared(prepared),
                &Decoded::new(fit.centres.view(), &layout),
                &fit.labels,
            )
        }
    };
    let mut assignments = Assignments::with_capacity(prepared.kept.len());
    for ((&r, &seg), &(distance, margin)) in prepared.kept.iter().zip(&fit.labels).zip(&measured) {
        assignments.push(Assignment {
            key: table.keys.get(r),
            segment: numbered.numbers[seg as usize],
            distance,
            margin,
        });
    }
    assignments
}
