//! The report: one self-contained HTML file (no scripts, nothing fetched)
//! that a manager can read in two minutes: what was segmented and how, why
//! this k, a card per segment in plain words, the charts, where the run
//! came from, and the cautions. The markup is well-formed XML as well as
//! HTML, so it can be checked by any XML parser.

// Markup is written a piece at a time, each ending its own line; the line
// breaks belong to the markup, so `write!` with a final `\n` is intended.
#![allow(clippy::write_with_newline)]

use super::charts;
use super::files::Sources;
use super::people;
use super::record::sha256_hex;
use crate::plan::{MethodPlan, MissingRule, Transform};
use crate::run::Outcome;
use std::fmt::Write;

const STYLE: &str = "body{font-family:sans-serif;max-width:980px;margin:2em auto;padding:0 1em;color:#222;line-height:1.45}\
h1{font-size:1.6em;margin-bottom:.2em}h2{font-size:1.2em;border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:1.8em}\
.lead{font-size:1.05em;color:#444}.cards{display:flex;flex-wrap:wrap;gap:12px}\
.card{border:1px solid #ccc;border-left:8px solid #999;border-radius:4px;padding:.6em .9em;width:262px}\
.card h3{margin:.1em 0 .4em 0;font-size:1.05em}.card ul{padding-left:1.1em;margin:.3em 0}.small{font-size:.9em;color:#555}\
table{border-collapse:collapse;font-size:.92em}td,th{border-bottom:1px solid #e3e3e3;padding:.25em .6em;text-align:right}\
th:first-child,td:first-child{text-align:left}.chosen{font-weight:bold;background:#fff4e0}\
figure{margin:1.2em 0}figcaption{font-size:.9em;color:#555}.caution{background:#fbf6e8;border:1px solid #e8d9a8;padding:.6em .9em}\
code{font-size:.95em}.period{color:#555;margin-top:0}.value{font-weight:bold}.rule{font-size:.92em;background:#f4f4f4;padding:.3em .5em}\
.about{font-style:italic;margin:.1em 0 .4em 0}.next{border-top:1px solid #ddd;padding-top:.3em}\
@page{size:A4;margin:14mm}\
@media print{body{max-width:none;margin:0}.cards{display:grid;grid-template-columns:1fr 1fr;gap:8px}.card{width:auto;margin:0;break-inside:avoid;page-break-inside:avoid}\
figure,table,.caution{break-inside:avoid;page-break-inside:avoid}h2,h3{break-after:avoid;page-break-after:avoid}.analyst{break-before:page;page-break-before:always}}";

/// Escapes text for HTML.
fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// How far a standardised difference is from the average, in words.
fn degree(d: f64) -> &'static str {
    match d {
        d if d >= 1.0 => "well above",
        d if d >= 0.5 => "above",
        d if d >= 0.25 => "slightly above",
        d if d <= -1.0 => "well below",
        d if d <= -0.5 => "below",
        d if d <= -0.25 => "slightly below",
        _ => "close to",
    }
}

