//! Check: a syntax tree and the data's header become diagnostics and, when
//! there is no error, a typed [`Plan`].
//!
//! The checker orders the work, so statements may come in any order. It
//! reads the input's header and a sample (see [`probe`]) to check column
//! names and kinds, never the whole file. All problems are collected, not
//! only the first.

/// Byte spans, as the front ends see them.
pub use crate::syntax::ast::Span;

pub mod caution;
pub mod complete;
pub mod diagnostic;
pub mod paths;
mod previous;
pub mod probe;
pub mod suggest;
pub mod vocab;

use crate::plan::*;
use crate::syntax::{self, ast::*};
use diagnostic::{did_you_mean, CheckError, Problem};
use probe::{ColumnKind, Probe, ProbeError};
use std::collections::{BTreeMap, HashMap};
use std::path::{Component, Path, PathBuf};

/// Defaults written into every plan that does not override them.
pub mod defaults {
    pub const SEED: u64 = 1;
    pub const RESTARTS: usize = 10;
    pub const ROUNDS: usize = 300;
    pub const TOLERANCE: f64 = 1e-6;
    pub const SEPARATOR: char = ',';
    pub const WEIGHT: f64 = 1.0;
    /// Reference sets or resamples when a choice by gap or stability asks
    /// for evidence without sizing it.
    pub const EVIDENCE_SETS: usize = 20;
    /// Restarts when k-means reclusters for evidence.
    pub const EVIDENCE_RESTARTS: usize = 5;
    /// Restarts of the k-means stage of the two-stage tree.
    pub const MICRO_RESTARTS: usize = 3;
}

/// A recipe's text and where it lives.
#[derive(Debug, Clone)]
pub struct RecipeSource {
    /// The path as the user gave it; shown in messages.
    pub path: PathBuf,
    pub text: String,
}

impl RecipeSource {
    pub fn read(path: &Path) -> std::io::Result<RecipeSource> {
        let text = std::fs::read_to_string(path)?;
        // Editors on some systems start files with a byte-order mark.
        let text = text
            .strip_prefix('\u{feff}')
            .map(str::to_string)
            .unwrap_or(text);
        Ok(RecipeSource {
            path: path.to_path_buf(),
            text,
        })
    }

    /// The folder every path in the recipe is relative to.
    pub fn folder(&self) -> PathBuf {
        match self.path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        }
    }

    pub fn name(&self) -> String {
        self.path.display().to_string()
    }
}

/// The checker's result: every problem found, and the plan when none of
/// them is an error.
#[derive(Debug)]
pub struct Checked {
    pub plan: Option<Plan>,
    pub problems: Vec<Problem>,
    /// The input's column names, when its header could be read.
    pub columns: Vec<String>,
    /// What the sample showed of each column.
    pub column_info: Vec<probe::ColumnInfo>,
    /// Records in the sample.
    pub sampled: usize,
}

impl Checked {
    pub fn has_errors(&self) -> bool {
        self.problems.iter().any(Problem::is_error)
    }
}

/// Checks a recipe against its data's header.
pub fn check(source: &RecipeSource) -> Checked {
    check_with(source, &CheckOptions::default())
}

/// What the person running a recipe allows beyond the recipe itself.
#[derive(Debug, Clone, Default)]
pub struct CheckOptions {
    /// Folders outside the recipe's own that it may read and write.
    pub allow_dirs: Vec<PathBuf>,
}

/// Checks a recipe with the given permissions.
pub fn check_with(source: &RecipeSource, options: &CheckOptions) -> Checked {
    let tree = syntax::parse(&source.text);
    let mut cx = Checker {
        sandbox: paths::Sandbox::new(&source.folder(), &options.allow_dirs),
        reads: Vec::new(),
        folder: source.folder(),
        recipe_stem: source
            .path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default(),
        problems: tree
            .errors
            .iter()
            .cloned()
            .map(explain_syntax)
            .map(Problem::from)
            .collect(),
        probe: None,
        input_file: String::new(),
        end: end_span(&source.text),
        category_spans: HashMap::new(),
    };
    let mut plan = cx.plan(&tree.statements);
    if let Some(plan) = plan.as_mut() {
        // Where each label was given, for messages about labels at run time.
        for st in &tree.statements {
            if let StatementKind::Label { segment, .. } = &st.kind {
                if let Some(n) = segment.node.as_whole() {
                    let line = source.text[..st.span.start.min(source.text.len())]
                        .matches('\n')
                        .count()
                        + 1;
                    plan.label_lines.entry(n as usize).or_insert(line);
                }
            }
        }
    }
    let errors = cx.problems.iter().any(Problem::is_error);
    Checked {
        plan: if errors { None } else { plan },
        problems: cx.problems,
        columns: cx
            .probe
            .as_ref()
            .map(|p| p.names().map(String::from).collect())
            .unwrap_or_default(),
        column_info: cx
            .probe
            .as_ref()
            .map(|p| p.columns.clone())
            .unwrap_or_default(),
        sampled: cx.probe.as_ref().map_or(0, |p| p.sampled),
    }
}

/// The statements of a recipe's text, one string each (continued lists
/// kept whole), each with the comment lines and the blank line before it;
/// comments after the last statement make a last entry of their own.
pub fn statements_of(text: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut prefix: Vec<String> = Vec::new();
    for (_, line) in syntax::logical_lines(text).unwrap_or_default() {
        let t = line.trim();
        if t.is_empty() {
            if !prefix.last().is_some_and(String::is_empty) {
                prefix.push(String::new());
            }
            continue;
        }
        if t.starts_with('#') {
            prefix.push(t.to_string());
            continue;
        }
        prefix.push(t.to_string());
        out.push(prefix.join("\n").trim_start_matches('\n').to_string());
        prefix.clear();
    }
    let rest = prefix.join("\n");
    if !rest.trim().is_empty() {
        out.push(rest.trim_start_matches('\n').to_string());
    }
    out
}

/// The statement word of an entry from [`statements_of`] (its first line
/// that is neither blank nor a comment), or "" for comments alone.
pub fn statement_word(entry: &str) -> &str {
    entry
        .lines()
        .map(str::trim)
        .find(|l| !l.is_empty() && !l.starts_with('#'))
        .and_then(|l| l.split_whitespace().next())
        .unwrap_or("")
}

/// The shape of a recipe for editors: each statement's word and span, and
/// where each clustered column is named (its definition).
#[derive(Debug, Clone, Default)]
pub struct Outline {
    pub statements: Vec<(String, Span)>,
    pub columns: Vec<(String, Span)>,
}

/// The outline of a recipe's text (statements that parse).
pub fn outline(text: &str) -> Outline {
    let tree = syntax::parse(text);
    let mut out = Outline::default();
    for s in &tree.statements {
        out.statements.push((s.keyword.node.clone(), s.span));
        let named: &[Column] = match &s.kind {
            StatementKind::Features(FeatureChoice::Listed(cols)) => cols,
            StatementKind::Categories { columns, .. } => columns,
            _ => &[],
        };
        out.columns
            .extend(named.iter().map(|c| (c.node.clone(), c.span)));
    }
    out
}

/// The recipe in canonical layout, or `None` when it does not parse.
pub fn format(text: &str) -> Option<String> {
    syntax::format::format(text).ok()
}

/// Whether a statement word may appear only once in a recipe.
pub fn single_statement(word: &str) -> bool {
    SINGLE.contains(&word)
}

/// Gives a syntax error the example of its statement as help.
fn explain_syntax(mut e: syntax::SyntaxError) -> syntax::SyntaxError {
    if let Some(doc) = e.statement_word.as_deref().and_then(vocab::statement) {
        e.help = format!("`{}` is written like `{}`", doc.word, doc.example);
    }
    e
}

