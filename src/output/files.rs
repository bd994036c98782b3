//! Output files: assignments, profiles (CSV or JSON) and centroids, built in
//! memory, then written atomically.
//!
//! Numbers in CSV files carry six decimals; JSON numbers are written in
//! full (shortest form that reads back to the same value). Both are fixed by
//! the values alone, so identical results give identical bytes.

use crate::plan::{OutputKind, OutputPlan};
use crate::run::{Assignments, Outcome, Profile, RunError};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// A file's path and its full contents.
pub struct Rendered {
    pub path: PathBuf,
    pub shown: String,
    pub bytes: Vec<u8>,
    /// Cells written with a leading apostrophe because a spreadsheet
    /// would otherwise run them as a formula (see [`spreadsheet_safe`]).
    pub defused: usize,
    /// Cells of a machine file (assignments, hand-off) that a spreadsheet
    /// would run as a formula, written exactly all the same (see
    /// [`Cells::Exact`]): the run warns about them.
    pub formula_like: usize,
    /// A file written beside its target while rendering (the assignments
    /// of a run in passes, too large to hold): `bytes` is then empty.
    pub staged: Option<Staged>,
}

/// A rendered file already written, at `path`, with the SHA-256 of its
/// bytes; removed unless its set renames it into place.
#[derive(Debug)]
pub struct Staged {
    pub path: PathBuf,
    pub sha256: String,
}

impl Drop for Staged {
    fn drop(&mut self) {
        // After the set has renamed it, there is nothing left to remove.
        let _ = std::fs::remove_file(&self.path);
    }
}

/// How a CSV file's cells are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cells {
    /// For people reading the file in a spreadsheet (profiles, centres,
    /// merges): a cell that would run as a formula gets a leading `'`.
    SpreadsheetSafe,
    /// For machines (the assignments `previous`, `compare` and `assign`
    /// read back, the hand-off a CRM imports): every cell exactly as the
    /// data and the recipe have it, because a key with an apostrophe added
    /// never matches the customer it names. Cells a spreadsheet would run
    /// are counted, and the run warns about them by file.
    Exact,
}

impl Rendered {
    /// A file with nothing defused (not a CSV built from data cells).
    pub fn plain(path: PathBuf, shown: String, bytes: Vec<u8>) -> Rendered {
        Rendered {
            path,
            shown,
            bytes,
            defused: 0,
            formula_like: 0,
            staged: None,
        }
    }
}

/// Builds every output the plan names.
/// What the outputs say about where a run came from: the recipe's text and
/// the digests of the data it read, computed once per run.
pub struct Sources<'a> {
    pub recipe_text: &'a str,
    pub inputs: &'a [super::record::InputDigest],
}

pub fn render_all(o: &Outcome, sources: &Sources<'_>) -> Result<Vec<Rendered>, RunError> {
    let mut files: Vec<Rendered> = Vec::with_capacity(o.plan.outputs.len());
    for out in &o.plan.outputs {
        files.push(match (&o.in_passes, out.kind) {
            (Some(p), OutputKind::Assignments) => streamed_assignments(o, p, out)?,
            _ => render(o, out, sources),
        });
    }
    // Each chart of a report also as an SVG file of its own, for slides:
    // `REPORT-charts/NN-name.svg` beside the report.
    for out in o
        .plan
        .outputs
        .iter()
        .filter(|p| p.kind == OutputKind::Report)
    {
        files.extend(chart_files(o, &out.resolved, &out.path));
    }
    Ok(files)
}

