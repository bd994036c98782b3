//! Charts of a run as SVG documents, composed with the `svg` crate: the
//! criteria against k, each segment's silhouette, segment sizes, the profile
//! heat map, the records on their first two principal components and, for
//! trees, the top of the dendrogram with the cut drawn.
//!
//! Colours are our own: eight segment colours that step through lightness,
//! so they stay apart in greyscale and for the common colour-vision
//! deficiencies, each paired with a marker shape in the scatter as a second
//! cue; the heat map runs from blue through white to amber, each cell
//! carrying its signed value, so that no reading depends on colour.

use crate::engine::pca;
use crate::run::Outcome;
use svg::node::element::{Circle, Group, Line, Polyline, Rectangle, Text, Title};
use svg::Document;

/// Segment colours, dark and light alternating so that in greyscale no two
/// read alike: the first five (the usual number of segments) differ in
/// perceived lightness (CIELAB L*) by at least 12 and in the grey a
/// printer makes of them (luma, 0.299 R + 0.587 G + 0.114 B) by at least
/// 30 of 255, and segments that share a marker shape (four apart) by at
/// least 25 L*. (Segments 2 and 4 printed the same grey before: L* 84.8
/// and 77.3.)
pub const SEGMENT_COLOURS: [&str; 8] = [
    "#1f3b63", "#f7e68a", "#2a7060", "#9ec3e6", "#cf7a26", "#6b3f80", "#e6a3a0", "#3d3d3d",
];

const INK: &str = "#222222";
const GRID: &str = "#d8d8d8";
/// The chosen k's line: dark enough to print in grey.
const CHOSEN: &str = "#777777";
const FONT: &str = "font-family:sans-serif;font-size:11px";

/// A chart with its file-friendly name and its title.
pub struct Chart {
    pub name: &'static str,
    pub title: String,
    pub svg: String,
}

/// Every chart that applies to the outcome.
pub fn all(o: &Outcome) -> Vec<Chart> {
    let mut out = vec![
        criteria(o),
        sizes(o),
        silhouettes(o),
        heat_map(o),
        projection(o),
    ];
    if let Some(d) = dendrogram(o) {
        out.push(d);
    }
    out
}

fn colour(segment: usize) -> &'static str {
    SEGMENT_COLOURS[segment % SEGMENT_COLOURS.len()]
}

fn text(x: f64, y: f64, s: impl Into<String>, anchor: &str) -> Text {
    Text::new(s.into())
        .set("x", x)
        .set("y", y)
        .set("text-anchor", anchor)
        .set("style", FONT)
        .set("fill", INK)
}

fn line(x1: f64, y1: f64, x2: f64, y2: f64, stroke: &str) -> Line {
    Line::new()
        .set("x1", x1)
        .set("y1", y1)
        .set("x2", x2)
        .set("y2", y2)
        .set("stroke", stroke)
        .set("stroke-width", 1)
}

fn document(w: f64, h: f64, title: &str) -> Document {
    Document::new()
        .set("viewBox", (0, 0, w, h))
        .set("width", w)
        .set("height", h)
        .set("role", "img")
        .add(Title::new(title.to_string()))
        .add(
            Rectangle::new()
                .set("width", w)
                .set("height", h)
                .set("fill", "#ffffff"),
        )
        .add(text(w / 2.0, 18.0, title, "middle").set(
            "style",
            "font-family:sans-serif;font-size:13px;font-weight:bold",
        ))
}

fn fmt(v: f64) -> String {
    crate::text::short_grouped(v)
}

/// A linear scale from a data range to pixels.
#[derive(Clone, Copy)]
struct Scale {
    lo: f64,
    hi: f64,
    from: f64,
    to: f64,
}

impl Scale {
    fn new(lo: f64, hi: f64, from: f64, to: f64) -> Scale {
        let (lo, hi) = if hi > lo {
            (lo, hi)
        } else {
            (lo - 0.5, lo + 0.5)
        };
        Scale { lo, hi, from, to }
    }

    fn at(&self, v: f64) -> f64 {
        self.from + (v - self.lo) / (self.hi - self.lo) * (self.to - self.from)
    }
}

fn range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        })
}