/// The report's bytes.
pub fn render(o: &Outcome, sources: &Sources<'_>) -> Vec<u8> {
    let mut h = String::new();
    let plan = &o.plan;
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"/><title>{}</title><style>{STYLE}</style></head><body>\n",
        esc(plan.title.as_deref().unwrap_or(&plan.name))
    );
    // The word for a record comes from the recipe: escaped here, once, as
    // every later use is inside markup.
    let noun = esc(plan.records_noun.as_deref().unwrap_or("records"));
    let title = plan.title.as_deref().unwrap_or(&plan.name);
    let _ = write!(h, "<h1>{}</h1>\n", esc(title));
    if let Some(period) = &plan.period {
        let _ = write!(h, "<p class=\"period\">{}</p>\n", esc(period));
    }
    let standing = match o.overall.weighted {
        Some(w) => format!(
            ", standing for {} weighted members,",
            crate::text::members(w)
        ),
        None => String::new(),
    };
    let _ = write!(
        h,
        "<p class=\"lead\">{} {noun}{standing} in <b>{} segments</b>.</p>\n",
        crate::text::thousands(o.prepared.kept.len()),
        o.chosen,
    );
    let changes = super::changes::Changes::of(o);
    cards(&mut h, o, &noun, changes.as_ref());
    if let Some(c) = &changes {
        changed(&mut h, c, o, &noun);
    }
    let _ = write!(
        h,
        "<div class=\"analyst\"><h2>What the analyst should know</h2>\n<p class=\"small\">{} of {} records from {} were segmented by {}.</p>\n",
        crate::text::thousands(o.prepared.kept.len()),
        crate::text::thousands(o.records),
        input_html(&plan.input),
        esc(&method_words(&plan.method))
    );
    if plan.input.keyless {
        let _ = write!(
            h,
            "<p class=\"small\">The data has no key column: {}.</p>\n",
            esc(&super::tables::keyless_words(plan))
        );
    }
    how(&mut h, o);
    why(&mut h, o);
    if let Some(c) = &changes {
        drift(&mut h, c, o);
    }
    let _ = write!(h, "<h2>Charts</h2>\n");
    for c in charts::all(o) {
        let _ = write!(
            h,
            "<figure>{}<figcaption>{}</figcaption></figure>\n",
            c.svg,
            esc(&c.title)
        );
    }
    provenance(&mut h, o, sources);
    let _ = write!(
        h,
        "</div>\n<h2>Cautions</h2>\n<div class=\"caution\"><p>Segments describe behaviour in the data, not who people are. \
         Segmenting or targeting people on direct identifiers or protected attributes (age, sex or gender, ethnicity, religion, health, disability and the like) may be unlawful or unfair; \
         local law and your organisation's privacy practice decide. Segments are found by an algorithm: check that they make sense before acting on them, \
         and ask the analyst before relying on a number copied from this page.</p></div>\n"
    );
    let _ = write!(
        h,
        "<p class=\"small\">Written by assort {}.</p>\n</body></html>\n",
        env!("CARGO_PKG_VERSION")
    );
    h.into_bytes()
}

/// The method in words: "k-means (50 restarts per k)".
fn method_words(method: &MethodPlan) -> String {
    method.words()
}

fn how(h: &mut String, o: &Outcome) {
    let plan = &o.plan;
    let _ = write!(h, "<h2>What was segmented, and how</h2>\n<ul>\n");
    let features: Vec<String> = plan
        .features
        .iter()
        .map(|f| {
            let mut s = format!("<code>{}</code>", esc(&f.column));
            if !f.kind.is_number() {
                let _ = write!(s, " ({})", esc(&f.kind.words()));
            }
            if f.transform != Transform::None {
                let _ = write!(s, " ({})", esc(&serde_plain(&f.transform)));
            }
            if let Some((lo, hi)) = f.clip {
                let _ = write!(
                    s,
                    " (clipped at the {}% and {}% quantiles)",
                    lo * 100.0,
                    hi * 100.0
                );
            }
            if f.weight != 1.0 {
                let _ = write!(s, " (weight {})", f.weight);
            }
            s
        })
        .collect();
    let _ = write!(h, "<li>Behaviour: {}.</li>\n", features.join(", "));
    if !plan.categories.is_empty() {
        let cats: Vec<String> = plan
            .categories
            .iter()
            .map(|c| format!("<code>{}</code> (weight {})", esc(&c.column), c.weight))
            .collect();
        let _ = write!(h, "<li>Categories: {}.</li>\n", cats.join(", "));
    }
    let filled: Vec<String> = o
        .prepared
        .features
        .iter()
        .enumerate()
        .filter(|(_, f)| f.filled > 0)
        .map(|(f, fp)| {
            format!(
                "{} in <code>{}</code> filled with {}",
                crate::text::thousands(fp.filled),
                esc(&fp.column),
                esc(&fill_words(o, f).unwrap_or_default())
            )
        })
        .collect();
    let dropped = match o.prepared.dropped {
        0 => "no record dropped".to_string(),
        n => format!(
            "{} records dropped for gaps (in the hand-off with no segment and why)",
            crate::text::thousands(n)
        ),
    };
    let gaps = if filled.is_empty() {
        "none filled".to_string()
    } else {
        filled.join(", ")
    };
    let _ = write!(h, "<li>Missing values: {gaps}; {dropped}.</li>\n");
    if let Some(column) = &plan.record_weights {
        let _ = write!(
            h,
            "<li>Record weights: each record stands for as many members as <code>{}</code> says; sizes, shares, means, quartiles, rules and every criterion count members by weight.</li>\n",
            esc(column)
        );
    }
    let _ = write!(h, "<li>Scaling: {}.</li>\n", esc(&serde_plain(&plan.scale)));
    let _ = write!(
        h,
        "<li>Seed {}: rerunning the recipe on the same data gives the same segments.</li>\n</ul>\n",
        plan.seed
    );
}