/// The assignments of a run in passes, written as they are read, beside
/// their target ([`super::set::staged_path`]), hashed on the way.
fn streamed_assignments(
    o: &Outcome,
    p: &crate::run::passes::InPasses,
    out: &OutputPlan,
) -> Result<Rendered, RunError> {
    use sha2::Digest;
    use std::io::Write;
    let failed = |e: std::io::Error| RunError::Write {
        path: out.path.clone(),
        reason: e.to_string(),
    };
    let mut staged = Staged {
        path: super::set::staged_path(&std::path::absolute(&out.resolved).map_err(failed)?),
        sha256: String::new(),
    };
    if let Some(dir) = staged.path.parent() {
        std::fs::create_dir_all(dir).map_err(failed)?;
    }
    /// A file writer that hashes what passes through.
    struct Hashing<W: Write>(W, sha2::Sha256);
    impl<W: Write> Write for Hashing<W> {
        fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
            let n = self.0.write(buf)?;
            self.1.update(&buf[..n]);
            Ok(n)
        }
        fn flush(&mut self) -> std::io::Result<()> {
            self.0.flush()
        }
    }
    let file = std::fs::File::create(&staged.path).map_err(failed)?;
    let mut w = Hashing(std::io::BufWriter::new(file), sha2::Sha256::new());
    let label = |s: usize| label_of(o, s);
    let formula_like = p
        .write_assignments(&o.plan.input.key, &label, &mut w)
        .map_err(|e| match e {
            RunError::Write { reason, .. } => RunError::Write {
                path: out.path.clone(),
                reason,
            },
            other => other,
        })?;
    w.flush().map_err(failed)?;
    staged.sha256 = crate::text::hex(&w.1.finalize());
    Ok(Rendered {
        path: out.resolved.clone(),
        shown: out.path.clone(),
        bytes: Vec::new(),
        defused: 0,
        formula_like,
        staged: Some(staged),
    })
}

/// The report's charts as files in a folder named after it.
fn chart_files(o: &Outcome, report: &Path, shown: &str) -> Vec<Rendered> {
    let stem = report
        .file_stem()
        .map_or("report".into(), |s| s.to_string_lossy().into_owned());
    let folder = report.with_file_name(format!("{stem}-charts"));
    let shown_folder = Path::new(shown).with_file_name(format!("{stem}-charts"));
    super::charts::all(o)
        .into_iter()
        .enumerate()
        .map(|(i, c)| {
            let name = format!("{:02}-{}.svg", i + 1, c.name);
            let mut bytes = b"<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n".to_vec();
            bytes.extend(c.svg.into_bytes());
            bytes.push(b'\n');
            Rendered::plain(
                folder.join(&name),
                shown_folder.join(&name).display().to_string(),
                bytes,
            )
        })
        .collect()
}

fn render(o: &Outcome, out: &OutputPlan, sources: &Sources<'_>) -> Rendered {
    let csv = match out.kind {
        OutputKind::Assignments => assignments(o),
        OutputKind::Handoff => handoff(o),
        OutputKind::ProfilesCsv => profiles_csv(o),
        OutputKind::Centroids => centroids(o),
        OutputKind::Merges => merges(o),
        other => Csv {
            bytes: render_other(o, other, sources),
            defused: 0,
            formula_like: 0,
        },
    };
    Rendered {
        path: out.resolved.clone(),
        shown: out.path.clone(),
        bytes: csv.bytes,
        defused: csv.defused,
        formula_like: csv.formula_like,
        staged: None,
    }
}

/// The outputs that are not CSV tables.
fn render_other(o: &Outcome, kind: OutputKind, sources: &Sources<'_>) -> Vec<u8> {
    match kind {
        OutputKind::ProfilesJson => profiles_json(o),
        OutputKind::Model => {
            let sha = sources
                .inputs
                .iter()
                .find(|i| i.role == "input")
                .map(|i| i.sha256.clone())
                .unwrap_or_default();
            let mut model = crate::run::model::from_outcome(o, sha);
            model.provenance.settings = crate::syntax::shaping_statements(sources.recipe_text);
            crate::run::model::to_bytes(&model)
        }
        OutputKind::Report => super::report::render(o, sources),
        OutputKind::Scoring => {
            let model = crate::run::model::from_outcome(o, String::new());
            super::sql::scoring_query(&model, &table_name(o), &o.plan.name).into_bytes()
        }
        OutputKind::Rules => {
            super::sql::rules_query(&o.rules, &o.plan.input.key, &table_name(o), &o.plan.name)
                .into_bytes()
        }
        OutputKind::Newick => newick(o),
        // The CSV kinds are rendered by `render`.
        OutputKind::Assignments
        | OutputKind::ProfilesCsv
        | OutputKind::Centroids
        | OutputKind::Merges
        | OutputKind::Handoff => Vec::new(),
    }
}