/// The largest k a recipe may ask for, and the widest sweep.
pub const MAX_K: i64 = 1_000_000;
/// The most restarts and rounds `kmeans` takes: far beyond any useful
/// value, short of a run that would not end.
const MOST_RESTARTS: usize = 10_000;
const MOST_ROUNDS: usize = 100_000;
/// The smallest sample `kmeans ... sample` takes.
const SMALLEST_SAMPLE: i64 = 1_000;
/// Records per segment a k-means sample must allow at the largest k.
const PER_SEGMENT_IN_SAMPLE: usize = 10;
pub const MAX_K_SPAN: i64 = 500;

pub use crate::plan::TreeLimit;

/// Statements that may appear once, by word.
const SINGLE: [&str; 12] = [
    "recipe", "seed", "input", "features", "scale", "kmeans", "tree", "evidence", "choose",
    "validate", "compare", "previous",
];

struct Checker {
    folder: PathBuf,
    recipe_stem: String,
    problems: Vec<Problem>,
    /// The input's header and sample, once read.
    probe: Option<Probe>,
    input_file: String,
    /// The recipe's last character, where a missing statement is reported.
    end: Span,
    /// Where each category column was named.
    category_spans: HashMap<String, Span>,
    /// The folders the recipe may touch.
    sandbox: paths::Sandbox,
    /// Every file the recipe reads (real path, span), so no output can
    /// overwrite one.
    reads: Vec<(PathBuf, Span)>,
}

/// `text` cut to at most `max` characters, with `…` when cut: data can put
/// megabytes in one field, and a message should not repeat them.
pub fn clipped(text: &str, max: usize) -> String {
    match text.char_indices().nth(max) {
        Some((at, _)) => format!("{}…", &text[..at]),
        None => text.to_string(),
    }
}

/// How to mend a data file in another encoding.
pub const NOT_UTF8_HELP: &str = "the file holds a byte that is not UTF-8, likely an accented letter saved in Latin-1 or Windows-1252; save it as UTF-8 (in a spreadsheet: \"CSV UTF-8\"), or convert it with `iconv -f latin1 -t utf-8 old.csv > new.csv`";

/// A separator as a recipe writes it (a tab as `\t`).
fn shown_separator(sep: char) -> String {
    if sep == '\t' {
        "\\t".to_string()
    } else {
        sep.to_string()
    }
}

/// The span of the last non-blank character of the text.
fn end_span(text: &str) -> Span {
    let t = text.trim_end();
    let last = t.chars().last().map(char::len_utf8).unwrap_or(0);
    Span::new(t.len() - last, t.len())
}

impl Checker {
    fn err(&mut self, e: CheckError) {
        self.problems.push(Problem::Check(e));
    }

    /// Builds the plan, collecting problems on the way. Returns a plan only
    /// when every required part could be settled.
    fn plan(&mut self, stmts: &[Statement]) -> Option<Plan> {
        let mut first: HashMap<&str, &Statement> = HashMap::new();
        for s in stmts {
            if let StatementKind::Unknown { word } = &s.kind {
                let suggestion = suggest::nearest(&word.node, vocab::statement_words());
                let all: Vec<_> = vocab::statement_words().collect();
                self.err(CheckError::UnknownStatement {
                    word: word.node.clone(),
                    span: word.span,
                    help: did_you_mean(&suggestion, &format!("statements are {}", all.join(", "))),
                });
                continue;
            }
            let word = s.keyword.node.as_str();
            if SINGLE.contains(&word) {
                if let Some(prev) = first.get(word) {
                    self.err(CheckError::DuplicateStatement {
                        keyword: word.to_string(),
                        span: s.keyword.span,
                        first: prev.keyword.span,
                    });
                    continue;
                }
                first.insert(word_static(word), s);
            }
        }
        let find = |w: &str| first.get(w).copied();

        let input = self.input(find("input"));
        let categories = self.categories(stmts, input.as_ref());
        let features = self.features(find("features"), input.as_ref(), &categories);
        self.cautions(stmts, features.as_deref(), categories.as_deref());
        let features = features.map(|f| self.feature_rules(stmts, f));
        let scale = match find("scale") {
            Some(Statement {
                kind: StatementKind::Scale { method },
                ..
            }) => self.word_choice("scale method", method, &Scale::NAMES, Scale::parse),
            _ => Some(Scale::Zscore),
        };
        let method = self.method(find("kmeans"), find("tree"));
        let ks: Option<Vec<usize>> = method.as_ref().map(|m| match m {
            MethodPlan::KMeans(k) => k.ks.clone(),
            MethodPlan::Tree(t) => t.ks.clone(),
        });
        let choose = self.choose(find("choose"), ks.as_deref());
        let previous = {
            let numeric: Option<Vec<String>> = features
                .as_ref()
                .map(|f| f.iter().map(|f| f.column.clone()).collect());
            let cats: Option<Vec<String>> = categories
                .as_ref()
                .map(|c| c.iter().map(|c| c.column.clone()).collect());
            let key = input.as_ref().map(|i| i.plan.key.clone());
            self.previous(
                find("previous"),
                numeric.as_deref(),
                cats.as_deref(),
                key.as_deref(),
            )
        };
        // With a previous model, segments keep its numbers and new ones
        // follow its highest, so labels may go that far beyond k.
        let label_room = previous
            .as_ref()
            .and_then(|p| p.as_ref())
            .map_or(0, |p| p.highest);
        let labels = self.labels(stmts, ks.as_deref(), label_room);
        let evidence = self.evidence(find("evidence"), choose);
        let validate = self.validate(find("validate"), input.as_ref());
        let compare = self.compare(find("compare"));
        let is_tree = matches!(method, Some(MethodPlan::Tree(_)));
        let outputs = self.outputs(stmts, is_tree);
        let seed = self.seed(find("seed"));
        let name = match find("recipe") {
            Some(Statement {
                kind: StatementKind::Recipe { name },
                ..
            }) => name.node.clone(),
            _ => self.recipe_stem.clone(),
        };

        Some(Plan {
            format: PLAN_FORMAT,
            name,
            seed: seed?,
            input: input?.plan,
            features: features?,
            categories: categories?,
            scale: scale?,
            method: method?,
            choose: choose?,
            labels: labels?,
            evidence: evidence?,
            validate: validate?,
            compare: compare?,
            previous: previous?.map(|p| p.plan),
            outputs: outputs?,
            label_lines: BTreeMap::new(),
        })
    }

    fn seed(&mut self, stmt: Option<&Statement>) -> Option<u64> {
        let Some(Statement {
            kind: StatementKind::Seed { value },
            ..
        }) = stmt
        else {
            return Some(defaults::SEED);
        };
        match value.node.as_whole() {
            Some(v) if v >= 0 => Some(v as u64),
            _ => {
                self.err(CheckError::BadValue {
                    option: "seed".into(),
                    found: format!("`{}`", value.node.raw),
                    expected: "a whole number, 0 or more".into(),
                    span: value.span,
                    help: "any whole number will do; keep it, so reruns match".into(),
                });
                None
            }
        }
    }

    // ------------------------------------------------------------ input --

