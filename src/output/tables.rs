//! Terminal tables: the run summary, the k sweep and the segment profiles,
//! laid out to read at 100 columns.

use super::people;
use crate::plan::{MethodPlan, NumberFormat, Seeding};
use crate::run::{Outcome, Profile};
use crate::text::thousands;
use std::fmt::Write;

/// Segments shown side by side before the profile table wraps.
const SEGMENTS_PER_BLOCK: usize = 5;
const NAME_WIDTH: usize = 24;
const CELL: usize = 13;

/// The whole report: summary, sweep, profiles.
pub fn report(o: &Outcome) -> String {
    let mut s = String::new();
    summary(&mut s, o);
    s.push('\n');
    sweep(&mut s, o);
    s.push('\n');
    profiles(&mut s, o);
    typical_members(&mut s, o);
    rules(&mut s, o);
    if let Some(c) = super::changes::Changes::of(o) {
        s.push('\n');
        s.push_str(&super::changes::terminal(&c, &o.plan));
    }
    if let Some(c) = &o.comparison {
        s.push_str(&comparison(c));
        s.push('\n');
    }
    s
}

/// A comparison of two segmentations: who is in both, the adjusted Rand
/// index, and the migration table (old segments by new) with each old
/// segment's best match.
pub fn comparison(c: &crate::run::comparison::Comparison) -> String {
    let mut s = String::new();
    let m = &c.migration;
    let _ = writeln!(
        s,
        "comparison: `{}` (old) with `{}` (new)",
        c.old_name, c.new_name
    );
    let _ = writeln!(
        s,
        "  {} in both; {} only in the old; {} only in the new",
        thousands(c.both),
        thousands(c.only_old),
        thousands(c.only_new)
    );
    if let Some(note) = &c.key_note {
        let _ = writeln!(s, "  {note}");
    }
    let _ = writeln!(
        s,
        "  adjusted Rand index {:.4} (1: the same segments; about 0: no more alike than chance)",
        c.adjusted_rand_index
    );
    const W: usize = 8;
    let mut header = format!("  {:<12}", "old \\ new");
    for t in &m.to {
        let _ = write!(header, "{:>W$}", clip(t, W - 1));
    }
    let _ = write!(header, "{:>W$}  best match (Jaccard)", "total");
    let _ = writeln!(s, "{header}");
    for (i, f) in m.from.iter().enumerate() {
        let mut line = format!("  {:<12}", clip(f, 11));
        for j in 0..m.to.len() {
            let _ = write!(line, "{:>W$}", thousands(m.counts[i][j]));
        }
        let (j, jac) = c.best[i];
        let _ = write!(
            line,
            "{:>W$}  {} ({jac:.2})",
            thousands(m.row_total(i)),
            m.to.get(j).map(String::as_str).unwrap_or("-")
        );
        let _ = writeln!(s, "{line}");
    }
    let _ = writeln!(s, "  shares of each old segment:");
    for (i, f) in m.from.iter().enumerate() {
        let total = m.row_total(i).max(1) as f64;
        let mut line = format!("  {:<12}", clip(f, 11));
        for j in 0..m.to.len() {
            let _ = write!(
                line,
                "{:>W$}",
                format!("{:.0} %", 100.0 * m.counts[i][j] as f64 / total)
            );
        }
        let _ = writeln!(s, "{line}");
    }
    s
}