/// The table the SQL outputs read: named after the input file, or the
/// input's own table (without its schema).
fn table_name(o: &Outcome) -> String {
    if let Some(source) = o.plan.input.source() {
        return match source.is_table() {
            true => source
                .text
                .rsplit('.')
                .next()
                .unwrap_or("records")
                .to_string(),
            false => "recipe_input".into(),
        };
    }
    Path::new(&o.plan.input.path)
        .file_stem()
        .map_or("records".into(), |s| s.to_string_lossy().into_owned())
}

fn f6(v: f64) -> String {
    if v.is_finite() {
        format!("{v:.6}")
    } else {
        String::new()
    }
}

/// A CSV file's bytes, and its cells that a spreadsheet would run as a
/// formula: made safe (`defused`) or kept exactly (`formula_like`), as
/// its [`Cells`] say.
pub struct Csv {
    pub bytes: Vec<u8>,
    pub defused: usize,
    pub formula_like: usize,
}

/// A CSV file's bytes, cells written as `cells` says.
/// Rows come one at a time, so a file of a million records is never held
/// twice (as rows and as bytes).
fn csv_bytes(rows: impl IntoIterator<Item = Vec<String>>, cells: Cells) -> Csv {
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    let mut risky = 0;
    for r in rows {
        let written: Vec<std::borrow::Cow<'_, str>> = r
            .iter()
            .map(|c| {
                let safe = spreadsheet_safe(c);
                risky += usize::from(matches!(safe, std::borrow::Cow::Owned(_)));
                match cells {
                    Cells::SpreadsheetSafe => safe,
                    Cells::Exact => std::borrow::Cow::Borrowed(c.as_str()),
                }
            })
            .collect();
        // Writing to memory cannot fail.
        let _ = w.write_record(written.iter().map(|c| c.as_bytes()));
    }
    let bytes = w.into_inner().unwrap_or_default();
    match cells {
        Cells::SpreadsheetSafe => Csv {
            bytes,
            defused: risky,
            formula_like: 0,
        },
        Cells::Exact => Csv {
            bytes,
            defused: 0,
            formula_like: risky,
        },
    }
}

/// A cell a spreadsheet will show as text. Spreadsheets run a cell that
/// starts with `=`, `+`, `-` or `@` (and some a tab or carriage return) as
/// a formula, so a key such as `=HYPERLINK(...)` copied from a customer
/// file would run on the marketing team's machine. Common practice (the
/// usual advice on CSV formula injection) is a leading apostrophe, which
/// spreadsheets hide and which keeps the text readable; plain numbers such
/// as `-0.5` are left alone.
pub fn spreadsheet_safe(cell: &str) -> std::borrow::Cow<'_, str> {
    let risky = cell
        .chars()
        .next()
        .is_some_and(|c| matches!(c, '=' | '+' | '-' | '@' | '\t' | '\r'));
    if risky && !is_plain_number(cell) {
        std::borrow::Cow::Owned(format!("'{cell}"))
    } else {
        std::borrow::Cow::Borrowed(cell)
    }
}

/// Digits with an optional sign, point and exponent: what a spreadsheet
/// reads as a number, never as a formula.
fn is_plain_number(cell: &str) -> bool {
    cell.chars()
        .all(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | '+' | 'e' | 'E'))
        && cell.parse::<f64>().is_ok()
}

/// The assignments file's text, as `save assignments` writes it, into
/// `out`: held in memory, or read again in passes for a run in passes.
pub fn write_assignments(o: &Outcome, out: &mut dyn std::io::Write) -> Result<(), RunError> {
    match &o.in_passes {
        Some(p) => p
            .write_assignments(&o.plan.input.key, &|s| label_of(o, s), out)
            .map(|_| ()),
        None => out
            .write_all(&assignments(o).bytes)
            .map_err(|e| RunError::Write {
                path: String::new(),
                reason: e.to_string(),
            }),
    }
}

fn label_of(o: &Outcome, segment: usize) -> String {
    o.plan.labels.get(&segment).cloned().unwrap_or_default()
}

/// What the hand-off says in place of a segment name for a record the run
/// left out.
pub const NO_SEGMENT: &str = "no segment";