/// What feature `f`'s gaps were filled with, in its format: "€39.10, the
/// median"; `None` when the recipe does not fill them.
fn fill_words(o: &Outcome, f: usize) -> Option<String> {
    let fp = &o.prepared.features[f];
    let what = match o.plan.features.get(f)?.missing {
        MissingRule::FillMedian => ", the median",
        MissingRule::FillMean => ", the mean",
        MissingRule::FillValue(_) => ", as the recipe says",
        MissingRule::DropRow | MissingRule::Refuse | MissingRule::Keep => return None,
    };
    Some(format!(
        "{}{what}",
        people::value(&o.plan, &fp.column, fp.fill?)
    ))
}

fn serde_plain<T: serde::Serialize>(v: &T) -> String {
    serde_json::to_value(v)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default()
}

fn why(h: &mut String, o: &Outcome) {
    let _ = write!(
        h,
        "<h2>Why {} segments</h2>\n<p>{}.</p>\n",
        o.chosen,
        esc(&o.reason)
    );
    for s in o.disagreement.iter().chain(&o.notes) {
        let _ = write!(h, "<p class=\"small\">{}.</p>\n", esc(s));
    }
    for a in &o.advice {
        let _ = write!(h, "<p class=\"small\">{}.</p>\n", esc(a));
    }
    if let Some(v) = &o.validation {
        let _ = write!(h, "<p class=\"small\">Against the known grouping <code>{}</code>: adjusted Rand index {:.3}.</p>\n", esc(&v.column), v.adjusted_rand_index);
    }
    sweep_table(h, o);
}

/// The sweep as a table: a row per k, the chosen one marked, with the
/// restarts that reached the best partition and the smallest segment.
fn sweep_table(h: &mut String, o: &Outcome) {
    let within = super::tables::within_name(o);
    let _ = write!(h, "<table><tr><th>k</th><th>{within}</th><th>silhouette</th><th>Calinski-Harabasz</th><th>Davies-Bouldin</th>");
    let gap = o.sweep.iter().any(|r| r.gap.is_some());
    let stab = o.sweep.iter().any(|r| r.stability.is_some());
    if gap {
        let _ = write!(h, "<th>gap (se)</th>");
    }
    if stab {
        let _ = write!(h, "<th>stability</th>");
    }
    let restarts = o.sweep.iter().any(|r| r.restarts.is_some());
    if restarts {
        let _ = write!(h, "<th>restarts reaching the best</th>");
    }
    let _ = write!(h, "<th>smallest segment</th></tr>\n");
    for r in &o.sweep {
        let class = if r.k == o.chosen {
            " class=\"chosen\""
        } else {
            ""
        };
        let _ = write!(
            h,
            "<tr{class}><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{:.4}</td>",
            r.k,
            people::decimals(r.within_ss, 2),
            match r.silhouette_se {
                Some(se) => format!("{:.4} ± {se:.4}", r.silhouette),
                None => format!("{:.4}", r.silhouette),
            },
            people::decimals(r.calinski_harabasz, 1),
            r.davies_bouldin
        );
        if gap {
            let _ = write!(
                h,
                "<td>{}</td>",
                r.gap
                    .map(|(g, s)| format!("{g:.3} ({s:.3})"))
                    .unwrap_or_default()
            );
        }
        if stab {
            let _ = write!(
                h,
                "<td>{}</td>",
                r.stability.map(|s| format!("{s:.3}")).unwrap_or_default()
            );
        }
        if restarts {
            let best = r.restarts.as_ref().map(|x| {
                format!(
                    "{} of {}",
                    crate::text::thousands(x.at_best),
                    crate::text::thousands(x.of)
                )
            });
            let _ = write!(h, "<td>{}</td>", best.unwrap_or_default());
        }
        let below = if r.below_floor {
            " (below the floor)"
        } else {
            ""
        };
        let _ = write!(
            h,
            "<td>{}{below}</td></tr>\n",
            crate::text::thousands(r.smallest)
        );
    }
    let _ = write!(h, "</table>\n");
}