/// Each criterion against k, one small panel each, the chosen k marked.
pub fn criteria(o: &Outcome) -> Chart {
    type Pick = fn(&crate::run::SweepRow) -> Option<f64>;
    let mut panels: Vec<(&str, Pick)> = vec![
        (
            if o.plan.own_measure() {
                "within (lower fits closer)"
            } else {
                "within SS (lower fits closer)"
            },
            |r| Some(r.within_ss),
        ),
        ("silhouette (higher is better)", |r| Some(r.silhouette)),
        ("Calinski-Harabasz (higher)", |r| Some(r.calinski_harabasz)),
        ("Davies-Bouldin (lower)", |r| Some(r.davies_bouldin)),
    ];
    if o.sweep.iter().any(|r| r.gap.is_some()) {
        panels.push(("gap statistic (1-SE rule)", |r| r.gap.map(|g| g.0)));
    }
    if o.sweep.iter().any(|r| r.stability.is_some()) {
        panels.push(("stability (higher)", |r| r.stability));
    }
    let (pw, ph) = (300.0, 170.0);
    let cols = 2.0;
    let rows = (panels.len() as f64 / cols).ceil();
    let (w, h) = (pw * cols + 20.0, ph * rows + 40.0);
    let title = format!("evidence for k (chosen: k = {})", o.chosen);
    let mut doc = document(w, h, &title);
    let ks: Vec<f64> = o.sweep.iter().map(|r| r.k as f64).collect();
    let (k0, k1) = range(ks.iter().copied());
    for (i, (name, pick)) in panels.iter().enumerate() {
        let ox = 10.0 + (i as f64 % cols) * pw;
        let oy = 30.0 + (i as f64 / cols).floor() * ph;
        let vals: Vec<Option<f64>> = o.sweep.iter().map(pick).collect();
        let (v0, v1) = range(vals.iter().flatten().copied());
        let xs = Scale::new(k0, k1, ox + 50.0, ox + pw - 20.0);
        let ys = Scale::new(v0, v1, oy + ph - 35.0, oy + 25.0);
        let mut g = Group::new()
            .add(text(ox + pw / 2.0, oy + 14.0, *name, "middle"))
            .add(line(xs.from, ys.from, xs.to, ys.from, INK))
            .add(line(xs.from, ys.from, xs.from, ys.to, INK))
            .add(text(xs.from - 4.0, ys.from, fmt(v0), "end"))
            .add(text(xs.from - 4.0, ys.to + 8.0, fmt(v1), "end"));
        for &k in &ks {
            g = g.add(text(xs.at(k), ys.from + 14.0, format!("{k}"), "middle"));
        }
        // The chosen k by line, shape and word, not by colour alone, so
        // that it survives a greyscale print.
        let chosen_x = xs.at(o.chosen as f64);
        g = g
            .add(line(chosen_x, ys.from, chosen_x, ys.to, CHOSEN).set("stroke-dasharray", "4 3"))
            .add(text(chosen_x + 9.0, ys.to + 8.0, "chosen", "start"));
        g = g.add(trace(&xs, &ys, &ks, &vals));
        for (r, v) in o.sweep.iter().zip(&vals) {
            if let Some(v) = v.filter(|v| v.is_finite()) {
                g = g.add(k_point(
                    r.k,
                    r.k == o.chosen,
                    xs.at(r.k as f64),
                    ys.at(v),
                    v,
                ));
            }
        }
        doc = doc.add(g);
    }
    Chart {
        name: "criteria",
        title,
        svg: doc.to_string(),
    }
}

/// A criterion's line over k, through its finite values.
fn trace(xs: &Scale, ys: &Scale, ks: &[f64], vals: &[Option<f64>]) -> Polyline {
    let pts: String = ks
        .iter()
        .zip(vals)
        .filter_map(|(&k, v)| v.filter(|v| v.is_finite()).map(|v| (xs.at(k), ys.at(v))))
        .map(|(x, y)| format!("{x:.1},{y:.1}"))
        .collect::<Vec<_>>()
        .join(" ");
    Polyline::new()
        .set("points", pts)
        .set("fill", "none")
        .set("stroke", SEGMENT_COLOURS[0])
        .set("stroke-width", 2)
}

/// One k's point on a criterion's panel: the chosen k a large open ring,
/// the others small and filled, so the choice reads in greyscale too.
fn k_point(k: usize, chosen: bool, x: f64, y: f64, v: f64) -> Circle {
    let (radius, fill, stroke) = if chosen {
        (6.0, "#ffffff", INK)
    } else {
        (3.0, SEGMENT_COLOURS[0], SEGMENT_COLOURS[0])
    };
    Circle::new()
        .set("cx", x)
        .set("cy", y)
        .set("r", radius)
        .set("fill", fill)
        .set("stroke", stroke)
        .set("stroke-width", if chosen { 2.5 } else { 1.0 })
        .add(Title::new(format!("k = {k}: {}", fmt(v))))
}