/// The hand-off for a CRM or marketing system: one row per input record,
/// in file order, with its key exactly as the input has it, its segment
/// number and name (its label, or `segment N`); a record `missing drop`
/// left out gets no number, [`NO_SEGMENT`] and why, so the CRM does not
/// keep last quarter's segment for it.
fn handoff(o: &Outcome) -> Csv {
    let name = |s: usize| {
        let label = o.profiles.iter().find(|p| p.segment == Some(s));
        super::segment_name(s, label.and_then(|p| p.label.as_deref()))
    };
    let why = |gaps: &[usize]| {
        let names: Vec<String> = gaps
            .iter()
            .map(|&at| match o.plan.features.get(at) {
                Some(f) => f.column.clone(),
                None => o.plan.categories[at - o.plan.features.len()].column.clone(),
            })
            .collect();
        let verb = if names.len() == 1 { "is" } else { "are" };
        format!("{} {verb} blank", crate::text::and_list(&names))
    };
    let header = [
        o.plan.input.key.as_str(),
        "segment",
        "segment_name",
        "no_segment_because",
    ]
    .map(str::to_string)
    .to_vec();
    let left = |l: &crate::run::prepare::LeftOut| {
        vec![
            l.key.clone(),
            String::new(),
            NO_SEGMENT.into(),
            why(&l.gaps),
        ]
    };
    // The left-out and the segmented records merged back into file order.
    let mut left_out = o.prepared.left_out.iter().peekable();
    let mut assigned = o.assignments.iter().enumerate().peekable();
    let body = std::iter::from_fn(move || {
        let next_row = assigned.peek().map(|(i, _)| o.prepared.kept[*i]);
        if let Some(l) = left_out.next_if(|l| next_row.is_none_or(|r| l.row < r)) {
            return Some(left(l));
        }
        let (_, a) = assigned.next()?;
        Some(vec![
            a.key.to_string(),
            a.segment.to_string(),
            name(a.segment),
            String::new(),
        ])
    });
    csv_bytes(std::iter::once(header).chain(body), Cells::Exact)
}

fn assignments(o: &Outcome) -> Csv {
    assignments_csv(&o.plan.input.key, &o.assignments, |s| label_of(o, s))
}

/// The assignments file: key, segment, label, distance, margin. Shared by
/// runs and by scoring with a model, so both write the same bytes.
pub fn assignments_csv(
    key: &str,
    assignments: &Assignments,
    label: impl Fn(usize) -> String,
) -> Csv {
    let header = [key, "segment", "label", "distance", "nearer_by"]
        .map(str::to_string)
        .to_vec();
    let body = assignments.iter().map(|a| {
        vec![
            a.key.to_string(),
            a.segment.to_string(),
            label(a.segment),
            f6(a.distance),
            f6(a.margin),
        ]
    });
    csv_bytes(std::iter::once(header).chain(body), Cells::Exact)
}

/// Column names for category levels: `column=level`.
fn level_names(o: &Outcome) -> Vec<String> {
    o.prepared
        .categories
        .iter()
        .flat_map(|c| c.levels.iter().map(move |l| format!("{}={}", c.column, l)))
        .collect()
}

fn level_shares(p: &Profile) -> Vec<String> {
    p.categories.iter().flatten().map(|&v| f6(v)).collect()
}