fn summary(s: &mut String, o: &Outcome) {
    let p = &o.prepared;
    let plan = &o.plan;
    let _ = writeln!(s, "recipe `{}`", plan.name);
    let mut line = format!(
        "  data      {}: {} records",
        plan.input.shown(),
        thousands(o.records)
    );
    if p.dropped > 0 {
        let _ = write!(
            line,
            ", {} dropped for missing values, {} segmented",
            thousands(p.dropped),
            thousands(p.kept.len())
        );
        let by: Vec<String> = p
            .dropped_by
            .iter()
            .filter(|(_, c)| *c > 0)
            .map(|(c, n)| format!("{c} {}", thousands(*n)))
            .collect();
        let _ = write!(line, " (missing in {})", by.join(", "));
    }
    let _ = writeln!(s, "{line}");
    if plan.input.keyless {
        wrapped(
            s,
            "  key       ",
            &format!("none in the file: {}", keyless_words(plan)),
        );
    }
    for f in p.features.iter().filter(|f| f.filled > 0) {
        let fill = people::value(plan, &f.column, f.fill.unwrap_or(f64::NAN));
        let _ = writeln!(
            s,
            "  missing   {}: {} filled with {fill}",
            f.column,
            thousands(f.filled)
        );
    }
    let constant: Vec<&str> = p
        .features
        .iter()
        .filter(|f| f.constant)
        .map(|f| f.column.as_str())
        .collect();
    if !constant.is_empty() {
        let text = format!(
            "constant after preparation, so no help in telling segments apart: {}",
            constant.join(", ")
        );
        wrapped(s, "  warning   ", &text);
    }
    let cats: Vec<String> = p
        .categories
        .iter()
        .map(|c| format!("{} ({} levels)", c.column, c.levels.len()))
        .collect();
    let coded: Vec<String> = plan
        .features
        .iter()
        .filter(|f| !f.kind.is_number())
        .map(|f| format!("{} ({})", f.column, f.kind.words()))
        .collect();
    let mut shape = format!("{} numeric features", p.features.len());
    if !coded.is_empty() {
        let _ = write!(shape, ", of them coded as numbers {}", coded.join(", "));
    }
    if !cats.is_empty() {
        let _ = write!(shape, " + categories {}", cats.join(", "));
    }
    let _ = writeln!(
        s,
        "  clustered {shape}; scaling `{}`",
        serde_plain(&plan.scale)
    );
}

fn serde_plain<T: serde::Serialize>(v: &T) -> String {
    serde_json::to_value(v)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default()
}

/// The sweep section alone.
pub fn sweep_report(o: &Outcome) -> String {
    let mut s = String::new();
    sweep(&mut s, o);
    s
}

/// Each segment's rule in words, with its coverage and precision.
fn rules(s: &mut String, o: &Outcome) {
    if o.rules.is_empty() {
        return;
    }
    let _ = writeln!(s, "rules (at most three conditions; coverage: share of the segment the rule picks;\nprecision: share of the records it picks that are in the segment)");
    for r in &o.rules {
        let name = match &r.label {
            Some(l) => format!("{} {l}", r.segment),
            None => r.segment.to_string(),
        };
        let text = if r.conditions.is_empty() {
            "no rule of three conditions sets it apart".to_string()
        } else {
            format!(
                "{}: coverage {}, precision {}",
                rule_words(o, r),
                people::share(r.coverage),
                people::share(r.precision)
            )
        };
        wrapped(s, &format!("  {name}: "), &text);
    }
    s.push('\n');
}

/// A rule's conditions in people's words: `visits a month > 6.94 and ...`.
pub fn rule_words(o: &Outcome, r: &crate::run::rules::SegmentRule) -> String {
    r.conditions
        .iter()
        .map(|c| {
            if let Some(words) = level_condition(o, c) {
                return words;
            }
            let op = if c.op == ">" { "above" } else { "at most" };
            // Written with the places the threshold has (see
            // run::rules::tidy), never rounded: the value shown is the
            // value the counts and the SQL use.
            let display = o.plan.display.get(&c.column);
            let places = c.places as usize;
            let unit = display.and_then(|d| d.unit.as_deref());
            let value = match display.map(|d| d.format) {
                Some(NumberFormat::Percent) => {
                    format!("{} %", people::decimals(100.0 * c.value, places))
                }
                // Cents always, more places when the threshold has them.
                Some(NumberFormat::Money) => people::money(c.value, unit, places.max(2)),
                _ => match unit {
                    Some(u) => format!("{} {u}", people::decimals(c.value, places)),
                    None => people::decimals(c.value, places),
                },
            };
            format!("{} {op} {value}", people::name(&o.plan, &c.column))
        })
        .collect::<Vec<_>>()
        .join(" and ")
}