/// One card per segment, for people who act on segments: its name, size
/// and share, what it holds of the described values, what sets it apart in
/// words, its rule, and the category levels it over-represents.
fn cards(h: &mut String, o: &Outcome, noun: &str, changes: Option<&super::changes::Changes>) {
    let _ = write!(h, "<h2>The segments</h2>\n<div class=\"cards\">\n");
    for (i, p) in o.profiles.iter().enumerate() {
        let seg = p.segment.unwrap_or(i + 1);
        let name = match &p.label {
            Some(l) => esc(l),
            None => format!("Segment {seg}"),
        };
        // With record weights the members a segment stands for lead, its
        // records in brackets.
        let count = match p.weighted {
            Some(w) => format!(
                "{} weighted members</span> ({} {noun})",
                crate::text::members(w),
                crate::text::thousands(p.size)
            ),
            None => format!("{} {noun}</span>", crate::text::thousands(p.size)),
        };
        let _ = write!(
            h,
            "<div class=\"card\" style=\"border-left-color:{}\"><h3>{name}</h3>\n<p><span class=\"value\">{count}, {} of all <span class=\"small\">(segment {seg})</span></p>\n",
            charts::SEGMENT_COLOURS[i % charts::SEGMENT_COLOURS.len()],
            people::share(p.share),
        );
        let note = o.plan.briefs.get(&seg);
        if let Some(n) = note {
            let _ = write!(h, "<p class=\"about\">{}</p>\n", esc(&n.text));
        }
        if let Some(line) = changes.and_then(|c| since_line(c, o, seg, noun)) {
            let _ = write!(h, "<p class=\"small\">{line}</p>\n");
        }
        if let Some(key) = &p.medoid {
            let _ = write!(
                h,
                "<p class=\"small\">A typical member of this segment (its medoid): <code>{}</code></p>\n",
                esc(key)
            );
        }
        for v in &o.values {
            let _ = write!(h, "<p>{}</p>\n", value_line(o, v, i, noun));
        }
        let words = describe(o, i, noun);
        if !words.is_empty() {
            let _ = write!(h, "<ul>\n");
            for w in words {
                let _ = write!(h, "<li>{w}</li>\n");
            }
            let _ = write!(h, "</ul>\n");
        }
        categories_over(h, o, i);
        if let Some(r) = o.rules.get(i).filter(|r| !r.conditions.is_empty()) {
            let _ = write!(
                h,
                "<p class=\"rule\">Rule: {}. It picks {} of this segment; {} of the {noun} it picks are in it.</p>\n",
                esc(&super::tables::rule_words(o, r)),
                people::share(r.coverage),
                people::share(r.precision)
            );
        }
        if let Some(action) = note.and_then(|n| n.action.as_ref()) {
            let _ = write!(
                h,
                "<p class=\"next\"><b>Next step:</b> {}</p>\n",
                esc(action)
            );
        }
        let _ = write!(h, "</div>\n");
    }
    let _ = write!(h, "</div>\n");
}