/// Horizontal bars, one per segment, with a value label.
fn bars(
    title: &str,
    name: &'static str,
    o: &Outcome,
    value: impl Fn(usize) -> f64,
    label: impl Fn(usize) -> String,
    lo: f64,
    hi: f64,
) -> Chart {
    let k = o.profiles.len();
    let (w, h) = (640.0, 50.0 + 26.0 * k as f64);
    let mut doc = document(w, h, title);
    let xs = Scale::new(lo, hi, 190.0, w - 70.0);
    for (i, p) in o.profiles.iter().enumerate() {
        let y = 34.0 + 26.0 * i as f64;
        let v = value(i);
        let (a, b) = (xs.at(0.0_f64.max(lo)), xs.at(v));
        let name = format!(
            "{} {}",
            p.segment.unwrap_or(i + 1),
            p.label.clone().unwrap_or_default()
        );
        doc = doc
            .add(text(182.0, y + 13.0, name, "end"))
            .add(
                Rectangle::new()
                    .set("x", a.min(b))
                    .set("y", y)
                    .set("width", (b - a).abs().max(1.0))
                    .set("height", 18)
                    .set("fill", colour(i)),
            )
            .add(text(a.max(b) + 4.0, y + 13.0, label(i), "start"));
    }
    Chart {
        name,
        title: title.to_string(),
        svg: doc.to_string(),
    }
}

pub fn sizes(o: &Outcome) -> Chart {
    // With record weights, bars measure the weighted members.
    let size = |i: usize| {
        let p = &o.profiles[i];
        p.weighted.unwrap_or(p.size as f64)
    };
    let most = (0..o.profiles.len()).map(size).fold(1.0, f64::max);
    let shown = |i: usize| {
        let p = &o.profiles[i];
        match p.weighted {
            Some(w) => crate::text::members(w),
            None => crate::text::thousands(p.size),
        }
    };
    bars(
        if o.overall.weighted.is_some() {
            "segment sizes (weighted members)"
        } else {
            "segment sizes"
        },
        "sizes",
        o,
        size,
        |i| {
            format!(
                "{} ({})",
                shown(i),
                super::people::share(o.profiles[i].share)
            )
        },
        0.0,
        most,
    )
}

/// The silhouette chart: for each segment, its records' silhouettes from
/// highest to lowest as a filled profile (each segment's height in
/// proportion to its size), the overall mean as a dashed line.
pub fn silhouettes(o: &Outcome) -> Chart {
    let total: usize = o.silhouettes.iter().map(Vec::len).sum::<usize>().max(1);
    let lo = o
        .silhouettes
        .iter()
        .flatten()
        .copied()
        .fold(0.0_f64, f64::min)
        .max(-1.0);
    let (w, body) = (700.0, 380.0);
    let gap = 8.0;
    let h = 60.0 + body + gap * o.silhouettes.len() as f64;
    let title = "silhouette of every record, by segment (1: well inside its segment, 0: on a border, below 0: nearer another)";
    let mut doc = document(w, h, "silhouette of every record, by segment");
    let xs = Scale::new(lo, 1.0, 200.0, w - 30.0);
    let zero = xs.at(0.0);
    let mut y = 36.0;
    for (s, values) in o.silhouettes.iter().enumerate() {
        let bh = (body * values.len() as f64 / total as f64).max(10.0);
        // At most 150 points per profile: evenly spaced ranks.
        let m = values.len().clamp(1, 150);
        let mut pts = vec![format!("{zero:.1},{y:.1}")];
        for t in 0..m {
            let idx = if m == 1 {
                0
            } else {
                t * (values.len() - 1) / (m - 1)
            };
            let v = values.get(idx).copied().unwrap_or(0.0);
            let yy = y + bh * (t as f64 + 0.5) / m as f64;
            pts.push(format!("{:.1},{yy:.1}", xs.at(v)));
        }
        pts.push(format!("{zero:.1},{:.1}", y + bh));
        let mean = o.profiles.get(s).and_then(|p| p.silhouette).unwrap_or(0.0);
        let name = format!(
            "{} {}",
            o.profiles.get(s).and_then(|p| p.segment).unwrap_or(s + 1),
            o.profiles
                .get(s)
                .and_then(|p| p.label.clone())
                .unwrap_or_default()
        );
        doc = doc
            .add(
                svg::node::element::Polygon::new()
                    .set("points", pts.join(" "))
                    .set("fill", colour(s))
                    .add(Title::new(format!("{name}: mean {mean:.3}"))),
            )
            .add(text(
                192.0,
                y + bh / 2.0 + 4.0,
                format!("{name} ({mean:.2})"),
                "end",
            ));
        y += bh + gap;
    }
    doc = doc.add(line(zero, 30.0, zero, y, INK));
    if let Some(r) = o.sweep.iter().find(|r| r.k == o.chosen) {
        let mx = xs.at(r.silhouette);
        doc = doc
            .add(line(mx, 30.0, mx, y, SEGMENT_COLOURS[1]).set("stroke-dasharray", "5 3"))
            .add(text(
                mx + 4.0,
                30.0,
                format!("mean {:.3}", r.silhouette),
                "start",
            ));
    }
    for v in [lo, 0.0, 0.5, 1.0] {
        if v >= lo && (v == 0.0 || (v - 0.0).abs() > 0.1) {
            doc = doc.add(text(xs.at(v), h - 6.0, fmt(v), "middle"));
        }
    }
    Chart {
        name: "silhouettes",
        title: title.to_string(),
        svg: doc.to_string(),
    }
}