/// A condition on an ordered category or a flag in its levels' words:
/// `loyalty tier sprout or higher`, `newsletter set` (`None` for a
/// number). A rank above t is at least the next whole rank.
fn level_condition(o: &Outcome, c: &crate::run::rules::RuleCondition) -> Option<String> {
    let name = people::name(&o.plan, &c.column);
    let above = c.op == ">";
    match &c.kind {
        crate::plan::FeatureKind::Number => None,
        crate::plan::FeatureKind::Flag => {
            Some(format!("{name} {}", if above { "set" } else { "not set" }))
        }
        crate::plan::FeatureKind::Ordered(levels) => {
            let rank = if above {
                c.value.floor() + 1.0
            } else {
                c.value.floor()
            };
            let at = (rank.clamp(1.0, levels.len() as f64) as usize).saturating_sub(1);
            let level = levels.get(at)?;
            Some(format!(
                "{name} {level} or {}",
                if above { "higher" } else { "lower" }
            ))
        }
    }
}

/// The profiles section alone.
pub fn profiles_report(o: &Outcome) -> String {
    let mut s = String::new();
    profiles(&mut s, o);
    typical_members(&mut s, o);
    s
}

/// Each segment's medoid, for methods whose segments centre on a member.
fn typical_members(s: &mut String, o: &Outcome) {
    let each: Vec<String> = o
        .profiles
        .iter()
        .filter_map(|p| Some(format!("{} {}", p.segment?, p.medoid.as_deref()?)))
        .collect();
    if !each.is_empty() {
        wrapped(
            s,
            "  ",
            &format!(
                "typical members (each segment's medoid): {}",
                each.join(", ")
            ),
        );
        s.push('\n');
    }
}

/// What the sweep's columns mean for a method with its own measure.
pub const OWN_MEASURE_WORDS: &str = "judged on the method's own measure: the within column is its objective (total dissimilarity to the medoids, or the total cost against the prototypes), Calinski-Harabasz compares it with all records as one segment, Davies-Bouldin and the silhouette use the same dissimilarity";

/// The tree's header lines in the sweep: its linkage, distance and leaves,
/// the cophenetic correlation and any inversions.
fn tree_header(s: &mut String, t: &crate::run::TreeResult) {
    let over = if t.two_stage {
        format!(
            "over {} k-means micro-segments (weighted by size)",
            t.leaves
        )
    } else {
        format!("over {} records", t.leaves)
    };
    let _ = writeln!(
        s,
        "tree sweep: {} linkage, {}, {over}",
        t.linkage.name(),
        t.distance.words()
    );
    let mut line = format!("cophenetic correlation {:.4}", t.cophenetic);
    if t.cophenetic_leaves < t.leaves {
        let _ = write!(
            line,
            " (estimated over the pairs of {} sampled records)",
            t.cophenetic_leaves
        );
    }
    if t.inversions > 0 {
        let _ = write!(line, "; {} inversions (merges lower than the one before: the tree is not monotone, so heights do not order the cuts)", t.inversions);
    }
    wrapped(s, "  ", &line);
}

/// The sweep's objective column: the within-cluster sum of squares, or a
/// method's own objective.
pub fn within_name(o: &Outcome) -> &'static str {
    if o.plan.own_measure() {
        "within"
    } else {
        "within SS"
    }
}

/// The method's statement word.
fn method_name(m: &MethodPlan) -> &'static str {
    match m {
        MethodPlan::KMeans(_) => "k-means",
        MethodPlan::KMedoids(_) => "k-medoids",
        MethodPlan::KPrototypes(_) => "k-prototypes",
        MethodPlan::Tree(_) => "tree",
    }
}

fn sweep(s: &mut String, o: &Outcome) {
    match (&o.plan.method, &o.tree) {
        (MethodPlan::KMeans(km), _) => {
            let seeding = match km.seeding {
                Seeding::KMeansPlusPlus => "k-means++ starts",
                _ => "random-partition starts",
            };
            let _ = writeln!(
                s,
                "k-means sweep: {} restarts per k, {seeding}, seed {}",
                km.restarts, o.plan.seed
            );
        }
        (MethodPlan::Tree(_), Some(t)) => tree_header(s, t),
        (MethodPlan::Tree(_), None) => {}
        (m, _) => {
            let _ = writeln!(
                s,
                "{} sweep: {}, seed {}",
                method_name(m),
                m.words(),
                o.plan.seed
            );
        }
    }
    if o.plan.own_measure() {
        wrapped(s, "  ", OWN_MEASURE_WORDS);
    }
    sweep_table(s, o);
    let sampled = o
        .sweep
        .iter()
        .find(|r| r.silhouette_evaluated < o.prepared.kept.len());
    if let Some(r) = sampled {
        wrapped(
            s,
            "  ",
            &format!(
                "silhouette estimated from {} records sampled within each segment, its standard error in brackets (a delete-a-group jackknife over the sample); `evidence silhouette exact` measures every pair instead",
                r.silhouette_evaluated
            ),
        );
    }
    wrapped(s, "  chosen: ", &o.reason);
    if let Some(d) = &o.disagreement {
        wrapped(s, "  note: ", d);
    }
    for n in &o.notes {
        wrapped(s, "  note: ", n);
    }
    for a in &o.advice {
        wrapped(s, "  advice: ", a);
    }
    if let Some(v) = &o.validation {
        let _ = writeln!(
            s,
            "  validation: adjusted Rand index {:.4} against `{}` over {} records{}",
            v.adjusted_rand_index,
            v.column,
            thousands(v.matched),
            if v.unmatched > 0 {
                format!(" ({} had no known group)", thousands(v.unmatched))
            } else {
                String::new()
            }
        );
    }
}