/// How segment `seg` changed since last run, for its card: its change in
/// members and share, how many of its members joined since (with last
/// run's assignments), or that it is new; a weak match is said.
fn since_line(c: &super::changes::Changes, o: &Outcome, seg: usize, noun: &str) -> Option<String> {
    if c.same_data {
        return None;
    }
    let ch = c.segments.iter().find(|ch| ch.number == seg)?;
    let then = when(c.period_then.as_ref(), "last run");
    let mut line = match ch.status {
        "new" => format!("New since {then}."),
        _ => format!("Since {then}: {}.", ch.size_words(noun)?),
    };
    let joined = o.comparison.as_ref().and_then(|cmp| {
        cmp.joined
            .iter()
            .find(|(s, _)| *s == seg.to_string())
            .map(|(_, n)| *n)
    });
    if let Some(n) = joined.filter(|&n| n > 0) {
        let _ = write!(
            line,
            " {} of its {noun} joined since.",
            crate::text::thousands(n)
        );
    }
    if ch.weak.is_some() {
        let _ = write!(
            line,
            " <b>Matched weakly</b> to last run's segment: check the name still fits."
        );
    }
    Some(line)
}

/// A `tally` column on segment `i`'s card, in the column's format. A rate
/// (`as percent`: a 0/1 flag such as "agreed to be contacted") is the
/// segment's own rate, with how many that is when the values are 0 and 1,
/// against the rate over all records; any other column is the segment's
/// mean per record against all records' mean, and its share of the
/// column's total. The means count only records with a value.
fn value_line(o: &Outcome, v: &crate::run::values::ValueProfile, i: usize, noun: &str) -> String {
    use crate::plan::NumberFormat;
    let (seg, all) = (&v.segments[i], &v.overall);
    let name = esc(people::name(&o.plan, &v.column));
    let shown = |m: Option<f64>| m.map_or("n/a".into(), |m| people::value(&o.plan, &v.column, m));
    let rate = o
        .plan
        .display
        .get(&v.column)
        .is_some_and(|d| d.format == NumberFormat::Percent);
    if rate {
        let zero_or_one = |q: Option<f64>| q.is_some_and(|q| q == 0.0 || q == 1.0);
        let flags = zero_or_one(seg.q1)
            && zero_or_one(seg.q3)
            && seg.total.fract() == 0.0
            && seg.mean.is_some_and(|m| (0.0..=1.0).contains(&m));
        let count = if flags {
            format!(" ({} {noun})", crate::text::thousands(seg.total as u64))
        } else {
            String::new()
        };
        return format!(
            "{name}: <span class=\"value\">{}</span>{count}, against {} over all {noun}",
            shown(seg.mean),
            shown(all.mean)
        );
    }
    let share = seg
        .share_of_total
        .map(|s| format!("; {} of the total", people::share(s)))
        .unwrap_or_default();
    format!(
        "{name}: <span class=\"value\">{}</span> on average in this segment, against {} over all {noun}{share}",
        shown(seg.mean),
        shown(all.mean)
    )
}

/// What sets segment `i` apart, in words: the features whose standardised
/// difference (in the clustered space) is at least 0.5 either way, largest
/// first, at most three; each with the segment's mean against all records'
/// mean, and for positive means the ratio when it is 1.25 or more ("2.6
/// times the average") or 0.8 or less ("56 % below the average").
fn describe(o: &Outcome, i: usize, noun: &str) -> Vec<String> {
    let p = &o.profiles[i];
    let mut order: Vec<usize> = (0..p.features.len())
        .filter(|&f| p.features[f].std_diff.abs() >= 0.5)
        .collect();
    order.sort_by(|&a, &b| {
        p.features[b]
            .std_diff
            .abs()
            .total_cmp(&p.features[a].std_diff.abs())
    });
    order
        .into_iter()
        .take(3)
        .map(|f| {
            let column = &o.prepared.features[f].column;
            let (here, all) = (p.features[f].mean, o.overall.features[f].mean);
            let ratio = if here > 0.0 && all > 0.0 {
                here / all
            } else {
                1.0
            };
            // A flag reads as the share set; a rank has no ratio.
            let kind = people::kind(&o.plan, column);
            let display = o.plan.display.get(column);
            let percent = display.is_some_and(|d| d.format == crate::plan::NumberFormat::Percent)
                || (*kind == crate::plan::FeatureKind::Flag && display.is_none());
            let ratio = if kind.is_number() { ratio } else { 1.0 };
            let how = if percent {
                // A share differs from the average by points, not by a
                // ratio: "78 % below" of a share reads as points.
                let points = 100.0 * (here - all);
                format!(
                    "{} points {} the average",
                    people::decimals(points.abs(), 1),
                    if points < 0.0 { "below" } else { "above" }
                )
            } else if ratio >= 1.25 {
                format!("{:.1} times the average", ratio)
            } else if ratio <= 0.8 {
                format!("{:.0} % below the average", (1.0 - ratio) * 100.0)
            } else {
                format!("{} the average", degree(p.features[f].std_diff))
            };
            // A mean that counts filled gaps says so, with the value.
            let gaps = match (p.features[f].filled, fill_words(o, f)) {
                (0, _) | (_, None) => String::new(),
                (n, Some(fill)) => format!(
                    "; {} {noun} had no value and count as {}",
                    crate::text::thousands(n),
                    esc(&fill)
                ),
            };
            format!(
                "{}: {}, {how} ({} for all {noun}){gaps}",
                esc(people::name(&o.plan, column)),
                esc(&people::value(&o.plan, column, here)),
                esc(&people::value(&o.plan, column, all))
            )
        })
        .collect()
}