/// Blue (below) through white to amber (above), by standardised difference
/// clamped at ±2.
fn diverging(v: f64) -> String {
    let t = (v / 2.0).clamp(-1.0, 1.0);
    let (r, g, b) = if t < 0.0 {
        (44.0, 111.0, 176.0)
    } else {
        (224.0, 148.0, 47.0)
    };
    let a = t.abs();
    let mix = |c: f64| (255.0 + (c - 255.0) * a).round() as u8;
    format!("#{:02x}{:02x}{:02x}", mix(r), mix(g), mix(b))
}

/// Room for a text of `chars` characters at the charts' font size, in
/// pixels (a generous average glyph width for sans-serif at 11 px).
fn text_width(chars: usize) -> f64 {
    6.4 * chars as f64
}

/// Each segment's standardised difference per feature, a cell per pair
/// with its signed value written in it, so the sign reads without colour;
/// features by their `call` names. The label room grows with the longest
/// name, so no name is cut.
pub fn heat_map(o: &Outcome) -> Chart {
    let features: Vec<&str> = o
        .prepared
        .features
        .iter()
        .map(|f| super::people::name(&o.plan, &f.column))
        .collect();
    let rows: Vec<String> = o
        .profiles
        .iter()
        .enumerate()
        .map(|(i, p)| {
            format!(
                "{} {}",
                p.segment.unwrap_or(i + 1),
                p.label.clone().unwrap_or_default()
            )
        })
        .collect();
    let longest = |v: &mut dyn Iterator<Item = usize>| v.max().unwrap_or(0);
    let (cw, ch) = (64.0, 26.0);
    let left = (text_width(longest(&mut rows.iter().map(|r| r.chars().count()))) + 16.0).max(170.0);
    // Column names are turned 40 degrees: their height is sin 40° of
    // their width.
    let top = (text_width(longest(&mut features.iter().map(|f| f.chars().count()))) * 0.643 + 20.0)
        .max(110.0);
    let w = left + cw * features.len() as f64 + 20.0;
    let h = top + ch * o.profiles.len() as f64 + 70.0;
    let title =
        "how segments differ (standardised difference from all records, after the transform)";
    let mut doc = document(w.max(560.0), h, title);
    for (j, f) in features.iter().enumerate() {
        let x = left + cw * j as f64 + cw / 2.0;
        doc = doc.add(
            text(x, top - 8.0, *f, "start")
                .set("transform", format!("rotate(-40 {x} {})", top - 8.0)),
        );
    }
    for (i, p) in o.profiles.iter().enumerate() {
        let y = top + ch * i as f64;
        doc = doc.add(text(left - 6.0, y + 17.0, rows[i].as_str(), "end"));
        for (j, fs) in p.features.iter().enumerate() {
            let x = left + cw * j as f64;
            doc = doc
                .add(
                    Rectangle::new()
                        .set("x", x)
                        .set("y", y)
                        .set("width", cw - 2.0)
                        .set("height", ch - 2.0)
                        .set("fill", diverging(fs.std_diff))
                        .add(Title::new(format!(
                            "{}: mean {} ({} sd)",
                            features[j],
                            fmt(fs.mean),
                            super::people::signed(fs.std_diff, 2)
                        ))),
                )
                .add(text(
                    x + cw / 2.0,
                    y + 17.0,
                    super::people::signed(fs.std_diff, 1),
                    "middle",
                ));
        }
    }
    heat_legend(doc, left, h - 52.0, title)
}