/// The sweep table: a row per k, a column per criterion computed, the
/// chosen k marked with `>`, then a legend.
fn sweep_table(s: &mut String, o: &Outcome) {
    type Cell = fn(&crate::run::SweepRow) -> String;
    let mut columns: Vec<(&str, usize, Cell)> = vec![
        (within_name(o), 12, |r| format!("{:.3}", r.within_ss)),
        ("C-H", 10, |r| format!("{:.2}", r.calinski_harabasz)),
        ("D-B", 8, |r| format!("{:.4}", r.davies_bouldin)),
    ];
    if o.sweep.iter().any(|r| r.silhouette_se.is_some()) {
        columns.insert(
            1,
            ("silhouette (se)", 17, |r| match r.silhouette_se {
                Some(se) => format!("{:.4} ({se:.4})", r.silhouette),
                None => format!("{:.4}", r.silhouette),
            }),
        );
    } else {
        columns.insert(1, ("silhouette", 10, |r| format!("{:.4}", r.silhouette)));
    }
    if o.sweep.iter().any(|r| r.gap.is_some()) {
        columns.push(("gap (se)", 17, |r| {
            r.gap
                .map(|(g, se)| format!("{g:.4} ({se:.4})"))
                .unwrap_or_default()
        }));
    }
    if o.sweep.iter().any(|r| r.stability.is_some()) {
        columns.push(("stability", 9, |r| {
            r.stability.map(|v| format!("{v:.3}")).unwrap_or_default()
        }));
    }
    if o.sweep.iter().any(|r| r.restarts.is_some()) {
        columns.push(("best found", 10, |r| {
            r.restarts
                .as_ref()
                .map(|x| format!("{}/{}", x.at_best, x.of))
                .unwrap_or_default()
        }));
    }
    if o.plan.floor.is_some() {
        columns.push(("smallest", 10, |r| {
            let mark = if r.below_floor { " *" } else { "" };
            let weighted = (r.smallest_weighted)
                .map(|w| format!(" ({})", crate::text::members(w)))
                .unwrap_or_default();
            format!("{}{weighted}{mark}", crate::text::thousands(r.smallest))
        }));
    }
    let mut header = format!("  {:>3}", "k");
    for (name, w, _) in &columns {
        let _ = write!(header, " {name:>w$}");
    }
    let _ = writeln!(s, "{header}");
    for r in &o.sweep {
        let mark = if r.k == o.chosen { ">" } else { " " };
        let mut line = format!("{mark} {:>3}", r.k);
        for (_, w, cell) in &columns {
            let _ = write!(line, " {:>w$}", cell(r));
        }
        let _ = writeln!(s, "{}", line.trim_end());
    }
    wrapped_items(s, "  ", &sweep_legend(o), ';');
}