/// Category levels segment `i` holds 5 points or more above all records.
fn categories_over(h: &mut String, o: &Outcome, i: usize) {
    let p = &o.profiles[i];
    for (c, cat) in o.prepared.categories.iter().enumerate() {
        let over: Vec<String> = cat
            .levels
            .iter()
            .enumerate()
            .filter(|(l, _)| p.categories[c][*l] - o.overall.categories[c][*l] >= 0.05)
            .map(|(l, name)| {
                format!(
                    "{} {} ({} overall)",
                    esc(name),
                    people::share(p.categories[c][l]),
                    people::share(o.overall.categories[c][l])
                )
            })
            .collect();
        if !over.is_empty() {
            let _ = write!(
                h,
                "<p class=\"small\">More often {}: {}.</p>\n",
                esc(people::name(&o.plan, &cat.column)),
                over.join("; ")
            );
        }
    }
}

/// Where the results come from, for someone who must trace them: the
/// recipe (by name, its digest), each file read with its records and
/// digest, and the seed in words; the generator's technical name is in
/// the run record.
fn provenance(h: &mut String, o: &Outcome, sources: &Sources<'_>) {
    let _ = write!(h, "<h2>Where these results come from</h2>\n<table>\n");
    let _ = write!(
        h,
        "<tr><td>recipe <code>{}</code></td><td><code>{}</code></td></tr>\n",
        esc(&o.plan.name),
        sha256_hex(sources.recipe_text.as_bytes())
    );
    for i in sources.inputs {
        let _ = write!(
            h,
            "<tr><td>{} <code>{}</code> ({} records)</td><td><code>{}</code></td></tr>\n",
            esc(&i.role),
            esc(&i.path),
            crate::text::thousands(i.records),
            i.sha256
        );
    }
    let _ = write!(
        h,
        "<tr><td>seed</td><td>{}: every random choice follows from it, so a rerun on the same files gives the same segments</td></tr>\n</table>\n<p class=\"small\">The long codes are SHA-256 digests: a file with the same digest is the same file. The run record beside the outputs holds the digest of every file written.</p>\n",
        o.plan.seed
    );
}

/// "What changed" for the people who act on segments: then and now by
/// their periods, each segment's size and share then and now with the
/// change in members and points, where last run's members went and where
/// this run's joiners landed, and the averages then and now, all by the
/// names and formats of `call`. The drift measures are the analyst's (see
/// [`drift`]).
/// Says first when there is nothing to compare (last run's model was made
/// from this data: false then), or that the period was not changed.
fn caveats(h: &mut String, c: &super::changes::Changes) -> bool {
    if c.same_data {
        // A quarter compared with itself is not shown as a comparison.
        let _ = write!(
            h,
            "<h2>What changed since last run</h2>\n<p>Nothing to compare: {}.</p>\n",
            esc(super::changes::SAME_DATA)
        );
        return false;
    }
    if let Some(period) = &c.period_unchanged {
        let _ = write!(
            h,
            "<p><b>Check the dates:</b> the recipe still says the data covers {}, as last run's did.</p>\n",
            esc(period)
        );
    }
    true
}

