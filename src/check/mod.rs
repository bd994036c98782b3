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
mod choice;
pub mod complete;
pub mod diagnostic;
mod features;
pub mod fixes;
mod input;
pub(crate) mod kinds;
mod method;
mod outputs;
mod passes;
pub mod paths;
mod previous;
pub mod probe;
pub mod shape;
pub mod shown;
use shown::limit_problems;
pub use shown::{clipped, MOST_PROBLEMS};
pub mod suggest;
mod values;
pub mod vocab;
mod words;

use crate::plan::*;
use crate::syntax::{self, ast::*};
use diagnostic::{did_you_mean, CheckError, Problem};
use probe::{ColumnKind, DecimalMark, Probe, ProbeError};
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
    /// Restarts of the k-means stage of the micro-segment route.
    pub const MICRO_RESTARTS: usize = 3;
    /// The most passes of k-medoids' swaps.
    pub const PASSES: usize = 100;
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

    /// Why a recipe could not be read, and what to do: (message, help).
    /// Bytes that are not UTF-8 are located by line.
    pub fn unreadable(path: &Path, e: &std::io::Error) -> (String, String) {
        let shown = path.display();
        match e.kind() {
            std::io::ErrorKind::NotFound => (
                format!("recipe `{shown}` not found"),
                "give the path of a recipe file, relative to this folder or absolute, such as `recipes/coop-members.assort`".into(),
            ),
            std::io::ErrorKind::InvalidData => {
                let line = std::fs::read(path).ok().and_then(|bytes| {
                    let valid = std::str::from_utf8(&bytes).err()?.valid_up_to();
                    Some(bytes[..valid].iter().filter(|&&b| b == b'\n').count() + 1)
                });
                let at = line.map_or(String::new(), |l| format!(" at line {l}"));
                (
                    format!("recipe `{shown}` is not UTF-8 text{at}"),
                    "recipes are UTF-8 text; save it again as UTF-8 (most editors offer the encoding in their save dialog)".into(),
                )
            }
            _ => (
                format!("cannot read recipe `{shown}`: {e}"),
                "check the file's permissions".into(),
            ),
        }
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

    /// Errors found, those past [`MOST_PROBLEMS`] included.
    pub fn error_count(&self) -> usize {
        self.problems
            .iter()
            .map(|p| match p {
                Problem::Check(CheckError::MoreProblems { hidden_errors, .. }) => *hidden_errors,
                p if p.is_error() => 1,
                _ => 0,
            })
            .sum()
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
    /// Tables a recipe may write on its input's connection (`save table`),
    /// by name as the recipe writes it.
    pub allow_tables: Vec<String>,
}

/// Checks a recipe with the given permissions.
pub fn check_with(source: &RecipeSource, options: &CheckOptions) -> Checked {
    let tree = syntax::parse(&source.text);
    let mut cx = Checker {
        sandbox: paths::Sandbox::new(&source.folder(), &options.allow_dirs),
        reads: Vec::new(),
        allow_tables: options.allow_tables.clone(),
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
        database: false,
        cluster: false,
        read_passes: None,
        decimal: DecimalMark::Point,
        unparsed: tree
            .errors
            .iter()
            .filter_map(|e| e.statement_word.clone())
            .chain(tree.statements.iter().filter_map(|s| {
                match &s.kind {
                    StatementKind::Unknown { word } => vocab::renamed_statement(&word.node)
                        .map(|(new, _)| new.to_string())
                        .or_else(|| suggest::nearest(&word.node, vocab::statement_words())),
                    _ => None,
                }
            }))
            .collect(),
        end: end_span(&source.text),
        category_spans: HashMap::new(),
        kinds: HashMap::new(),
        settings: settings(&tree, &source.text),
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
    limit_problems(&mut cx.problems, cx.end);
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

/// The statements that shape the segments, which only a `previous`
/// statement compares (with those its model records).
fn settings(tree: &syntax::ast::Recipe, text: &str) -> Vec<String> {
    let previous = tree
        .statements
        .iter()
        .any(|s| matches!(s.kind, StatementKind::Previous { .. }));
    if previous {
        syntax::shaping_statements(text)
    } else {
        Vec::new()
    }
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
/// The fewest records a micro-segment of `tree ... micro` holds on average.
const PER_MICRO_SEGMENT: usize = 5;
/// The most reference sets or resamples `evidence` takes.
const MOST_EVIDENCE_SETS: usize = 1_000;
/// The smallest sample `kmeans ... sample` takes.
const SMALLEST_SAMPLE: i64 = 1_000;
/// Records per segment a k-means sample must allow at the largest k.
const PER_SEGMENT_IN_SAMPLE: usize = 10;
pub const MAX_K_SPAN: i64 = 500;

pub use crate::plan::TreeLimit;

/// Statements that may appear once, by word.
const SINGLE: [&str; 15] = [
    "recipe",
    "seed",
    "input",
    "features",
    "scale",
    "kmeans",
    "kmedoids",
    "kprototypes",
    "tree",
    "evidence",
    "choose",
    "validate",
    "compare",
    "previous",
    "represents",
];

struct Checker {
    folder: PathBuf,
    recipe_stem: String,
    problems: Vec<Problem>,
    /// The input's header and sample, once read.
    probe: Option<std::sync::Arc<Probe>>,
    input_file: String,
    /// The input is a table or a query on a connection.
    database: bool,
    /// The input's rounds run on a cluster (`cluster NAME`).
    cluster: bool,
    /// Where the input said `read passes`.
    read_passes: Option<Span>,
    /// The input's decimal mark, once `input` is checked.
    decimal: DecimalMark,
    /// Statement words of statements that did not parse, and the words
    /// misspelt statement words most likely meant.
    unparsed: Vec<String>,
    /// The recipe's last character, where a missing statement is reported.
    end: Span,
    /// Where each category column was named.
    category_spans: HashMap<String, Span>,
    /// Columns `ordered` or `flags` gave a kind: where, and the kind.
    kinds: HashMap<String, (Span, FeatureKind)>,
    /// The folders the recipe may touch.
    sandbox: paths::Sandbox,
    /// Every file the recipe reads (real path, span), so no output can
    /// overwrite one.
    reads: Vec<(PathBuf, Span)>,
    /// The tables the recipe may write (`--allow-table`).
    allow_tables: Vec<String>,
    /// The statements that shape the segments, to compare with those a
    /// `previous` model records.
    settings: Vec<String>,
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
        // A statement that is there but did not parse (or is misspelt) is
        // reported as such; "the recipe has no ..." would only mislead.
        let follows = match &e {
            CheckError::MissingStatement { keyword, .. } => {
                self.unparsed.iter().any(|w| w == keyword)
            }
            CheckError::NoMethod { .. } => self
                .unparsed
                .iter()
                .any(|w| method::METHODS.contains(&w.as_str())),
            _ => false,
        };
        if !follows {
            self.problems.push(Problem::Check(e));
        }
    }

    /// The statement of each word that may appear once, reporting unknown
    /// statement words and second statements of such a word.
    fn statements_once<'s>(
        &mut self,
        stmts: &'s [Statement],
    ) -> HashMap<&'static str, &'s Statement> {
        let mut first: HashMap<&'static str, &Statement> = HashMap::new();
        for s in stmts {
            if let StatementKind::Unknown { word } = &s.kind {
                self.unknown_statement(word);
                continue;
            }
            let word = s.keyword.node.as_str();
            if !SINGLE.contains(&word) {
                continue;
            }
            match first.get(word) {
                Some(prev) => self.err(CheckError::DuplicateStatement {
                    keyword: word.to_string(),
                    span: s.keyword.span,
                    first: prev.keyword.span,
                }),
                None => {
                    first.insert(word_static(word), s);
                }
            }
        }
        first
    }

    /// A line whose first word is no statement word: a retired word gets
    /// its new name, a misspelt one the nearest word.
    fn unknown_statement(&mut self, word: &Spanned<String>) {
        let help = match vocab::renamed_statement(&word.node) {
            Some((new, why)) => {
                format!(
                    "`{}` is now called `{new}`: {why}; did you mean `{new}`?",
                    word.node
                )
            }
            None => {
                let suggestion = suggest::nearest(&word.node, vocab::statement_words());
                let all: Vec<_> = vocab::statement_words().collect();
                did_you_mean(&suggestion, &format!("statements are {}", all.join(", ")))
            }
        };
        self.err(CheckError::UnknownStatement {
            word: word.node.clone(),
            span: word.span,
            help,
        });
    }

    /// Refuses `represents` beside `sample ... by key`, whose exact rounds
    /// count every record once.
    fn weights_by_key(
        &mut self,
        method: Option<&MethodPlan>,
        record_weights: &Option<Option<String>>,
        represents: Option<&Statement>,
    ) {
        let by_key = matches!(method, Some(MethodPlan::KMeans(km)) if km.by_key);
        if let (true, Some(Some(_)), Some(stmt)) = (by_key, record_weights, represents) {
            self.err(CheckError::NotWithMethod {
                what: "`represents` (records standing for others)".into(),
                method: "`sample ... by key`".into(),
                span: stmt.span,
                help: "the exact rounds count every record once; remove `by key` to run the sample by record number, or remove `represents`".into(),
            });
        }
    }

    /// Builds the plan, collecting problems on the way. Returns a plan only
    /// when every required part could be settled.
    fn plan(&mut self, stmts: &[Statement]) -> Option<Plan> {
        let first = self.statements_once(stmts);
        let find = |w: &str| first.get(w).copied();
        let input = self.input(find("input"));
        if let Some(i) = &input {
            self.keyless_refusals(stmts, i);
        }
        let categories = self.categories(stmts, input.as_ref());
        let kinded = self.kinds(stmts, input.as_ref());
        let features = self.features(find("features"), input.as_ref(), &categories, kinded);
        self.cautions(stmts, features.as_deref(), categories.as_deref());
        let rules = self.rules(stmts);
        let key = input.as_ref().map(|i| i.plan.key.clone());
        let clustered = features.as_deref().unwrap_or_default();
        let tally = self.tallied(stmts, key.as_deref(), clustered);
        let record_weights = self.record_weights(find("represents"), key.as_deref(), clustered);
        let display = self.display(stmts);
        let features = features.map(|f| self.feature_rules(&rules, f));
        let categories = categories.map(|c| self.category_gaps(&rules, c));
        let scale = self.scale(find("scale"));
        let method = self.method(method::METHODS.iter().filter_map(|w| find(w)).collect());
        if let Some(m) = &method {
            self.method_limits(stmts, m);
        }
        self.weights_by_key(method.as_ref(), &record_weights, find("represents"));
        self.passes_route(stmts, method.as_ref());
        let ks: Option<Vec<usize>> = method.as_ref().map(|m| m.ks().to_vec());
        let choose = self.choose(find("choose"), ks.as_deref());
        let floor = self.floor(find("choose"));
        let previous = self.previous_against(
            find("previous"),
            features.as_deref(),
            categories.as_deref(),
            key.as_deref(),
        );
        // With a previous model, segments keep its numbers and new ones
        // follow its highest, so labels may go that far beyond k.
        let label_room = previous
            .as_ref()
            .and_then(|p| p.as_ref())
            .map_or(0, |p| p.highest);
        let labels = self.labels(stmts, ks.as_deref(), label_room);
        let briefs = self.briefs(stmts, ks.as_deref(), label_room);
        let evidence = self.evidence(find("evidence"), choose, ks.as_deref());
        let validate = self.validate(find("validate"), input.as_ref());
        let compare = self.compare(find("compare"));
        let outputs = self.outputs(stmts, matches!(method, Some(MethodPlan::Tree(_))));
        let table = self.table_output(stmts, input.as_ref().map(|i| &i.plan));
        let seed = self.seed(find("seed"));
        let (name, title, period, records_noun) = self.recipe_names(find("recipe"));
        let mut input = input?.plan;
        input.passes = self.read_passes.is_some();
        Some(Plan {
            format: PLAN_FORMAT,
            name,
            title,
            period,
            records_noun,
            seed: seed?,
            input,
            features: features?,
            categories: categories?,
            scale: scale?,
            method: method?,
            choose: choose?,
            floor: floor?,
            labels: labels?,
            briefs: briefs?,
            evidence: evidence?,
            validate: validate?,
            compare: compare?,
            previous: previous?.map(|p| p.plan),
            outputs: outputs?,
            table: table?,
            tally: tally?,
            record_weights: record_weights?,
            display: display?,
            label_lines: BTreeMap::new(),
        })
    }

    /// The `previous` statement, checked against this recipe's columns.
    fn previous_against(
        &mut self,
        stmt: Option<&Statement>,
        features: Option<&[FeaturePlan]>,
        categories: Option<&[CategoryPlan]>,
        key: Option<&str>,
    ) -> Option<Option<previous::Previous>> {
        let numeric: Option<Vec<String>> =
            features.map(|f| f.iter().map(|f| f.column.clone()).collect());
        let cats: Option<Vec<String>> =
            categories.map(|c| c.iter().map(|c| c.column.clone()).collect());
        self.previous(stmt, numeric.as_deref(), cats.as_deref(), key)
    }

    /// The `scale` statement's method; z-scores unless given.
    fn scale(&mut self, stmt: Option<&Statement>) -> Option<Scale> {
        match stmt {
            Some(Statement {
                kind: StatementKind::Scale { method },
                ..
            }) => self.word_choice("scale method", method, &Scale::NAMES, Scale::parse),
            _ => Some(Scale::Zscore),
        }
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
}

/// The input as checked, with the spans later checks point back at.
struct CheckedInput {
    plan: InputPlan,
    key_span: Span,
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