/// What the sweep table's abbreviations and marks mean.
fn sweep_legend(o: &Outcome) -> Vec<String> {
    let mut legend = vec![
        "C-H: Calinski-Harabasz, higher is better",
        "D-B: Davies-Bouldin, lower is better",
    ];
    if o.sweep.iter().any(|r| r.gap.is_some()) {
        legend.push("gap: gap statistic (standard error)");
    }
    if o.sweep.iter().any(|r| r.stability.is_some()) {
        legend.push("stability: mean adjusted Rand index over bootstrap resamples");
    }
    if o.sweep.iter().any(|r| r.restarts.is_some()) {
        legend.push("best found: restarts that reached the best partition");
    }
    let mut legend: Vec<String> = legend.into_iter().map(String::from).collect();
    if let Some(f) = o.plan.floor {
        legend.push(match o.overall.weighted {
            Some(w) => format!(
                "smallest: records in the smallest segment (weighted members in brackets), * below the floor of {}",
                f.words(w.round() as usize, "weighted members")
            ),
            None => format!(
                "smallest: records in the smallest segment, * below the floor of {}",
                f.words(o.prepared.kept.len(), "records")
            ),
        });
    }
    legend
}

/// One row of the profiles table: its name, then a cell per profile (all
/// records first, narrower).
fn row(s: &mut String, name: &str, cells: Vec<String>) {
    let mut line = format!("  {:<w$}", clip(name, NAME_WIDTH - 2), w = NAME_WIDTH - 2);
    for (i, c) in cells.iter().enumerate() {
        let w = if i == 0 { 10 } else { CELL };
        let _ = write!(line, "{:>w$}", clip(c, w - 1));
    }
    let _ = writeln!(s, "{}", line.trim_end());
}

fn profiles(s: &mut String, o: &Outcome) {
    let _ = writeln!(s, "segments at k = {} (means in original units; beside each, its standardised difference from\nall records, measured where the segments were made: after clipping and the transform)", o.chosen);
    let labels: Vec<String> = o
        .profiles
        .iter()
        .filter_map(|p| Some(format!("{} = {}", p.segment?, p.label.as_ref()?)))
        .collect();
    if !labels.is_empty() {
        wrapped_items(s, "  labels: ", &labels, ',');
    }
    for block in o.profiles.chunks(SEGMENTS_PER_BLOCK) {
        let mut cols: Vec<&Profile> = vec![&o.overall];
        cols.extend(block.iter());
        row(
            s,
            "segment",
            cols.iter()
                .map(|p| {
                    p.segment
                        .map(|n| n.to_string())
                        .unwrap_or_else(|| "all".into())
                })
                .collect(),
        );
        if block.iter().any(|p| p.label.is_some()) {
            row(
                s,
                "label",
                cols.iter()
                    .map(|p| p.label.clone().unwrap_or_default())
                    .collect(),
            );
        }
        size_rows(s, &cols);
        if block.iter().any(|p| p.stability.is_some()) {
            row(
                s,
                "stability (Jaccard)",
                cols.iter()
                    .map(|p| p.stability.map(|v| format!("{v:.2}")).unwrap_or_default())
                    .collect(),
            );
        }
        if block.iter().any(|p| p.silhouette.is_some()) {
            row(
                s,
                "silhouette",
                cols.iter()
                    .map(|p| p.silhouette.map(|v| format!("{v:.3}")).unwrap_or_default())
                    .collect(),
            );
        }
        feature_rows(s, o, &cols);
        for (c, cat) in o.prepared.categories.iter().enumerate() {
            for (l, level) in cat.levels.iter().enumerate() {
                let cells = cols
                    .iter()
                    .map(|p| format!("{:.0} %", p.categories[c][l] * 100.0))
                    .collect();
                let name = people::name(&o.plan, &cat.column);
                row(s, &format!("{name}: {level}"), cells);
            }
        }
        for (name, cells) in tally_rows(o, &cols) {
            row(s, &name, cells);
        }
        s.push('\n');
    }
}

/// The size rows: records, with record weights the weighted members, and
/// the share (of the weighted members, with weights).
fn size_rows(s: &mut String, cols: &[&Profile]) {
    row(s, "size", cols.iter().map(|p| thousands(p.size)).collect());
    let weighted = cols.iter().any(|p| p.weighted.is_some());
    if weighted {
        let members = (cols.iter())
            .map(|p| p.weighted.map(crate::text::members).unwrap_or_default())
            .collect();
        row(s, "weighted members", members);
    }
    let share = if weighted {
        "share (by weight)"
    } else {
        "share"
    };
    row(
        s,
        share,
        cols.iter().map(|p| people::share(p.share)).collect(),
    );
}

