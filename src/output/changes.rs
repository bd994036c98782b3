//! "What changed" since the previous run (`previous` in the recipe): each
//! segment by number and name, its size and share then and now, its means
//! then and now, new and gone segments, and how the segments were matched.
//! One view, rendered for the terminal, the JSON result and the report.

use super::short;
use crate::run::Outcome;
use crate::text::thousands;
use serde::Serialize;
use std::fmt::Write;

/// One segment's change.
#[derive(Debug, Clone, Serialize)]
pub struct Change {
    pub number: usize,
    pub label: Option<String>,
    /// `kept`, `new` or `gone`.
    pub status: &'static str,
    pub size_then: Option<usize>,
    pub share_then: Option<f64>,
    pub size_now: Option<usize>,
    pub share_now: Option<f64>,
    /// Why the match is weak, when it is.
    pub weak: Option<String>,
    /// Feature means in original units, in the order of `Changes::features`
    /// (then: only from models of format 2 on).
    pub means_then: Option<Vec<f64>>,
    pub means_now: Option<Vec<f64>>,
}

/// Every segment's change, in number order.
#[derive(Debug, Clone, Serialize)]
pub struct Changes {
    pub model: String,
    pub basis: &'static str,
    pub records_then: usize,
    pub records_now: usize,
    pub features: Vec<String>,
    pub segments: Vec<Change>,
    /// The matching's total cost (squared centre distances, or members
    /// shared by matched pairs).
    pub cost: f64,
    /// This run's data against last run's training data (models of format
    /// 2 on).
    pub drift: Option<crate::run::model::Drift>,
    /// Last run's model was made from this very data: nothing changed, and
    /// the comparison says nothing about the quarter.
    pub same_data: bool,
    /// The recipe's period, when it is still last run's on other data:
    /// the report would date this quarter as the last.
    pub period_unchanged: Option<String>,
    /// The periods last run's recipe and this run's recipe gave, when
    /// they gave one: "then" and "now" in people's words.
    pub period_then: Option<String>,
    pub period_now: Option<String>,
}

/// What the terminal and the report say when `previous` names a model made
/// from this run's own data.
pub const SAME_DATA: &str = "last run's model was made from this same data (the file's digest is the one the model records), so this compares the data with itself and every change is zero. For next quarter's comparison, copy last run's model and assignments aside before running on the new data, and point `previous` at the copies (docs/language.md, `previous`)";

/// Last run's segment `number`'s means, in this run's feature order.
fn means_then(
    then: &crate::run::previous::Then,
    features: &[String],
    number: usize,
) -> Option<Vec<f64>> {
    let seg = then.segments.iter().find(|s| s.number == number)?;
    let means = seg.means.as_ref()?;
    features
        .iter()
        .map(|f| {
            let at = then.features.iter().position(|t| t == f)?;
            means.get(at).copied()
        })
        .collect()
}

/// Last run's period, when this run's recipe still gives it on other data.
fn period_unchanged(o: &Outcome, then: &crate::run::previous::Then) -> Option<String> {
    let period = then.period.as_ref()?;
    (!then.same_data && o.plan.period.as_ref() == Some(period)).then(|| period.clone())
}