    fn input(&mut self, stmt: Option<&Statement>) -> Option<CheckedInput> {
        let Some(
            s @ Statement {
                kind: StatementKind::Input { path, options },
                ..
            },
        ) = stmt
        else {
            self.err(CheckError::MissingStatement {
                span: self.end,
                keyword: "input",
                help: r#"name the data file and its key, such as `input "data/members.csv" key member_id`"#.into(),
            });
            return None;
        };
        let opts = self.options("input", options, vocab::INPUT_OPTIONS);
        let separator = match opts.get("separator") {
            None => Some(defaults::SEPARATOR),
            Some(o) => match &o.value.node {
                Value::Text(t) if t.chars().count() == 1 && t.is_ascii() => t.chars().next(),
                other => {
                    self.err(CheckError::BadValue {
                        option: "separator".into(),
                        found: other.to_string(),
                        expected: "one quoted ASCII character".into(),
                        span: o.value.span,
                        help: r#"for example `separator ";"`"#.into(),
                    });
                    None
                }
            },
        };
        let key = match opts.get("key") {
            Some(o) => self.column_name("key", o),
            None => {
                self.err(CheckError::MissingOption {
                    statement: "input",
                    option: "key",
                    span: s.span,
                    help: "the key column identifies each record in the outputs, such as `key member_id`".into(),
                });
                None
            }
        };
        let resolved = self.read_path(path)?;
        self.input_file = path.node.clone();
        let separator = separator?;
        let probed = probe::probe(&resolved, separator as u8);
        if let (Err(ProbeError::Malformed { .. }), Some(sep)) =
            (&probed, probe::header_separator(&resolved, separator))
        {
            // Fields of unequal count under a header with another common
            // separator in it (decimal commas, say): name the separator.
            self.wrong_separator(
                path,
                sep,
                format!(
                    "its header line is separated by `{}`, not `{separator}`",
                    shown_separator(sep)
                ),
            );
            return None;
        }
        match probed {
            Ok(p) => {
                if let Some(sep) = p.likely_separator().filter(|&c| c != separator) {
                    let reason = format!(
                        "its header is one column, `{}`: the fields seem separated by `{}`, not `{separator}`",
                        clipped(&p.columns[0].name, 60),
                        shown_separator(sep)
                    );
                    self.wrong_separator(path, sep, reason);
                    return None;
                }
                if let Some((name, a, b)) = p.repeated_name() {
                    self.err(CheckError::FileUnreadable {
                        path: path.node.clone(),
                        reason: format!(
                            "its header names `{}` twice (fields {a} and {b}), so a recipe cannot say which is meant",
                            clipped(name, 60)
                        ),
                        span: path.span,
                        help: "rename one of the two columns in the data file".into(),
                    });
                    return None;
                }
                self.probe = Some(p)
            }
            Err(e) => {
                self.file_problem(path, &e);
                return None;
            }
        }
        let key = key?;
        self.known_column(&key)?;
        if let Some((k, first, again)) = probe::repeated_key(&resolved, separator as u8, &key.node)
        {
            self.err(CheckError::RepeatedKey {
                column: key.node.clone(),
                key: clipped(&k, 40),
                file: path.node.clone(),
                first,
                again,
                span: key.span,
            });
            return None;
        }
        Some(CheckedInput {
            plan: InputPlan {
                path: path.node.clone(),
                resolved,
                key: key.node.clone(),
                separator,
            },
            key_span: key.span,
        })
    }

    /// The input seems separated by `sep`, not the separator in use.
    fn wrong_separator(&mut self, path: &Spanned<String>, sep: char, reason: String) {
        self.err(CheckError::FileUnreadable {
            path: path.node.clone(),
            reason,
            span: path.span,
            help: format!(
                "add `separator \"{}\"` to the `input` statement",
                shown_separator(sep)
            ),
        });
    }

    fn file_problem(&mut self, path: &Spanned<String>, e: &ProbeError) {
        let (reason, help) = match e {
            ProbeError::NotFound => {
                let help = match self.nearest_file(&path.node) {
                    Some(f) => format!("did you mean `{f}`?"),
                    None => format!("paths are read relative to the recipe's folder, here `{}`", self.folder.display()),
                };
                self.err(CheckError::FileNotFound {
                    path: path.node.clone(),
                    span: path.span,
                    help,
                });
                return;
            }
            ProbeError::Unreadable(r) => (r.clone(), "check the file's permissions".to_string()),
            ProbeError::Malformed { line, reason } => (
                format!("line {line}: {reason}"),
                "every line needs as many fields as the header; quote fields that hold the separator".to_string(),
            ),
            ProbeError::NoHeader => (
                "it has no header line".to_string(),
                "the first line must name the columns".to_string(),
            ),
            ProbeError::NotUtf8 { line } => (
                format!("line {line} is not UTF-8 text"),
                NOT_UTF8_HELP.to_string(),
            ),
        };
        self.err(CheckError::FileUnreadable {
            path: path.node.clone(),
            reason,
            span: path.span,
            help,
        });
    }

    /// The file beside a missing one whose name is closest to it.
    fn nearest_file(&self, written: &str) -> Option<String> {
        let p = Path::new(written);
        let name = p.file_name()?.to_str()?;
        let dir = self.folder.join(p.parent().unwrap_or(Path::new("")));
        let mut names: Vec<String> = std::fs::read_dir(dir)
            .ok()?
            .filter_map(|e| e.ok()?.file_name().into_string().ok())
            .collect();
        names.sort();
        let best = suggest::nearest(name, names.iter().map(String::as_str))?;
        Some(p.with_file_name(best).to_string_lossy().into_owned())
    }

    /// Resolves a recipe path against the recipe's folder, refusing paths
    /// that lead outside it.
    fn safe_path(&mut self, path: &Spanned<String>) -> Option<PathBuf> {
        let resolved = self.sandbox.resolve(&path.node);
        if resolved.is_none() {
            self.err(CheckError::PathOutside {
                path: path.node.clone(),
                span: path.span,
            });
        }
        resolved
    }

    /// A path the recipe reads: checked like any path, and remembered.
    fn read_path(&mut self, path: &Spanned<String>) -> Option<PathBuf> {
        let resolved = self.safe_path(path)?;
        self.reads
            .push((paths::Sandbox::real_path(&resolved), path.span));
        Some(resolved)
    }

    // ---------------------------------------------------------- columns --

    /// The column's header entry, or an `unknown column` diagnostic. When
    /// the header could not be read, no column can be judged and `None`
    /// comes back silently (the file's own problem was reported).
    fn known_column(&mut self, col: &Column) -> Option<probe::ColumnInfo> {
        let probe = self.probe.as_ref()?;
        if let Some(info) = probe.column(&col.node) {
            return Some(info.clone());
        }
        let suggestion = suggest::nearest(&col.node, probe.names());
        let names: Vec<&str> = probe.names().collect();
        let listing = if names.len() <= 12 {
            format!("its columns are {}", names.join(", "))
        } else {
            format!("its columns include {}, ...", names[..12].join(", "))
        };
        self.err(CheckError::UnknownColumn {
            column: col.node.clone(),
            file: self.input_file.clone(),
            span: col.span,
            help: did_you_mean(&suggestion, &listing),
        });
        None
    }

    /// An option value that names a column.
    fn column_name(&mut self, option: &str, o: &OptionPair) -> Option<Column> {
        match &o.value.node {
            Value::Word(w) | Value::Text(w) => Some(Spanned::new(w.clone(), o.value.span)),
            other => {
                self.err(CheckError::BadValue {
                    option: option.into(),
                    found: other.kind_name().into(),
                    expected: "a column name".into(),
                    span: o.value.span,
                    help: "write the column's name as in the header, quoted if it has spaces"
                        .into(),
                });
                None
            }
        }
    }