/// The rows of the clustered features: each segment's mean in the
/// column's format with its standardised difference (an ordered
/// category's mean rank, a flag's share set).
fn feature_rows(s: &mut String, o: &Outcome, cols: &[&Profile]) {
    for (f, fp) in o.prepared.features.iter().enumerate() {
        let cells = cols
            .iter()
            .map(|p| {
                let fs = &p.features[f];
                // The value leaves room for its difference.
                let value = |room| people::compact(&o.plan, &fp.column, fs.mean, room);
                if p.segment.is_none() {
                    value(CELL - 1)
                } else {
                    // Differences right-aligned: `+1.3`, ` 0.0`.
                    format!("{} {:>4}", value(CELL - 6), people::signed(fs.std_diff, 1))
                }
            })
            .collect();
        let name = people::name(&o.plan, &fp.column);
        match fp.kind {
            crate::plan::FeatureKind::Number => row(s, name, cells),
            crate::plan::FeatureKind::Ordered(_) => row(s, &format!("{name} (rank)"), cells),
            crate::plan::FeatureKind::Flag => row(s, &format!("{name} (share set)"), cells),
        }
    }
}

/// The rows of the `tally` columns, described, not clustered: each
/// one's mean per record in its format and its share of the total, for
/// the profiles `cols` (all records first).
fn tally_rows(o: &Outcome, cols: &[&Profile]) -> Vec<(String, Vec<String>)> {
    let at = |p: &Profile| -> Option<usize> {
        let s = p.segment?;
        o.profiles.iter().position(|q| q.segment == Some(s))
    };
    let mut rows = Vec::new();
    for v in &o.values {
        let pick = |p: &Profile| match at(p) {
            Some(i) => &v.segments[i],
            None => &v.overall,
        };
        let mean = |p: &&Profile| {
            pick(p)
                .mean
                .map(|m| people::compact(&o.plan, &v.column, m, CELL - 1))
                .unwrap_or_default()
        };
        let share = |p: &&Profile| {
            pick(p)
                .share_of_total
                .map(people::share)
                .unwrap_or_default()
        };
        let name = people::name(&o.plan, &v.column);
        rows.push((format!("{name} (mean)"), cols.iter().map(mean).collect()));
        rows.push((
            "  share of its total".into(),
            cols.iter().map(share).collect(),
        ));
    }
    rows
}

/// Writes `text` after `lead`, wrapped at 100 columns, continuation lines
/// indented to match.
fn wrapped(s: &mut String, lead: &str, text: &str) {
    const WIDTH: usize = 100;
    let indent = " ".repeat(lead.chars().count());
    let mut line = lead.to_string();
    let mut empty = true;
    for word in text.split_whitespace() {
        if !empty && line.chars().count() + 1 + word.chars().count() > WIDTH {
            let _ = writeln!(s, "{line}");
            line = indent.clone();
            empty = true;
        }
        if !empty {
            line.push(' ');
        }
        line.push_str(word);
        empty = false;
    }
    let _ = writeln!(s, "{line}");
}

/// Like [`wrapped`], but breaks only between items (joined by commas).
fn wrapped_items(s: &mut String, lead: &str, items: &[String], sep: char) {
    const WIDTH: usize = 100;
    let indent = " ".repeat(lead.chars().count());
    let mut line = lead.to_string();
    for (i, item) in items.iter().enumerate() {
        let piece = if i + 1 < items.len() {
            format!("{item}{sep}")
        } else {
            item.clone()
        };
        let fresh = line.chars().count() == indent.len();
        if !fresh && line.chars().count() + 1 + piece.chars().count() > WIDTH {
            let _ = writeln!(s, "{line}");
            line = indent.clone();
        } else if !fresh {
            line.push(' ');
        }
        line.push_str(&piece);
    }
    let _ = writeln!(s, "{line}");
}

/// Shortens text to `w` characters, marking the cut.
pub(super) fn clip(text: &str, w: usize) -> String {
    if text.chars().count() <= w {
        text.to_string()
    } else {
        let mut t: String = text.chars().take(w.saturating_sub(1)).collect();
        t.push('~');
        t
    }
}

/// What `no key` means for the outputs, in words: said wherever a key is
/// shown.
pub fn keyless_words(plan: &crate::plan::Plan) -> String {
    format!(
        "records are keyed by their line in the file (column `{}`; line 1 is the header), which does not identify anyone in another file",
        plan.input.key
    )
}