impl Changes {
    /// The view, when the run had a previous model.
    pub fn of(o: &Outcome) -> Option<Changes> {
        let (m, then) = (o.matching.as_ref()?, o.then.as_ref()?);
        let features: Vec<String> = o
            .prepared
            .features
            .iter()
            .map(|f| f.column.clone())
            .collect();
        let means_then = |number: usize| means_then(then, &features, number);
        let mut segments: Vec<Change> = o
            .profiles
            .iter()
            .filter_map(|p| {
                let number = p.segment?;
                let pair = m.pairs.iter().find(|x| x.number == number)?;
                let before = pair
                    .previous
                    .and_then(|n| then.segments.iter().find(|s| s.number == n));
                Some(Change {
                    number,
                    label: p.label.clone(),
                    status: if pair.previous.is_some() {
                        "kept"
                    } else {
                        "new"
                    },
                    size_then: before.map(|b| b.size),
                    share_then: before.map(|b| b.share),
                    size_now: Some(p.size),
                    share_now: Some(p.share),
                    weak: pair.why_weak.clone(),
                    means_then: pair.previous.and_then(means_then),
                    means_now: Some(p.features.iter().map(|f| f.mean).collect()),
                })
            })
            .collect();
        for g in &m.gone {
            segments.push(Change {
                number: g.number,
                label: g.label.clone(),
                status: "gone",
                size_then: Some(g.size),
                share_then: then
                    .segments
                    .iter()
                    .find(|s| s.number == g.number)
                    .map(|s| s.share),
                size_now: None,
                share_now: None,
                weak: None,
                means_then: means_then(g.number),
                means_now: None,
            });
        }
        segments.sort_by_key(|c| c.number);
        Some(Changes {
            model: m.model.clone(),
            basis: m.basis,
            records_then: then.records,
            records_now: o.prepared.kept.len(),
            features,
            segments,
            cost: m.cost,
            drift: o.drift.clone(),
            same_data: then.same_data,
            period_unchanged: period_unchanged(o, then),
            period_then: then.period.clone(),
            period_now: o.plan.period.clone(),
        })
    }

    /// What the analyst must hear before reading the comparison: it
    /// compares the data with itself, or the period was not changed.
    pub fn warnings(&self) -> Vec<String> {
        let mut out = Vec::new();
        if self.same_data {
            out.push(SAME_DATA.to_string());
        }
        if let Some(period) = &self.period_unchanged {
            out.push(format!(
                "the recipe's period is still \"{period}\", as last run's; change `period` in the `recipe` statement so the report dates this data"
            ));
        }
        out
    }

    /// The segment that grew most in share, and by how many points.
    pub fn grew_most(&self) -> Option<(&Change, f64)> {
        self.segments
            .iter()
            .filter_map(|c| {
                let grew = c.share_now? - c.share_then.unwrap_or(0.0);
                Some((c, grew))
            })
            .filter(|(_, g)| *g > 0.0)
            .max_by(|a, b| a.1.total_cmp(&b.1).then(b.0.number.cmp(&a.0.number)))
    }
}

impl Change {
    /// The change in members and in share for a segment both runs have:
    /// `+52 members, +0.9 points`.
    pub fn size_words(&self, noun: &str) -> Option<String> {
        let (then, now) = (self.size_then?, self.size_now?);
        let points = 100.0 * (self.share_now? - self.share_then?);
        let diff = now as i64 - then as i64;
        let count = super::people::decimals(diff.unsigned_abs() as f64, 0);
        let sign = match diff {
            d if d > 0 => "+",
            d if d < 0 => "-",
            _ => "",
        };
        Some(format!(
            "{sign}{count} {noun}, {} points of the share",
            super::people::signed(points, 1)
        ))
    }
}

/// A segment's name for text: `2 "bulk planners"`, or `2`.
pub fn named(number: usize, label: Option<&str>) -> String {
    match label {
        Some(l) if !l.is_empty() => format!("{number} \"{l}\""),
        _ => number.to_string(),
    }
}

fn size_share(size: Option<usize>, share: Option<f64>) -> String {
    match (size, share) {
        (Some(n), Some(s)) => format!("{:>9} {:>7}", thousands(n), super::people::share(s)),
        _ => format!("{:>17}", "-"),
    }
}