    fn categories(
        &mut self,
        stmts: &[Statement],
        input: Option<&CheckedInput>,
    ) -> Option<Vec<CategoryPlan>> {
        let mut out = Vec::new();
        let mut seen: HashMap<String, Span> = HashMap::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Categories { columns, options } = &s.kind else {
                continue;
            };
            let opts = self.options("categories", options, vocab::CATEGORIES_OPTIONS);
            let weight = match opts.get("weight") {
                Some(o) => self.positive("weight", &o.value),
                None => Some(defaults::WEIGHT),
            };
            ok &= weight.is_some();
            for col in columns {
                if let Some(prev) = seen.get(&col.node) {
                    self.err(CheckError::DuplicateColumn {
                        column: col.node.clone(),
                        span: col.span,
                        first: *prev,
                    });
                    ok = false;
                    continue;
                }
                seen.insert(col.node.clone(), col.span);
                self.category_spans.insert(col.node.clone(), col.span);
                if input.is_some_and(|i| i.plan.key == col.node) {
                    self.key_clustered(col);
                    ok = false;
                    continue;
                }
                if self.probe.is_some() && self.known_column(col).is_none() {
                    ok = false;
                    continue;
                }
                out.push(CategoryPlan {
                    column: col.node.clone(),
                    weight: weight.unwrap_or(defaults::WEIGHT),
                });
            }
        }
        ok.then_some(out)
    }

    fn key_clustered(&mut self, col: &Column) {
        self.err(CheckError::KeyClustered {
            column: col.node.clone(),
            span: col.span,
        });
    }

    /// The feature columns, in order, with default rules.
    fn features(
        &mut self,
        stmt: Option<&Statement>,
        input: Option<&CheckedInput>,
        categories: &Option<Vec<CategoryPlan>>,
    ) -> Option<Vec<(String, Span)>> {
        let Some(
            s @ Statement {
                kind: StatementKind::Features(choice),
                ..
            },
        ) = stmt
        else {
            self.err(CheckError::MissingStatement {
                span: self.end,
                keyword: "features",
                help: "list the numeric columns to segment on, such as `features visits_per_month, basket_value`, or write `features all`".into(),
            });
            return None;
        };
        let key = input.map(|i| i.plan.key.clone());
        let cats: Vec<String> = categories
            .iter()
            .flatten()
            .map(|c| c.column.clone())
            .collect();
        let mut out: Vec<(String, Span)> = Vec::new();
        let mut ok = true;
        match choice {
            FeatureChoice::Listed(cols) => {
                for col in cols {
                    if let Some((_, first)) = out.iter().find(|(n, _)| *n == col.node) {
                        self.err(CheckError::DuplicateColumn {
                            column: col.node.clone(),
                            span: col.span,
                            first: *first,
                        });
                        ok = false;
                        continue;
                    }
                    if key.as_deref() == Some(col.node.as_str()) {
                        self.key_clustered(col);
                        ok = false;
                        continue;
                    }
                    if let Some(&first) = self.category_spans.get(&col.node) {
                        self.err(CheckError::DuplicateColumn {
                            column: col.node.clone(),
                            span: col.span,
                            first,
                        });
                        ok = false;
                        continue;
                    }
                    match self.known_column(col) {
                        Some(info) if info.mostly_numeric() => {
                            let at = self
                                .probe
                                .as_ref()
                                .and_then(|p| p.columns.iter().position(|c| c.name == info.name))
                                .unwrap_or(0);
                            self.err(CheckError::NotANumberInData {
                                file: self.input_file.clone(),
                                line: info.text_line.unwrap_or(0),
                                column: at + 1,
                                name: info.name.clone(),
                                found: clipped(&info.text_example.clone().unwrap_or_default(), 60),
                                span: col.span,
                            });
                            ok = false;
                        }
                        Some(info) if info.kind == ColumnKind::Text => {
                            self.err(CheckError::TextFeature {
                                column: col.node.clone(),
                                example: clipped(&info.text_example.unwrap_or_default(), 60),
                                span: col.span,
                            });
                            ok = false;
                        }
                        Some(_) => out.push((col.node.clone(), col.span)),
                        None => ok = false,
                    }
                }
            }
            FeatureChoice::AllNumeric { except } => {
                for col in except {
                    ok &= self.known_column(col).is_some();
                }
                let probe = self.probe.as_ref()?;
                for c in &probe.columns {
                    let excluded = except.iter().any(|e| e.node == c.name)
                        || key.as_deref() == Some(c.name.as_str())
                        || cats.contains(&c.name);
                    if !excluded && c.kind == ColumnKind::Numeric {
                        out.push((c.name.clone(), s.span));
                    }
                }
            }
        }
        if ok && out.is_empty() && self.probe.is_some() {
            self.err(CheckError::NoFeatures {
                span: s.span,
                help: "name at least one numeric column".into(),
            });
            return None;
        }
        ok.then_some(out)
    }

    /// Warns about clustered columns whose names suggest personal data,
    /// unless the recipe acknowledges them.
    fn cautions(
        &mut self,
        stmts: &[Statement],
        features: Option<&[(String, Span)]>,
        categories: Option<&[CategoryPlan]>,
    ) {
        let mut acknowledged: Vec<&str> = Vec::new();
        for s in stmts {
            if let StatementKind::Acknowledge { columns, reason } = &s.kind {
                if reason.node.trim().is_empty() {
                    self.err(CheckError::EmptyReason { span: reason.span });
                    continue;
                }
                acknowledged.extend(columns.iter().map(|c| c.node.as_str()));
            }
        }
        let mut used: Vec<(String, Span)> = features.unwrap_or_default().to_vec();
        for c in categories.unwrap_or_default() {
            let span = self
                .category_spans
                .get(&c.column)
                .copied()
                .unwrap_or_default();
            used.push((c.column.clone(), span));
        }
        for (column, span) in used {
            if acknowledged.contains(&column.as_str()) {
                continue;
            }
            if let Some((kind, word)) = caution::sensitive(&column) {
                self.err(CheckError::PersonalData {
                    column,
                    kind: kind.describe(),
                    word,
                    span,
                });
            }
        }
    }

    /// Applies `missing`, `reshape` and `weight` statements to the features.
    fn feature_rules(
        &mut self,
        stmts: &[Statement],
        features: Vec<(String, Span)>,
    ) -> Vec<FeaturePlan> {
        let mut plans: Vec<FeaturePlan> = features
            .iter()
            .map(|(name, _)| FeaturePlan {
                column: name.clone(),
                missing: MissingRule::Refuse,
                clip: None,
                transform: Transform::None,
                weight: defaults::WEIGHT,
            })
            .collect();
        let mut missing_set: HashMap<String, Span> = HashMap::new();
        let mut transform_set: HashMap<String, Span> = HashMap::new();
        let mut clip_set: HashMap<String, Span> = HashMap::new();
        let mut weight_set: HashMap<String, Span> = HashMap::new();
        let mut global_missing: Option<(MissingRule, Span)> = None;

        for s in stmts {
            match &s.kind {
                StatementKind::Missing { action, columns } => {
                    let Some(rule) = self.missing_rule(action) else {
                        continue;
                    };
                    match columns {
                        None => {
                            if let Some((_, first)) = global_missing {
                                self.err(CheckError::Conflict {
                                    what: "a rule for missing values in all columns".into(),
                                    span: s.span,
                                    first,
                                });
                            } else {
                                global_missing = Some((rule, s.span));
                            }
                        }
                        Some(cols) => {
                            for col in cols {
                                if let Some(f) = self.feature_of(&mut plans, col, "missing") {
                                    if self.once(
                                        &mut missing_set,
                                        col,
                                        "a missing-value rule for this column",
                                    ) {
                                        f_mut(&mut plans, f).missing = rule;
                                    }
                                }
                            }
                        }
                    }
                }
                StatementKind::Reshape { columns, action } => {
                    for col in columns {
                        let Some(f) = self.feature_of(&mut plans, col, "reshape") else {
                            continue;
                        };
                        match action {
                            ReshapeAction::Clip(range) => {
                                let (lo, hi) = (&range.node.0, &range.node.1);
                                if !(0.0..=1.0).contains(&lo.value)
                                    || !(0.0..=1.0).contains(&hi.value)
                                    || lo.value >= hi.value
                                {
                                    self.err(CheckError::BadValue {
                                        option: "clip".into(),
                                        found: format!("`{}..{}`", lo.raw, hi.raw),
                                        expected:
                                            "two quantile fractions from 0 to 1, the lower first"
                                                .into(),
                                        span: range.span,
                                        help: "for example `clip 0.01..0.99` keeps the middle 98%"
                                            .into(),
                                    });
                                    break;
                                }
                                if self.once(&mut clip_set, col, "a clip for this column") {
                                    f_mut(&mut plans, f).clip = Some((lo.value, hi.value));
                                }
                            }
                            ReshapeAction::Named(word) => {
                                let Some(t) = self.word_choice(
                                    "reshaping",
                                    word,
                                    &Transform::NAMES,
                                    Transform::parse,
                                ) else {
                                    break;
                                };
                                if self.once(&mut transform_set, col, "a transform for this column")
                                {
                                    f_mut(&mut plans, f).transform = t;
                                }
                            }
                        }
                    }
                }
                StatementKind::Weight { columns, value } => {
                    let Some(w) = self.positive(
                        "weight",
                        &Spanned::new(Value::Number(value.node.clone()), value.span),
                    ) else {
                        continue;
                    };
                    for col in columns {
                        if let Some(f) = self.feature_of(&mut plans, col, "weight") {
                            if self.once(&mut weight_set, col, "a weight for this column") {
                                f_mut(&mut plans, f).weight = w;
                            }
                        }
                    }
                }
                _ => {}
            }
        }
        if let Some((rule, _)) = global_missing {
            for p in plans.iter_mut() {
                if !missing_set.contains_key(&p.column) {
                    p.missing = rule;
                }
            }
        }
        // Gaps the sample already shows, with no rule to handle them: the
        // run would stop at the first; say so now.
        for (p, (_, span)) in plans.iter().zip(&features) {
            if p.missing != MissingRule::Refuse {
                continue;
            }
            let blanks = self
                .probe
                .as_ref()
                .and_then(|pr| pr.column(&p.column))
                .map_or(0, |c| c.blanks);
            if blanks > 0 {
                let sampled = self.probe.as_ref().map_or(0, |pr| pr.sampled);
                self.err(CheckError::GapsWithoutRule {
                    column: p.column.clone(),
                    blanks,
                    sampled,
                    span: *span,
                });
            }
        }
        plans
    }

    /// Records that `col` got a rule of this kind; a second one conflicts.
    fn once(&mut self, set: &mut HashMap<String, Span>, col: &Column, what: &str) -> bool {
        if let Some(first) = set.get(&col.node) {
            self.err(CheckError::Conflict {
                what: format!("{what} (`{}`)", col.node),
                span: col.span,
                first: *first,
            });
            return false;
        }
        set.insert(col.node.clone(), col.span);
        true
    }

    /// Index of the feature `col` names, or a diagnostic.
    fn feature_of(
        &mut self,
        plans: &mut [FeaturePlan],
        col: &Column,
        statement: &str,
    ) -> Option<usize> {
        if let Some(i) = plans.iter().position(|p| p.column == col.node) {
            return Some(i);
        }
        // Report unknown columns as such; known ones as not features.
        self.probe.as_ref()?;
        self.known_column(col)?;
        self.err(CheckError::NotAFeature {
            column: col.node.clone(),
            span: col.span,
            help: format!(
                "`{statement}` applies to the columns listed in `features`; add `{}` there first",
                col.node
            ),
        });
        None
    }

    fn missing_rule(&mut self, action: &Spanned<MissingAction>) -> Option<MissingRule> {
        match &action.node {
            MissingAction::DropRows => Some(MissingRule::DropRow),
            MissingAction::Fill(v) => match &v.node {
                Value::Number(n) if n.value.is_finite() => Some(MissingRule::FillValue(n.value)),
                Value::Word(w) if w == "median" => Some(MissingRule::FillMedian),
                Value::Word(w) if w == "mean" => Some(MissingRule::FillMean),
                Value::Word(w) => {
                    let suggestion = suggest::nearest(w, vocab::FILL_WORDS);
                    self.err(CheckError::UnknownWord {
                        what: "fill",
                        found: w.clone(),
                        span: v.span,
                        choices: "`median`, `mean` or a number".into(),
                        help: did_you_mean(
                            &suggestion,
                            "fill with the column's median, its mean, or a number you choose",
                        ),
                    });
                    None
                }
                other => {
                    self.err(CheckError::BadValue {
                        option: "fill".into(),
                        found: format!("`{other}`"),
                        expected: "`median`, `mean` or a finite number".into(),
                        span: v.span,
                        help: "for example `missing fill 0 for coupon_rate`".into(),
                    });
                    None
                }
            },
        }
    }

    // ----------------------------------------------------------- method --

    /// The one method statement: `kmeans` or `tree`.
    fn method(
        &mut self,
        kmeans: Option<&Statement>,
        tree: Option<&Statement>,
    ) -> Option<MethodPlan> {
        match (kmeans, tree) {
            (Some(a), Some(b)) => {
                let (first, second) = if a.span.start < b.span.start {
                    (a, b)
                } else {
                    (b, a)
                };
                self.err(CheckError::Conflict {
                    what: "a method (`kmeans` or `tree`)".into(),
                    span: second.keyword.span,
                    first: first.keyword.span,
                });
                None
            }
            (Some(s), None) => self.kmeans(s).map(MethodPlan::KMeans),
            (None, Some(s)) => self.tree(s).map(MethodPlan::Tree),
            (None, None) => {
                self.err(CheckError::NoMethod { span: self.end });
                None
            }
        }
    }

    /// The required `k` option of a method statement.
    fn required_ks(
        &mut self,
        statement: &'static str,
        opts: &HashMap<&'static str, &OptionPair>,
        span: Span,
    ) -> Option<Vec<usize>> {
        match opts.get("k") {
            None => {
                self.err(CheckError::MissingOption {
                    statement,
                    option: "k",
                    span,
                    help:
                        "a number of segments such as `k 5`, or a range to compare such as `k 2..9`"
                            .into(),
                });
                None
            }
            Some(o) => self.ks(&o.value),
        }
    }

    fn tree(&mut self, s: &Statement) -> Option<TreePlan> {
        let StatementKind::Tree { options } = &s.kind else {
            return None;
        };
        let opts = self.options("tree", options, vocab::TREE_OPTIONS);
        let height = match (opts.get("height"), opts.get("k")) {
            (Some(h), Some(k)) => {
                self.err(CheckError::Conflict {
                    what: "where to cut the tree (`k` or `height`)".into(),
                    span: h.name.span,
                    first: k.name.span,
                });
                return None;
            }
            (Some(h), None) => Some(self.positive("height", &h.value)?),
            (None, _) => None,
        };
        let ks = match height {
            Some(_) => Some(Vec::new()),
            None => self.required_ks("tree", &opts, s.span),
        };
        let word = |o: &OptionPair| match &o.value.node {
            Value::Word(w) => Some(Spanned::new(w.clone(), o.value.span)),
            _ => None,
        };
        let linkage = match opts.get("linkage") {
            None => Some((Linkage::Ward, None)),
            Some(o) => match word(o) {
                Some(w) => self
                    .word_choice("linkage", &w, &Linkage::NAMES, Linkage::parse)
                    .map(|l| (l, Some(o.value.span))),
                None => {
                    self.bad_value(
                        "linkage",
                        &o.value.node,
                        "a linkage name",
                        o.value.span,
                        "for example `linkage ward`",
                    );
                    None
                }
            },
        };
        let distance = match opts.get("distance") {
            None => Some((Metric::Euclidean, None)),
            Some(o) => match word(o) {
                Some(w) => self
                    .word_choice("distance", &w, &Metric::NAMES, Metric::parse)
                    .map(|m| (m, Some(o.value.span))),
                None => {
                    self.bad_value(
                        "distance",
                        &o.value.node,
                        "a distance name",
                        o.value.span,
                        "for example `distance manhattan`",
                    );
                    None
                }
            },
        };
        if let (Some((l, l_span)), Some((m, Some(m_span)))) = (linkage, distance) {
            if l.needs_euclidean() && m != Metric::Euclidean {
                self.err(CheckError::NeedsEuclidean {
                    linkage: l.name(),
                    distance: m.name(),
                    span: m_span,
                    linkage_span: l_span.unwrap_or(s.keyword.span),
                });
                return None;
            }
        }
        let micro = match opts.get("micro") {
            None => None,
            Some(o) => {
                let m = self.whole_option(&opts, "micro", 2, 500)?;
                if let Some(most) = ks.as_ref().and_then(|k| k.last()) {
                    if m <= *most {
                        self.err(CheckError::ImpossibleK {
                            reason: format!("{m} micro-segments cannot be cut into {most} segments"),
                            span: o.value.span,
                            help: "micro-segments are the tree's leaves; use many more than the largest k, such as `micro 500`".into(),
                        });
                        return None;
                    }
                }
                let rows = self.probe.as_ref().and_then(|p| p.rows);
                if let Some(n) = rows.filter(|&n| m > n) {
                    self.err(CheckError::ImpossibleK {
                        reason: format!("{m} micro-segments from {n} records"),
                        span: o.value.span,
                        help: format!("each micro-segment needs a record of its own; with {n} records, a tree over every record (no `micro`) is the better route"),
                    });
                    return None;
                }
                // The tree is built over the micro-segments, so they are
                // held to the linkage's limit like records are.
                if let Some((l, _)) = linkage {
                    let limit = TreeLimit::of(l);
                    if m > limit.records {
                        let why = limit
                            .reason(m, l.name())
                            .replace("every record", "every micro-segment");
                        self.bad_value(
                            "micro",
                            &o.value.node,
                            &format!(
                                "at most {} for `{}` linkage",
                                crate::text::thousands(limit.records),
                                l.name()
                            ),
                            o.value.span,
                            &format!(
                                "{why}; a few hundred to a few thousand micro-segments are usual"
                            ),
                        );
                        return None;
                    }
                }
                Some(MicroPlan {
                    segments: m,
                    restarts: defaults::MICRO_RESTARTS,
                    rounds: defaults::ROUNDS,
                    tolerance: defaults::TOLERANCE,
                })
            }
        };
        if let (None, Some((l, _))) = (&micro, linkage) {
            let rows = self
                .probe
                .as_ref()
                .and_then(|p| p.rows.or(p.estimated_rows));
            let limit = TreeLimit::of(l);
            if let Some(n) = rows.filter(|&n| n > limit.records) {
                self.err(CheckError::large_tree(n, l.name(), limit, s.keyword.span));
            }
        }
        Some(TreePlan {
            ks: ks?,
            height,
            linkage: linkage?.0,
            distance: distance?.0,
            micro,
        })
    }

    fn kmeans(&mut self, s: &Statement) -> Option<KMeansPlan> {
        let StatementKind::KMeans { options } = &s.kind else {
            return None;
        };
        let opts = self.options("kmeans", options, vocab::KMEANS_OPTIONS);
        let ks = self.required_ks("kmeans", &opts, s.span);
        let restarts = self
            .whole_option(&opts, "restarts", 1, defaults::RESTARTS)
            .and_then(|r| self.at_most(&opts, "restarts", r, MOST_RESTARTS, "each restart is a whole k-means fit; 10 to 100 restarts find the best partition in practice"));
        let rounds = self
            .whole_option(&opts, "rounds", 1, defaults::ROUNDS)
            .and_then(|r| self.at_most(&opts, "rounds", r, MOST_ROUNDS, "k-means converges in tens to hundreds of rounds; a cap this high only hides a run that does not converge"));
        let sample = match opts.get("sample") {
            None => Some(None),
            Some(o) => match self.whole_option(&opts, "sample", SMALLEST_SAMPLE, 200_000) {
                Some(v) => {
                    let most = ks.as_ref().and_then(|k| k.last().copied()).unwrap_or(0);
                    if v < PER_SEGMENT_IN_SAMPLE * most {
                        self.bad_value(
                            "sample",
                            &o.value.node,
                            &format!(
                                "at least {PER_SEGMENT_IN_SAMPLE} records per segment ({} at k = {most})",
                                PER_SEGMENT_IN_SAMPLE * most
                            ),
                            o.value.span,
                            "a sample of 100,000 to 500,000 records is usual for millions of records",
                        );
                        None
                    } else {
                        Some(Some(v))
                    }
                }
                None => None,
            },
        };
        let tolerance = match opts.get("tolerance") {
            None => Some(defaults::TOLERANCE),
            Some(o) => match &o.value.node {
                Value::Number(n) if n.value.is_finite() && n.value >= 0.0 => Some(n.value),
                other => {
                    self.bad_value(
                        "tolerance",
                        other,
                        "a number, 0 or more",
                        o.value.span,
                        "for example `tolerance 1e-6`; 0 runs until no record moves",
                    );
                    None
                }
            },
        };
        let seeding = match opts.get("seeding") {
            None => Some(Seeding::KMeansPlusPlus),
            Some(o) => match &o.value.node {
                Value::Word(w) => self.word_choice(
                    "seeding",
                    &Spanned::new(w.clone(), o.value.span),
                    &Seeding::NAMES,
                    Seeding::parse,
                ),
                other => {
                    self.bad_value(
                        "seeding",
                        other,
                        "`kmeans++` or `random-partition`",
                        o.value.span,
                        "k-means++ spreads the first centres out; it is the usual choice",
                    );
                    None
                }
            },
        };
        Some(KMeansPlan {
            ks: ks?,
            restarts: restarts?,
            rounds: rounds?,
            tolerance: tolerance?,
            seeding: seeding?,
            sample: sample?,
        })
    }

    /// The values of k, checked against each other and the record count.
    fn ks(&mut self, value: &Spanned<Value>) -> Option<Vec<usize>> {
        let rows = self.probe.as_ref().and_then(|p| p.rows);
        let impossible = |reason: String, help: &str| CheckError::ImpossibleK {
            reason,
            span: value.span,
            help: help.to_string(),
        };
        let (lo, hi) = match &value.node {
            Value::Number(n) => match n.as_whole() {
                Some(k) => (k, k),
                None => {
                    self.bad_value(
                        "k",
                        &value.node,
                        "a whole number or a range",
                        value.span,
                        "for example `k 5` or `k 2..9`",
                    );
                    return None;
                }
            },
            Value::Range(a, b) => match (a.as_whole(), b.as_whole()) {
                (Some(a), Some(b)) => (a, b),
                _ => {
                    self.bad_value(
                        "k",
                        &value.node,
                        "a range of whole numbers",
                        value.span,
                        "for example `k 2..9`",
                    );
                    return None;
                }
            },
            other => {
                self.bad_value(
                    "k",
                    other,
                    "a whole number or a range",
                    value.span,
                    "for example `k 5` or `k 2..9`",
                );
                return None;
            }
        };
        if hi > MAX_K || hi - lo > MAX_K_SPAN {
            self.err(impossible(
                format!("assort fits k up to {MAX_K} and at most {} values of k in one sweep, found {lo}..{hi}", MAX_K_SPAN + 1),
                "narrow the range; a sweep is for comparing a handful of candidate k",
            ));
            return None;
        }
        if lo > hi {
            self.err(impossible(
                format!("the range {lo}..{hi} is empty"),
                "write the smaller number first, such as `k 2..9`",
            ));
            return None;
        }
        if lo < 2 {
            self.err(impossible(
                format!("k must be at least 2, found {lo}"),
                "one segment is the whole data; segmenting starts at two",
            ));
            return None;
        }
        if let Some(n) = rows {
            if hi as usize > n {
                self.err(impossible(
                    format!(
                        "k {hi} is more than the {n} records in `{}`",
                        self.input_file
                    ),
                    "each segment needs at least one record",
                ));
                return None;
            }
        }
        Some((lo as usize..=hi as usize).collect())
    }

    fn choose(&mut self, stmt: Option<&Statement>, fitted: Option<&[usize]>) -> Option<ChooseK> {
        let Some(Statement {
            kind: StatementKind::Choose(rule),
            ..
        }) = stmt
        else {
            // A single k is fixed; a range is judged by silhouette unless
            // the recipe says otherwise.
            return Some(match fitted {
                Some([k]) => ChooseK::Fixed(*k),
                _ => ChooseK::By(Criterion::Silhouette),
            });
        };
        match rule {
            ChooseRule::By(word) => {
                let c = self.word_choice("criterion", word, &Criterion::NAMES, Criterion::parse)?;
                if let Some([k]) = fitted {
                    self.err(CheckError::NothingToChoose {
                        criterion: word.node.clone(),
                        span: word.span,
                    });
                    return Some(ChooseK::Fixed(*k));
                }
                Some(ChooseK::By(c))
            }
            ChooseRule::Fixed(n) => {
                let Some(k) = n.node.as_whole() else {
                    self.bad_value(
                        "choose k",
                        &Value::Number(n.node.clone()),
                        "a whole number",
                        n.span,
                        "for example `choose k 5`",
                    );
                    return None;
                };
                let ks = fitted.map(<[usize]>::to_vec).unwrap_or_default();
                if !ks.is_empty() && !ks.contains(&(k.max(0) as usize)) {
                    self.err(CheckError::ImpossibleK {
                        reason: format!(
                            "k {k} is not among the k fitted ({}..{})",
                            ks[0],
                            ks[ks.len() - 1]
                        ),
                        span: n.span,
                        help: "choose one of the k that `kmeans` fits".into(),
                    });
                    return None;
                }
                Some(ChooseK::Fixed(k as usize))
            }
        }
    }

    /// The `evidence` statement; a choice by gap or stability turns that
    /// evidence on with its default size.
    fn evidence(
        &mut self,
        stmt: Option<&Statement>,
        choose: Option<ChooseK>,
    ) -> Option<EvidencePlan> {
        let mut plan = EvidencePlan {
            gap: None,
            stability: None,
            restarts: defaults::EVIDENCE_RESTARTS,
            silhouette: SilhouetteMode::Estimate,
        };
        if let Some(Statement {
            kind: StatementKind::Evidence { options },
            ..
        }) = stmt
        {
            let opts = self.options("evidence", options, vocab::EVIDENCE_OPTIONS);
            if opts.contains_key("gap") {
                plan.gap = Some(self.whole_option(&opts, "gap", 2, defaults::EVIDENCE_SETS)?);
            }
            if opts.contains_key("stability") {
                plan.stability =
                    Some(self.whole_option(&opts, "stability", 2, defaults::EVIDENCE_SETS)?);
            }
            if let Some(o) = opts.get("silhouette") {
                plan.silhouette = match &o.value.node {
                    Value::Word(w) => self.word_choice(
                        "silhouette",
                        &Spanned::new(w.clone(), o.value.span),
                        &SilhouetteMode::NAMES,
                        SilhouetteMode::parse,
                    )?,
                    other => {
                        self.bad_value(
                            "silhouette",
                            other,
                            "`estimate` or `exact`",
                            o.value.span,
                            "the estimate states its standard error; `exact` costs time that grows with the square of the records",
                        );
                        return None;
                    }
                };
            }
        }
        match choose {
            Some(ChooseK::By(Criterion::Gap)) => {
                plan.gap.get_or_insert(defaults::EVIDENCE_SETS);
            }
            Some(ChooseK::By(Criterion::Stability)) => {
                plan.stability.get_or_insert(defaults::EVIDENCE_SETS);
            }
            _ => {}
        }
        Some(plan)
    }

    fn labels(
        &mut self,
        stmts: &[Statement],
        fitted: Option<&[usize]>,
        room: usize,
    ) -> Option<BTreeMap<usize, String>> {
        let most = fitted.and_then(|k| k.last().copied()).map(|m| m + room);
        let mut out = BTreeMap::new();
        let mut spans: HashMap<usize, Span> = HashMap::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Label { segment, text } = &s.kind else {
                continue;
            };
            let n = match segment.node.as_whole() {
                Some(n) if n >= 1 => n,
                _ => {
                    self.bad_value(
                        "label",
                        &Value::Number(segment.node.clone()),
                        "a segment number, 1 or more",
                        segment.span,
                        "segments are numbered 1 to k, largest first",
                    );
                    ok = false;
                    continue;
                }
            };
            if let Some(m) = most {
                if n as usize > m {
                    self.err(CheckError::LabelOutOfRange {
                        segment: n,
                        most: m,
                        span: segment.span,
                    });
                    ok = false;
                    continue;
                }
            }
            if let Some(first) = spans.get(&(n as usize)) {
                self.err(CheckError::Conflict {
                    what: format!("a label for segment {n}"),
                    span: segment.span,
                    first: *first,
                });
                ok = false;
                continue;
            }
            spans.insert(n as usize, segment.span);
            out.insert(n as usize, text.node.clone());
        }
        ok.then_some(out)
    }

    fn validate(
        &mut self,
        stmt: Option<&Statement>,
        input: Option<&CheckedInput>,
    ) -> Option<Option<ValidatePlan>> {
        let Some(
            s @ Statement {
                kind: StatementKind::Validate { path, options },
                ..
            },
        ) = stmt
        else {
            return Some(None);
        };
        let opts = self.options("validate", options, vocab::VALIDATE_OPTIONS);
        let column = match opts.get("column") {
            Some(o) => self.column_name("column", o),
            None => {
                self.err(CheckError::MissingOption {
                    statement: "validate",
                    option: "column",
                    span: s.span,
                    help: "name the column that holds the known grouping, such as `column planted_segment`".into(),
                });
                None
            }
        };
        let resolved = self.read_path(path)?;
        let column = column?;
        let separator = input
            .map(|i| i.plan.separator)
            .unwrap_or(defaults::SEPARATOR);
        match probe::probe(&resolved, separator as u8) {
            Ok(p) => {
                // Columns of the known grouping are checked against its own
                // header, so swap it in for the lookup.
                let saved = self.probe.replace(p);
                let saved_file = std::mem::replace(&mut self.input_file, path.node.clone());
                let found = self.known_column(&column).is_some();
                let key_found = match input {
                    Some(i) => self
                        .known_column(&Spanned::new(i.plan.key.clone(), i.key_span))
                        .is_some(),
                    None => false,
                };
                self.probe = saved;
                self.input_file = saved_file;
                (found && key_found).then(|| {
                    Some(ValidatePlan {
                        path: path.node.clone(),
                        resolved,
                        column: column.node.clone(),
                    })
                })
            }
            Err(e) => {
                self.file_problem(path, &e);
                None
            }
        }
    }

    /// The `compare with` statement: an earlier assignments file, which
    /// must exist and have a `segment` column.
    fn compare(&mut self, stmt: Option<&Statement>) -> Option<Option<ComparePlan>> {
        let Some(Statement {
            kind: StatementKind::Compare { path },
            ..
        }) = stmt
        else {
            return Some(None);
        };
        let resolved = self.read_path(path)?;
        match probe::probe(&resolved, b',') {
            Ok(p) if p.column("segment").is_some() => Some(Some(ComparePlan {
                path: path.node.clone(),
                resolved,
            })),
            Ok(_) => {
                self.err(CheckError::FileUnreadable {
                    path: path.node.clone(),
                    reason: "it has no `segment` column".into(),
                    span: path.span,
                    help: "compare with a file written by `save assignments` or `assort assign`"
                        .into(),
                });
                None
            }
            Err(e) => {
                self.file_problem(path, &e);
                None
            }
        }
    }

    fn outputs(&mut self, stmts: &[Statement], is_tree: bool) -> Option<Vec<OutputPlan>> {
        let mut out: Vec<OutputPlan> = Vec::new();
        let mut spans: Vec<Span> = Vec::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Save { what, path } = &s.kind else {
                continue;
            };
            let Some(resolved) = self.safe_path(path) else {
                ok = false;
                continue;
            };
            let ext = Path::new(&path.node)
                .extension()
                .and_then(|e| e.to_str())
                .unwrap_or("")
                .to_ascii_lowercase();
            let kind = match (what.node.as_str(), ext.as_str()) {
                ("assignments", "csv") => Some(OutputKind::Assignments),
                ("centroids", "csv") => Some(OutputKind::Centroids),
                ("profiles", "csv") => Some(OutputKind::ProfilesCsv),
                ("profiles", "json") => Some(OutputKind::ProfilesJson),
                ("model", "json") => Some(OutputKind::Model),
                ("report", "html") => Some(OutputKind::Report),
                ("report", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save report`".into(),
                        expected: "`.html`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("model", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save model`".into(),
                        expected: "`.json`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("merges" | "tree", _) if !is_tree => {
                    self.err(CheckError::NeedsTree {
                        what: what.node.clone(),
                        span: what.span,
                    });
                    None
                }
                ("merges", "csv") => Some(OutputKind::Merges),
                ("tree", "nwk" | "newick") => Some(OutputKind::Newick),
                ("tree", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save tree`".into(),
                        expected: "`.nwk` or `.newick`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("assignments" | "centroids" | "merges", _) => {
                    self.err(CheckError::OutputFormat {
                        what: format!("`save {}`", what.node),
                        expected: "`.csv`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                ("profiles", _) => {
                    self.err(CheckError::OutputFormat {
                        what: "`save profiles`".into(),
                        expected: "`.csv` or `.json`",
                        path: path.node.clone(),
                        span: path.span,
                    });
                    None
                }
                (other, _) => {
                    let suggestion = suggest::nearest(other, vocab::SAVE_WHAT);
                    self.err(CheckError::UnknownWord {
                        what: "output",
                        found: other.to_string(),
                        span: what.span,
                        choices:
                            "`assignments`, `profiles`, `centroids`, `model`, `report`, `merges` or `tree`"
                                .into(),
                        help: did_you_mean(
                            &suggestion,
                            "save assignments, profiles, centroids, or a tree's merges and tree",
                        ),
                    });
                    None
                }
            };
            let Some(kind) = kind else {
                ok = false;
                continue;
            };
            let real = paths::Sandbox::real_path(&resolved);
            if let Some(&(_, input)) = self.reads.iter().find(|(r, _)| *r == real) {
                self.err(CheckError::OutputIsInput {
                    path: path.node.clone(),
                    span: path.span,
                    input,
                });
                ok = false;
                continue;
            }
            if let Some(j) = out.iter().position(|o| same_file(&o.resolved, &resolved)) {
                self.err(CheckError::OutputTwice {
                    path: path.node.clone(),
                    span: path.span,
                    first: spans[j],
                });
                ok = false;
                continue;
            }
            spans.push(path.span);
            out.push(OutputPlan {
                kind,
                path: path.node.clone(),
                resolved,
            });
        }
        ok.then_some(out)
    }

    // ---------------------------------------------------------- helpers --

    /// Options by name, reporting unknown and repeated ones.
    fn options<'a>(
        &mut self,
        statement: &'static str,
        given: &'a [OptionPair],
        known: &[vocab::OptionDoc],
    ) -> HashMap<&'static str, &'a OptionPair> {
        let mut out: HashMap<&'static str, &'a OptionPair> = HashMap::new();
        for o in given {
            let Some(doc) = known.iter().find(|d| d.name == o.name.node) else {
                let suggestion = suggest::nearest(&o.name.node, vocab::names(known));
                let all: Vec<String> = vocab::names(known).map(|n| format!("`{n}`")).collect();
                self.err(CheckError::UnknownOption {
                    statement,
                    option: o.name.node.clone(),
                    span: o.name.span,
                    help: did_you_mean(
                        &suggestion,
                        &format!("`{statement}` takes {}", all.join(", ")),
                    ),
                });
                continue;
            };
            if let Some(prev) = out.get(doc.name) {
                self.err(CheckError::Conflict {
                    what: format!("option `{}`", doc.name),
                    span: o.name.span,
                    first: prev.name.span,
                });
                continue;
            }
            out.insert(doc.name, o);
        }
        out
    }

    /// `value` of option `name` when it is at most `most`; else an error
    /// at the option's value, with `why` as help.
    fn at_most(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        name: &str,
        value: usize,
        most: usize,
        why: &str,
    ) -> Option<usize> {
        if value <= most {
            return Some(value);
        }
        if let Some(o) = opts.get(name) {
            self.bad_value(
                name,
                &o.value.node,
                &format!("a whole number up to {}", crate::text::thousands(most)),
                o.value.span,
                why,
            );
        }
        None
    }

    fn whole_option(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        name: &str,
        min: i64,
        default: usize,
    ) -> Option<usize> {
        let Some(o) = opts.get(name) else {
            return Some(default);
        };
        match &o.value.node {
            Value::Number(n) => match n.as_whole() {
                Some(v) if v >= min => Some(v as usize),
                _ => {
                    self.bad_value(
                        name,
                        &o.value.node,
                        &format!("a whole number, {min} or more"),
                        o.value.span,
                        &format!("for example `{name} {default}`"),
                    );
                    None
                }
            },
            other => {
                self.bad_value(
                    name,
                    other,
                    "a whole number",
                    o.value.span,
                    &format!("for example `{name} {default}`"),
                );
                None
            }
        }
    }

    fn positive(&mut self, name: &str, value: &Spanned<Value>) -> Option<f64> {
        match &value.node {
            Value::Number(n) if n.value.is_finite() && n.value > 0.0 => Some(n.value),
            other => {
                self.bad_value(
                    name,
                    other,
                    "a number above 0",
                    value.span,
                    "1 counts as one feature; 2 as two; 0.5 as half of one",
                );
                None
            }
        }
    }

    fn bad_value(&mut self, option: &str, found: &Value, expected: &str, span: Span, help: &str) {
        let found = match found {
            Value::Number(_) | Value::Range(..) => format!("`{found}`"),
            other => format!("{} `{other}`", other.kind_name()),
        };
        self.err(CheckError::BadValue {
            option: option.into(),
            found,
            expected: expected.into(),
            span,
            help: help.into(),
        });
    }

    /// A word from a fixed list, with a suggestion when it is not.
    fn word_choice<T>(
        &mut self,
        what: &'static str,
        word: &Spanned<String>,
        names: &[&'static str],
        parse: fn(&str) -> Option<T>,
    ) -> Option<T> {
        if let Some(v) = parse(&word.node) {
            return Some(v);
        }
        let suggestion = suggest::nearest(&word.node, names.iter().copied());
        let choices: Vec<String> = names.iter().map(|n| format!("`{n}`")).collect();
        self.err(CheckError::UnknownWord {
            what,
            found: word.node.clone(),
            span: word.span,
            choices: choices.join(", "),
            help: did_you_mean(
                &suggestion,
                &format!("choose one of {}", choices.join(", ")),
            ),
        });
        None
    }
}

/// The input as checked, with the spans later checks point back at.
struct CheckedInput {
    plan: InputPlan,
    key_span: Span,
}

fn f_mut(plans: &mut [FeaturePlan], i: usize) -> &mut FeaturePlan {
    &mut plans[i]
}

/// The statement word as a `'static` string; every word that reaches here
/// is one of the grammar's statement words.
fn word_static(word: &str) -> &'static str {
    SINGLE
        .iter()
        .find(|w| **w == word)
        .copied()
        .unwrap_or("statement")
}

/// Whether two paths name the same file: lexically after dropping `.`
/// components, or, when both exist, by their canonical paths.
fn same_file(a: &Path, b: &Path) -> bool {
    let norm = |p: &Path| {
        p.components()
            .filter(|c| !matches!(c, Component::CurDir))
            .collect::<PathBuf>()
    };
    if norm(a) == norm(b) {
        return true;
    }
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}