fn profiles_csv(o: &Outcome) -> Csv {
    let mut header: Vec<String> = [
        "segment",
        "label",
        "size",
        "share",
        "silhouette",
        "stability",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    // With record weights, the members each segment stands for follow
    // its records.
    let weighted = o.overall.weighted.is_some();
    if weighted {
        header.insert(3, "weighted_members".to_string());
    }
    for f in &o.prepared.features {
        for part in ["mean", "median", "q1", "q3", "std_diff"] {
            header.push(format!("{}_{part}", f.column));
        }
    }
    header.extend(level_names(o));
    for v in &o.values {
        for part in [
            "known",
            "mean",
            "median",
            "q1",
            "q3",
            "total",
            "share_of_total",
        ] {
            header.push(format!("{}_{part}", v.column));
        }
    }
    let mut rows = vec![header];
    for (i, p) in std::iter::once(&o.overall).chain(&o.profiles).enumerate() {
        let mut r = vec![
            p.segment
                .map(|s| s.to_string())
                .unwrap_or_else(|| "all".into()),
            p.label.clone().unwrap_or_default(),
            p.size.to_string(),
            f6(p.share),
            p.silhouette.map(f6).unwrap_or_default(),
            p.stability.map(f6).unwrap_or_default(),
        ];
        if weighted {
            r.insert(3, p.weighted.map(f6).unwrap_or_default());
        }
        for fs in &p.features {
            r.extend([fs.mean, fs.median, fs.q1, fs.q3].map(f6));
            r.push(if p.segment.is_some() {
                f6(fs.std_diff)
            } else {
                String::new()
            });
        }
        r.extend(level_shares(p));
        for v in &o.values {
            let summary = if i == 0 {
                &v.overall
            } else {
                &v.segments[i - 1]
            };
            r.push(summary.known.to_string());
            let opt = |x: Option<f64>| x.map(f6).unwrap_or_default();
            r.extend([summary.mean, summary.median, summary.q1, summary.q3].map(opt));
            r.push(f6(summary.total));
            r.push(opt(summary.share_of_total));
        }
        rows.push(r);
    }
    csv_bytes(rows, Cells::SpreadsheetSafe)
}

fn centroids(o: &Outcome) -> Csv {
    let mut header = vec!["segment".to_string(), "label".to_string()];
    header.extend(o.prepared.features.iter().map(|f| f.column.clone()));
    header.extend(level_names(o));
    let mut rows = vec![header];
    for p in &o.profiles {
        let seg = p.segment.unwrap_or(0);
        let mut r = vec![seg.to_string(), label_of(o, seg)];
        r.extend(p.centre.iter().flatten().map(|&v| f6(v)));
        r.extend(level_shares(p));
        rows.push(r);
    }
    csv_bytes(rows, Cells::SpreadsheetSafe)
}

/// The tree's merge table, one row per merge in order: the step, the two
/// groups joined (a leaf by its name, an earlier merge as `#step`), the
/// height and the size of the new group.
fn merges(o: &Outcome) -> Csv {
    let Some(t) = &o.tree else {
        return csv_bytes(Vec::new(), Cells::SpreadsheetSafe);
    };
    let n = t.dendrogram.n;
    let name = |id: usize| {
        if id < n {
            t.leaf_names[id].clone()
        } else {
            format!("#{}", id - n + 1)
        }
    };
    let mut rows = vec![["step", "first", "second", "height", "size"]
        .iter()
        .map(|s| s.to_string())
        .collect::<Vec<_>>()];
    for (i, m) in t.dendrogram.merges.iter().enumerate() {
        rows.push(vec![
            (i + 1).to_string(),
            name(m.a),
            name(m.b),
            format!("{}", m.height),
            m.size.to_string(),
        ]);
    }
    csv_bytes(rows, Cells::SpreadsheetSafe)
}

fn newick(o: &Outcome) -> Vec<u8> {
    let Some(t) = &o.tree else {
        return Vec::new();
    };
    let mut text = t.dendrogram.newick(&t.leaf_names);
    text.push('\n');
    text.into_bytes()
}

#[derive(Serialize)]
struct JsonProfiles<'a> {
    format: &'static str,
    recipe: &'a str,
    k: usize,
    features: Vec<&'a str>,
    categories: Vec<JsonCategory<'a>>,
    overall: JsonProfile<'a>,
    segments: Vec<JsonProfile<'a>>,
    /// The `tally` columns: all records, then each segment.
    values: &'a [crate::run::values::ValueProfile],
}

#[derive(Serialize)]
struct JsonCategory<'a> {
    column: &'a str,
    levels: &'a [String],
}

#[derive(Serialize)]
struct JsonProfile<'a> {
    segment: Option<usize>,
    label: Option<&'a str>,
    /// The recipe's `brief` of the segment, and its next step.
    #[serde(skip_serializing_if = "Option::is_none")]
    brief: Option<&'a str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    action: Option<&'a str>,
    /// The key of the segment's medoid, a typical member (k-medoids, trees
    /// on Gower's dissimilarity).
    #[serde(skip_serializing_if = "Option::is_none")]
    typical_member: Option<&'a str>,
    size: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    weighted_members: Option<f64>,
    share: f64,
    silhouette: Option<f64>,
    stability: Option<f64>,
    means: Vec<f64>,
    medians: Vec<f64>,
    quartiles: Vec<[f64; 2]>,
    std_diffs: Option<Vec<f64>>,
    centre: Option<&'a [f64]>,
    level_shares: &'a [Vec<f64>],
}