/// The heat map's key: five swatches from -2 to +2 with their values, and
/// what they mean in words that hold in greyscale too.
fn heat_legend(mut doc: Document, left: f64, y: f64, title: &str) -> Chart {
    for (i, v) in [-2.0, -1.0, 0.0, 1.0, 2.0].into_iter().enumerate() {
        let x = left + 44.0 * i as f64;
        doc = doc
            .add(
                Rectangle::new()
                    .set("x", x)
                    .set("y", y)
                    .set("width", 40.0)
                    .set("height", 16.0)
                    .set("fill", diverging(v))
                    .set("stroke", GRID),
            )
            .add(text(
                x + 20.0,
                y + 12.0,
                super::people::signed(v, 0),
                "middle",
            ));
    }
    doc = doc
        .add(text(
            left,
            y + 30.0,
            "the stronger the shade, the further from the average of all records;",
            "start",
        ))
        .add(text(
            left,
            y + 44.0,
            "minus: below it (blue), plus: above it (amber)",
            "start",
        ));
    Chart {
        name: "heat-map",
        title: title.to_string(),
        svg: doc.to_string(),
    }
}

/// Records on their first two principal components (of the clustered
/// space), coloured and shaped by segment; at most `MAX_POINTS` records,
/// every n-th in record order.
pub fn projection(o: &Outcome) -> Chart {
    const MAX_POINTS: usize = 3000;
    let x = o.prepared.matrix.view();
    let p = pca::principal_components(x, 2);
    let scores = p.project(x);
    let n = scores.nrows();
    let step = n.div_ceil(MAX_POINTS).max(1);
    // Same divisor as the components' variances, so the shares add up.
    let total_var = pca::total_variance(x);
    let share = |c: usize| {
        p.variance
            .get(c)
            .map_or(0.0, |v| v / total_var.max(1e-300) * 100.0)
    };
    let (w, h) = (780.0, 480.0);
    let title = format!(
        "records on their first two principal components ({} of {} shown)",
        crate::text::thousands(n.div_ceil(step)),
        crate::text::thousands(n)
    );
    let mut doc = document(w, h, &title);
    let cx = |i| {
        if scores.ncols() > 0 {
            scores[[i, 0]]
        } else {
            0.0
        }
    };
    let cy = |i| {
        if scores.ncols() > 1 {
            scores[[i, 1]]
        } else {
            0.0
        }
    };
    let (x0, x1) = range((0..n).map(cx));
    let (y0, y1) = range((0..n).map(cy));
    let xs = Scale::new(x0, x1, 60.0, w - 230.0);
    let ys = Scale::new(y0, y1, h - 50.0, 40.0);
    doc = doc
        .add(line(xs.from, ys.from, xs.to, ys.from, INK))
        .add(line(xs.from, ys.from, xs.from, ys.to, INK))
        .add(text(
            (xs.from + xs.to) / 2.0,
            h - 15.0,
            format!("first component ({:.0} % of the variance)", share(0)),
            "middle",
        ))
        .add(
            text(
                18.0,
                (ys.from + ys.to) / 2.0,
                format!("second component ({:.0} %)", share(1)),
                "middle",
            )
            .set(
                "transform",
                format!("rotate(-90 18 {})", (ys.from + ys.to) / 2.0),
            ),
        );
    let mut points = Group::new().set("fill-opacity", 0.75);
    // Markers follow the segment's number, so a segment kept from last
    // run keeps its colour and shape.
    for (i, a) in o.assignments.iter().enumerate().step_by(step) {
        let s = a.segment.saturating_sub(1);
        points = points.add(marker(s, xs.at(cx(i)), ys.at(cy(i)), 2.6));
    }
    doc = segment_legend(doc.add(points), o, w);
    Chart {
        name: "projection",
        title,
        svg: doc.to_string(),
    }
}