/// The terminal section; names and values as `call` gives them.
pub fn terminal(c: &Changes, plan: &crate::plan::Plan) -> String {
    let mut s = String::new();
    let periods = match (&c.period_then, &c.period_now) {
        (Some(a), Some(b)) => format!("then {a}, now {b}; "),
        _ => String::new(),
    };
    let _ = writeln!(
        s,
        "what changed since `{}` ({periods}{} records then, {} now; segments matched on their {})",
        c.model,
        thousands(c.records_then),
        thousands(c.records_now),
        c.basis
    );
    for w in c.warnings() {
        let _ = writeln!(s, "  warning: {w}");
    }
    s.push_str(&matched_line(c));
    let _ = writeln!(
        s,
        "  {:<32} {:>17} {:>17}  change",
        "segment", "then", "now"
    );
    for ch in &c.segments {
        let name = named(ch.number, ch.label.as_deref());
        let change = match ch.status {
            "new" => "new".to_string(),
            "gone" => "gone".to_string(),
            _ => {
                let pts = 100.0 * (ch.share_now.unwrap_or(0.0) - ch.share_then.unwrap_or(0.0));
                let size = ch.size_now.unwrap_or(0) as i64 - ch.size_then.unwrap_or(0) as i64;
                format!("{size:+} ({} points)", super::people::signed(pts, 1))
            }
        };
        let _ = writeln!(
            s,
            "  {:<32} {} {}  {change}",
            super::tables::clip(&name, 32),
            size_share(ch.size_then, ch.share_then),
            size_share(ch.size_now, ch.share_now),
        );
    }
    if let Some((g, pts)) = c.grew_most() {
        let _ = writeln!(
            s,
            "  segment {} grew most: {} points of the records",
            named(g.number, g.label.as_deref()),
            super::people::signed(100.0 * pts, 1)
        );
    }
    for ch in c.segments.iter().filter(|ch| ch.weak.is_some()) {
        let _ = writeln!(
            s,
            "  warning: segment {} is a weak match: {}; check its profile before reusing its name",
            named(ch.number, ch.label.as_deref()),
            ch.weak.as_deref().unwrap_or("")
        );
    }
    s.push_str(&means_lines(c, plan));
    if let Some(d) = &c.drift {
        s.push_str(&drift_lines(d));
    }
    if c.segments
        .iter()
        .any(|ch| ch.status == "kept" && ch.means_then.is_none())
    {
        let _ = writeln!(
            s,
            "    (the previous model predates means in models; rerun last quarter's recipe to see them)"
        );
    }
    s
}

/// How many segments were matched, and the matching's cost in words.
fn matched_line(c: &Changes) -> String {
    let matched = c.segments.iter().filter(|ch| ch.status == "kept").count();
    let cost = if c.basis == "centres" {
        format!(
            "summed squared distance between matched centres {}",
            short(c.cost)
        )
    } else {
        format!(
            "{} members shared by matched segments",
            thousands(c.cost as usize)
        )
    };
    format!("  {matched} matched one to one (Hungarian method); {cost}\n")
}

/// Each segment's means then and now, one line per segment both runs have.
fn means_lines(c: &Changes, plan: &crate::plan::Plan) -> String {
    let mut s = String::from("  means, then -> now:\n");
    for ch in &c.segments {
        let (Some(then), Some(now)) = (&ch.means_then, &ch.means_now) else {
            continue;
        };
        let shown = |f: &str, v: f64| super::people::compact(plan, f, v, 12);
        let parts: Vec<String> = c
            .features
            .iter()
            .zip(then.iter().zip(now))
            .map(|(f, (a, b))| {
                format!(
                    "{} {} -> {}",
                    super::people::name(plan, f),
                    shown(f, *a),
                    shown(f, *b)
                )
            })
            .collect();
        let _ = writeln!(
            s,
            "    {}: {}",
            named(ch.number, ch.label.as_deref()),
            parts.join(", ")
        );
    }
    s
}

/// Lines on how far new data is from the training data: each feature's
/// population stability index, the far share, and any warning.
pub fn drift_lines(d: &crate::run::model::Drift) -> String {
    let mut s = String::new();
    let parts: Vec<String> = d
        .features
        .iter()
        .map(|f| format!("{} {:.3} ({})", f.column, f.psi, f.reading))
        .collect();
    let _ = writeln!(
        s,
        "  data against the training data: population stability index {}",
        parts.join(", ")
    );
    let without = if d.expected.is_empty() {
        String::new()
    } else {
        format!(
            ", measured without {} (expected to differ for these records)",
            d.expected.join(", ")
        )
    };
    let _ = writeln!(
        s,
        "  {:.1} % of records are farther from every centre than 99 % of the training records were (about 1 % expected){without}",
        100.0 * d.far_share
    );
    for w in &d.warnings {
        let _ = writeln!(s, "  warning: {w}");
    }
    s
}