fn json_profile<'a>(p: &'a Profile, o: &'a Outcome) -> JsonProfile<'a> {
    let note = p.segment.and_then(|s| o.plan.briefs.get(&s));
    JsonProfile {
        segment: p.segment,
        label: p.label.as_deref(),
        brief: note.map(|n| n.text.as_str()),
        action: note.and_then(|n| n.action.as_deref()),
        typical_member: p.medoid.as_deref(),
        size: p.size,
        weighted_members: p.weighted,
        share: p.share,
        silhouette: p.silhouette,
        stability: p.stability,
        means: p.features.iter().map(|f| f.mean).collect(),
        medians: p.features.iter().map(|f| f.median).collect(),
        quartiles: p.features.iter().map(|f| [f.q1, f.q3]).collect(),
        std_diffs: p
            .segment
            .map(|_| p.features.iter().map(|f| f.std_diff).collect()),
        centre: p.centre.as_deref(),
        level_shares: &p.categories,
    }
}

fn profiles_json(o: &Outcome) -> Vec<u8> {
    let doc = JsonProfiles {
        format: "assort-profiles/1",
        recipe: &o.plan.name,
        k: o.chosen,
        features: o
            .prepared
            .features
            .iter()
            .map(|f| f.column.as_str())
            .collect(),
        categories: o
            .prepared
            .categories
            .iter()
            .map(|c| JsonCategory {
                column: &c.column,
                levels: &c.levels,
            })
            .collect(),
        overall: json_profile(&o.overall, o),
        segments: o.profiles.iter().map(|p| json_profile(p, o)).collect(),
        values: &o.values,
    };
    let mut bytes = serde_json::to_vec_pretty(&doc).unwrap_or_default();
    bytes.push(b'\n');
    bytes
}

/// Writes `files` as one set (see [`super::set`]), journalled beside the
/// first file; for commands that write outside a recipe's run.
pub fn write_all(files: &[Rendered]) -> Result<(), RunError> {
    let Some(first) = files.first() else {
        return Ok(());
    };
    write_all_journalled(files, &super::set::journal_path(&first.path))
}

/// Writes `files` as one set, journalled at `journal`.
pub fn write_all_journalled(files: &[Rendered], journal: &Path) -> Result<(), RunError> {
    use super::set::Content;
    let set: Vec<(&Path, &str, Content<'_>)> = files
        .iter()
        .map(|f| {
            let content = match &f.staged {
                Some(s) => Content::Staged(&s.path),
                None => Content::Bytes(&f.bytes),
            };
            (f.path.as_path(), f.shown.as_str(), content)
        })
        .collect();
    super::set::write_set(&set, journal)
}

#[cfg(test)]
mod spreadsheet_tests {
    use super::*;

    #[test]
    fn formulas_get_an_apostrophe_and_numbers_do_not() {
        for risky in [
            "=HYPERLINK(\"x\")",
            "+1+1",
            "-2+3",
            "@SUM(A1)",
            "\tx",
            "\rx",
            "-",
            "-inf",
        ] {
            assert_eq!(spreadsheet_safe(risky), format!("'{risky}"), "{risky:?}");
        }
        for plain in ["-0.5", "+12", "-1e-3", "M-0001", "weekly fresh", ""] {
            assert_eq!(spreadsheet_safe(plain), plain, "{plain:?}");
        }
    }

    #[test]
    fn a_csv_counts_the_cells_it_defused() {
        let rows = || {
            vec![
                vec!["key".into(), "segment".into()],
                vec!["=1+1".into(), "-0.25".into()],
            ]
        };
        let csv = csv_bytes(rows(), Cells::SpreadsheetSafe);
        assert_eq!((csv.defused, csv.formula_like), (1, 0));
        let bytes = csv.bytes;
        assert_eq!(
            String::from_utf8(bytes).unwrap(),
            "key,segment\n'=1+1,-0.25\n"
        );
        // A machine file keeps the cell exactly and counts it all the same.
        let csv = csv_bytes(rows(), Cells::Exact);
        assert_eq!((csv.defused, csv.formula_like), (0, 1));
        assert_eq!(
            String::from_utf8(csv.bytes).unwrap(),
            "key,segment\n=1+1,-0.25\n"
        );
    }
}