/// Each segment's marker and name, in a column at the chart's right.
fn segment_legend(mut doc: Document, o: &Outcome, w: f64) -> Document {
    for (s, prof) in o.profiles.iter().enumerate() {
        let y = 50.0 + 20.0 * s as f64;
        let number = prof.segment.unwrap_or(s + 1);
        doc = doc
            .add(marker(number - 1, w - 200.0, y - 4.0, 4.0))
            .add(text(
                w - 191.0,
                y,
                format!("{number} {}", prof.label.clone().unwrap_or_default()),
                "start",
            ));
    }
    doc
}

/// A segment's marker: its colour and one of four shapes.
fn marker(segment: usize, x: f64, y: f64, r: f64) -> Group {
    let fill = colour(segment);
    let shape = match segment % 4 {
        0 => svg::node::element::Element::from(Circle::new().set("cx", x).set("cy", y).set("r", r)),
        1 => Rectangle::new()
            .set("x", x - r)
            .set("y", y - r)
            .set("width", 2.0 * r)
            .set("height", 2.0 * r)
            .into(),
        2 => svg::node::element::Polygon::new()
            .set(
                "points",
                format!(
                    "{x:.1},{:.1} {:.1},{:.1} {:.1},{:.1}",
                    y - r * 1.2,
                    x - r * 1.1,
                    y + r * 0.9,
                    x + r * 1.1,
                    y + r * 0.9
                ),
            )
            .into(),
        _ => svg::node::element::Polygon::new()
            .set(
                "points",
                format!(
                    "{x:.1},{:.1} {:.1},{y:.1} {x:.1},{:.1} {:.1},{y:.1}",
                    y - r * 1.3,
                    x + r * 1.3,
                    y + r * 1.3,
                    x - r * 1.3
                ),
            )
            .into(),
    };
    Group::new().set("fill", fill).add(shape)
}

/// The top of the tree: its last merges, the groups below them drawn as
/// leaves with their record counts, and the cut at the chosen k.
pub fn dendrogram(o: &Outcome) -> Option<Chart> {
    let t = o.tree.as_ref()?;
    let d = &t.dendrogram;
    let n = d.n;
    let shown = d.merges.len().min(40);
    if shown == 0 {
        return None;
    }
    let first = d.merges.len() - shown;
    // Groups formed by the merges below the shown ones are leaves here.
    let size: Vec<usize> = std::iter::repeat_n(1, n)
        .chain(d.merges.iter().map(|m| m.size))
        .collect();
    let order = leaf_order(d, first);
    let (w, h) = ((40.0 + 22.0 * order.len() as f64 + 40.0).max(520.0), 420.0);
    let title = format!(
        "the top {shown} merges of the tree ({} linkage), cut into {} segments",
        t.linkage.name(),
        o.chosen
    );
    let mut doc = document(w, h, &title);
    let top = d.merges.last().map_or(1.0, |m| m.height);
    let below = d.merges.get(first.saturating_sub(1));
    let base = below.map_or(0.0, |m| m.height).min(top);
    let ys = Scale::new(base, top, h - 60.0, 40.0);
    let xs = |pos: usize| 50.0 + 22.0 * pos as f64;
    let mut x_of = std::collections::HashMap::new();
    let mut y_of = std::collections::HashMap::new();
    for (pos, &id) in order.iter().enumerate() {
        x_of.insert(id, xs(pos));
        y_of.insert(id, ys.from);
        doc = doc.add(
            text(xs(pos), h - 44.0, format!("{}", size[id]), "middle")
                .set("transform", format!("rotate(-60 {} {})", xs(pos), h - 44.0)),
        );
    }
    for (i, m) in d.merges.iter().enumerate().skip(first) {
        let id = n + i;
        let (xa, xb) = (x_of[&m.a], x_of[&m.b]);
        let (ya, yb) = (y_of[&m.a], y_of[&m.b]);
        let y = ys.at(m.height);
        doc = doc.add(
            Polyline::new()
                .set(
                    "points",
                    format!("{xa:.1},{ya:.1} {xa:.1},{y:.1} {xb:.1},{y:.1} {xb:.1},{yb:.1}"),
                )
                .set("fill", "none")
                .set("stroke", SEGMENT_COLOURS[0])
                .set("stroke-width", 1.5),
        );
        x_of.insert(id, (xa + xb) / 2.0);
        y_of.insert(id, y);
    }
    if let Some(y) = cut_height(d, o.chosen, base, top) {
        doc = doc
            .add(
                line(30.0, ys.at(y), w - 20.0, ys.at(y), SEGMENT_COLOURS[1])
                    .set("stroke-dasharray", "6 4")
                    .set("stroke-width", 2),
            )
            .add(text(
                w - 20.0,
                ys.at(y) - 4.0,
                format!("cut: {} segments", o.chosen),
                "end",
            ));
    }
    doc = doc.add(text(
        50.0,
        h - 8.0,
        "leaves: groups below the merges shown, with their record counts",
        "start",
    ));
    Some(Chart {
        name: "dendrogram",
        title,
        svg: doc.to_string(),
    })
}