/// When, in words: the period a recipe gave, or what stands in for it.
fn when(period: Option<&String>, otherwise: &str) -> String {
    period.map_or(otherwise.to_string(), |p| esc(p))
}

fn changed(h: &mut String, c: &super::changes::Changes, o: &Outcome, noun: &str) {
    use crate::text::thousands;
    if !caveats(h, c) {
        return;
    }
    let then = when(c.period_then.as_ref(), "last run");
    let _ = write!(
        h,
        "<h2>What changed since {then}</h2>\n<p>Then: {then}, {} {noun}. Now: {}, {} {noun}. Each segment was matched with one of last run's on their {} and keeps its number and name.</p>\n",
        thousands(c.records_then),
        when(c.period_now.as_ref(), "this run"),
        thousands(c.records_now),
        esc(c.basis)
    );
    let _ = write!(
        h,
        "<table class=\"changes\"><tr><th>segment</th><th>then</th><th>now</th><th>change</th></tr>\n"
    );
    let cell = |size: Option<usize>, share: Option<f64>| match (size, share) {
        (Some(n), Some(s)) => format!("{} ({})", thousands(n), people::share(s)),
        _ => "\u{2013}".to_string(),
    };
    for ch in &c.segments {
        let change = match ch.status {
            "new" => "new segment".to_string(),
            "gone" => "no longer found".to_string(),
            _ => ch.size_words(noun).unwrap_or_default(),
        };
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}{}</td></tr>\n",
            esc(&super::changes::named(ch.number, ch.label.as_deref())),
            cell(ch.size_then, ch.share_then),
            cell(ch.size_now, ch.share_now),
            change,
            ch.weak
                .as_ref()
                .map(|w| format!("<br/><b>weak match</b>: {}", esc(w)))
                .unwrap_or_default()
        );
    }
    let _ = write!(h, "</table>\n");
    if let Some(cmp) = &o.comparison {
        migration_table(h, cmp, noun);
    }
    means_table(h, c, o);
}

/// Does this data still look like last run's (analyst half): each
/// feature's population stability index, the far share, and warnings.
fn drift(h: &mut String, c: &super::changes::Changes, o: &Outcome) {
    let Some(d) = c.drift.as_ref().filter(|_| !c.same_data) else {
        return;
    };
    let parts: Vec<String> = d
        .features
        .iter()
        .map(|f| {
            format!(
                "{} {:.3} ({})",
                esc(people::name(&o.plan, &f.column)),
                f.psi,
                f.reading
            )
        })
        .collect();
    let _ = write!(
        h,
        "<h2>Does this data still look like last run's?</h2>\n<p class=\"small\">Population stability index of each feature (below 0.1 stable, 0.1 to 0.25 some shift, above 0.25 a major shift; a rule of thumb of the trade): {}. {} of the records are farther from every centre than 99 % of last run's records were (about 1 % is expected).</p>\n",
        parts.join(", "),
        people::share(d.far_share)
    );
    for w in &d.warnings {
        let _ = write!(h, "<div class=\"caution\"><p>{}</p></div>\n", esc(w));
    }
}