/// The ids shown as leaves when the merges from `first` on are drawn: depth
/// first from the root, the first-named side first.
fn leaf_order(d: &crate::engine::tree::Dendrogram, first: usize) -> Vec<usize> {
    let n = d.n;
    let mut order = Vec::new();
    let mut stack = vec![n + d.merges.len() - 1];
    while let Some(id) = stack.pop() {
        if id < n + first {
            order.push(id);
        } else {
            let m = &d.merges[id - n];
            stack.push(m.b);
            stack.push(m.a);
        }
    }
    order
}

/// The height of the cut into `k` segments: between the last merge kept
/// and the first undone, within the drawn range; `None` for a k the tree
/// cannot be cut at.
fn cut_height(d: &crate::engine::tree::Dendrogram, k: usize, base: f64, top: f64) -> Option<f64> {
    if k < 2 || k > d.merges.len() + 1 {
        return None;
    }
    let kept = d
        .merges
        .get(d.merges.len() + 1 - k - 1)
        .map_or(base, |m| m.height);
    let undone = d.merges[d.merges.len() + 1 - k].height;
    Some(((kept + undone) / 2.0).clamp(base, top))
}

#[cfg(test)]
mod greyscale_tests {
    use super::SEGMENT_COLOURS;

    /// Perceived lightness, CIELAB L* (0 black to 100 white), from the
    /// relative luminance of the WCAG 2 definition (sRGB linearised,
    /// weighted 0.2126, 0.7152, 0.0722).
    fn lightness(hex: &str) -> f64 {
        let channel = |i: usize| {
            let c = u8::from_str_radix(&hex[i..i + 2], 16).unwrap() as f64 / 255.0;
            if c <= 0.04045 {
                c / 12.92
            } else {
                ((c + 0.055) / 1.055).powf(2.4)
            }
        };
        let y = 0.2126 * channel(1) + 0.7152 * channel(3) + 0.0722 * channel(5);
        if y > 0.008856 {
            116.0 * y.cbrt() - 16.0
        } else {
            903.3 * y
        }
    }

    /// The grey most printers and greyscale conversions make of a colour:
    /// luma on the sRGB values (ITU-R BT.601 weights), 0 to 255.
    fn luma(hex: &str) -> f64 {
        let c = |i: usize| u8::from_str_radix(&hex[i..i + 2], 16).unwrap() as f64;
        0.299 * c(1) + 0.587 * c(3) + 0.114 * c(5)
    }

    #[test]
    fn segments_stay_apart_in_greyscale() {
        let l: Vec<f64> = SEGMENT_COLOURS.iter().map(|c| lightness(c)).collect();
        let y: Vec<f64> = SEGMENT_COLOURS.iter().map(|c| luma(c)).collect();
        for a in 0..5 {
            for b in a + 1..5 {
                let which = format!("segments {} and {}", a + 1, b + 1);
                assert!((l[a] - l[b]).abs() >= 12.0, "{which}: L*");
                assert!((y[a] - y[b]).abs() >= 30.0, "{which}: printed grey");
            }
        }
        // Markers repeat every four segments: those pairs differ strongly.
        for a in 0..4 {
            assert!(
                (l[a] - l[a + 4]).abs() >= 25.0,
                "segments {} and {}",
                a + 1,
                a + 5
            );
        }
        // Any two colours close in lightness have different shapes.
        for a in 0..8 {
            for b in a + 1..8 {
                if (l[a] - l[b]).abs() < 10.0 {
                    assert_ne!(a % 4, b % 4, "segments {} and {}", a + 1, b + 1);
                }
            }
        }
    }
}