/// Where last run's members went, segment by segment (with last run's
/// assignments): a row per segment then and one for those who joined
/// since, a column per segment now and one for those who left since.
fn migration_table(h: &mut String, cmp: &crate::run::comparison::Comparison, noun: &str) {
    use crate::text::thousands;
    let name = |labels: &std::collections::HashMap<String, String>, seg: &str| match labels.get(seg)
    {
        Some(l) => format!("{seg} {l}"),
        None => seg.to_string(),
    };
    let count =
        |v: &[(String, usize)], seg: &str| v.iter().find(|(s, _)| s == seg).map_or(0, |(_, n)| *n);
    let _ = write!(
        h,
        "<p>Where last run's {noun} went: {} are in both runs, {} joined since and {} left.</p>\n<table class=\"changes\"><tr><th>then \u{2193} now \u{2192}</th>",
        thousands(cmp.both),
        thousands(cmp.only_new),
        thousands(cmp.only_old)
    );
    for t in &cmp.migration.to {
        let _ = write!(h, "<th>{}</th>", esc(&name(&cmp.new_labels, t)));
    }
    let _ = write!(h, "<th>left since</th></tr>\n");
    for (i, f) in cmp.migration.from.iter().enumerate() {
        let _ = write!(h, "<tr><td>{}</td>", esc(&name(&cmp.old_labels, f)));
        for n in &cmp.migration.counts[i] {
            let _ = write!(h, "<td>{}</td>", thousands(*n));
        }
        let _ = write!(h, "<td>{}</td></tr>\n", thousands(count(&cmp.left, f)));
    }
    let _ = write!(h, "<tr><td>joined since</td>");
    for t in &cmp.migration.to {
        let _ = write!(h, "<td>{}</td>", thousands(count(&cmp.joined, t)));
    }
    let _ = write!(h, "<td></td></tr>\n</table>\n");
    // Segments of leavers or joiners that no shared member has.
    let elsewhere = |v: &[(String, usize)], among: &[String], labels| -> Vec<String> {
        v.iter()
            .filter(|(s, _)| !among.contains(s))
            .map(|(s, n)| format!("{} in {}", thousands(*n), esc(&name(labels, s))))
            .collect()
    };
    let joined = elsewhere(&cmp.joined, &cmp.migration.to, &cmp.new_labels);
    let left = elsewhere(&cmp.left, &cmp.migration.from, &cmp.old_labels);
    if !joined.is_empty() || !left.is_empty() {
        let _ = write!(
            h,
            "<p class=\"small\">Not in the table, as no member of both runs is there: joined {}; left {}.</p>\n",
            crate::text::and_list(&joined),
            crate::text::and_list(&left)
        );
    }
}

/// Each segment's averages then and now, for the segments both runs have,
/// by the names and formats of `call`.
fn means_table(h: &mut String, c: &super::changes::Changes, o: &Outcome) {
    let with_means: Vec<&super::changes::Change> = c
        .segments
        .iter()
        .filter(|ch| ch.means_then.is_some() && ch.means_now.is_some())
        .collect();
    if with_means.is_empty() {
        return;
    }
    let _ = write!(
        h,
        "<p>Averages then \u{2192} now:</p>\n<table class=\"changes\"><tr><th></th>"
    );
    for ch in &with_means {
        let _ = write!(
            h,
            "<th>{}</th>",
            esc(&super::changes::named(ch.number, ch.label.as_deref()))
        );
    }
    let _ = write!(h, "</tr>\n");
    for (f, column) in c.features.iter().enumerate() {
        let _ = write!(h, "<tr><td>{}</td>", esc(people::name(&o.plan, column)));
        let shown = |v: Option<f64>| v.map_or(String::new(), |v| people::value(&o.plan, column, v));
        for ch in &with_means {
            let then = ch.means_then.as_ref().and_then(|m| m.get(f)).copied();
            let now = ch.means_now.as_ref().and_then(|m| m.get(f)).copied();
            let _ = write!(
                h,
                "<td>{} \u{2192} {}</td>",
                esc(&shown(then)),
                esc(&shown(now))
            );
        }
        let _ = write!(h, "</tr>\n");
    }
    let _ = write!(h, "</table>\n");
}

/// Where the records came from, as HTML: the file, the table and its
/// connection, or the query's connection.
fn input_html(input: &crate::plan::InputPlan) -> String {
    match (input.source(), &input.database) {
        (Some(source), Some(connection)) if source.is_table() => format!(
            "table <code>{}</code> on connection <code>{}</code>",
            esc(&input.path),
            esc(connection)
        ),
        (_, Some(connection)) => format!("a query on connection <code>{}</code>", esc(connection)),
        _ => format!("<code>{}</code>", esc(&input.path)),
    }
}
