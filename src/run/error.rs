//! What can go wrong while running a checked plan: mostly the data itself.
//! Every data problem names the file, the 1-based line and the column.

use crate::engine::EngineError;
use miette::Diagnostic;
use thiserror::Error;

/// A place in a data file: 1-based line, 1-based column (field number) and
/// the column's name.
#[derive(Debug, Clone, PartialEq)]
pub struct Place {
    pub file: String,
    pub line: u64,
    pub column: usize,
    pub name: String,
}

impl Place {
    /// Record `record` (0-based) of a file or table `shown` whose columns
    /// are `names`, at the column `at` (0-based): the record's line is its
    /// place in the same table written as CSV (the first record is line 2).
    pub fn of_record(shown: &str, names: &[String], at: usize, record: usize) -> Place {
        Place {
            file: shown.to_string(),
            line: record as u64 + 2,
            column: at + 1,
            name: names.get(at).cloned().unwrap_or_default(),
        }
    }
}

impl std::fmt::Display for Place {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // A table on a connection is described in words that quote its
        // own names ("table `members` on connection `coop`"); a record's
        // line there is its place in key order, as in the same table
        // written as CSV.
        match self.file.contains('`') {
            true => write!(f, "{}", self.file),
            false => write!(f, "`{}`", self.file),
        }?;
        write!(
            f,
            " line {}, column {} (`{}`)",
            self.line, self.column, self.name
        )
    }
}

#[derive(Debug, Clone, Error, Diagnostic, PartialEq)]
pub enum RunError {
    #[error("cannot read `{file}`: {reason}")]
    #[diagnostic(
        code(assort::run::unreadable),
        help("check that the file exists and can be read")
    )]
    Unreadable { file: String, reason: String },

    #[error("`{file}` line {line}: {reason}")]
    #[diagnostic(
        code(assort::run::malformed_csv),
        help(
            "every line needs as many fields as the header; quote fields that hold the separator"
        )
    )]
    Malformed {
        file: String,
        line: u64,
        reason: String,
    },

    #[error("{place}: found `{found}`, expected a number")]
    #[diagnostic(code(assort::run::not_a_number), help("{help}"))]
    NotANumber {
        place: Place,
        found: String,
        help: String,
    },

    #[error("{place}: found `{found}`, which is not {}", if *.flag { format!("a value of the flag `{}`", place.name) } else { format!("one of the levels of `{}`", place.name) })]
    #[diagnostic(code(assort::run::not_a_level), help("{help}"))]
    NotALevel {
        place: Place,
        found: String,
        /// A flag's value, else an ordered category's.
        flag: bool,
        help: String,
    },

    #[error("{place}: {found} cannot weigh a record; every record needs a weight above 0")]
    #[diagnostic(
        code(assort::run::bad_weight),
        help("`represents {}` says how many members each record stands for; mend the value, or leave the record out of the extract", place.name)
    )]
    BadWeight { place: Place, found: String },

    #[error("{place}: value is missing and the recipe has no rule for missing values in `{}`", place.name)]
    #[diagnostic(
        code(assort::run::missing_value),
        help("add a rule such as `missing fill median` or `missing drop for {}`", place.name)
    )]
    MissingValue { place: Place },

    #[error("{place}: category is blank and the recipe has no rule for blanks in `{}`", place.name)]
    #[diagnostic(
        code(assort::run::blank_category),
        help("add `missing keep for {0}` to keep a blank as a level of its own, `(blank)`, or `missing drop for {0}` to leave such records out", place.name)
    )]
    BlankCategory { place: Place },

    #[error(
        "column `{column}` has no values at all, so there is nothing to compute a fill value from"
    )]
    #[diagnostic(
        code(assort::run::nothing_to_fill_from),
        help("fill it with a number you choose, or leave the column out")
    )]
    NothingToFillFrom { column: String },

    #[error("{place}: key `{key}` appears again (first on line {first_line})")]
    #[diagnostic(
        code(assort::run::duplicate_key),
        help("the key column must identify each record once")
    )]
    DuplicateKey {
        place: Place,
        key: String,
        first_line: u64,
    },

    #[error("{place}: the key is blank")]
    #[diagnostic(
        code(assort::run::blank_key),
        help("every record needs a key, so it can be found in the outputs")
    )]
    BlankKey { place: Place },

    #[error("`{file}` has no column `{column}` any more")]
    #[diagnostic(
        code(assort::run::column_gone),
        help("the file changed after the recipe was checked; run again")
    )]
    ColumnGone { file: String, column: String },

    #[error("{place}: `{transform}` cannot take {value}")]
    #[diagnostic(code(assort::run::transform_domain), help("{help}"))]
    TransformDomain {
        place: Place,
        transform: &'static str,
        value: f64,
        help: &'static str,
    },

    #[error("only {n} records remain after missing values are handled; k {k} needs at least {k}")]
    #[diagnostic(
        code(assort::run::too_few_records),
        help("lower k, or fill missing values instead of dropping records")
    )]
    TooFewRecords { k: usize, n: usize },

    #[error("no k leaves every segment at or above the floor of {floor}: {smallest}")]
    #[diagnostic(code(assort::run::below_floor), help("{help}; nothing was written"))]
    BelowFloor {
        floor: String,
        /// Each k with its smallest segment, in words.
        smallest: String,
        help: String,
    },

    #[error("the run was stopped (Ctrl-C) {during}; nothing was written")]
    #[diagnostic(
        code(assort::run::stopped),
        help("run again to finish it; a stopped run changes nothing")
    )]
    Stopped { during: &'static str },

    #[error("k-means for k {k}: {source}")]
    #[diagnostic(
        code(assort::run::engine),
        help("lower k, or add features that tell the records apart")
    )]
    Engine {
        k: usize,
        #[source]
        source: EngineError,
    },

    #[error(
        "cutting the tree at height {height} leaves a single segment (its top merge is at {top})"
    )]
    #[diagnostic(
        code(assort::run::height_too_high),
        help("choose a lower height, or cut at a number of segments with `k`")
    )]
    HeightTooHigh { height: f64, top: f64 },

    #[error("{n} records: {why}")]
    #[diagnostic(
        code(assort::run::tree_too_large),
        help(
            "add `micro 500` to `tree`: k-means into micro-segments first, then the tree over them"
        )
    )]
    TreeTooLarge { n: usize, why: String },

    #[error("`{file}` has no column `{column}`, which the model needs")]
    #[diagnostic(
        code(assort::run::model_column_missing),
        help("score data with the same columns the model was trained on")
    )]
    ModelColumnMissing { file: String, column: String },

    #[error("`{file}` is not a segment model assort can read: {reason}")]
    #[diagnostic(
        code(assort::run::bad_model),
        help("a model is written whole by a recipe's `save model` line and read as it was written; if it was edited or damaged, rerun the recipe that saved it")
    )]
    BadModel { file: String, reason: String },

    #[error("`{file}` is not an assignments file: it has no `segment` column")]
    #[diagnostic(
        code(assort::run::not_assignments),
        help("compare files written by `save assignments` or `assort assign`")
    )]
    NotAssignments { file: String },

    #[error("{old} and {new} have no key in common, so there is nothing to compare")]
    #[diagnostic(
        code(assort::run::nothing_in_common),
        help("the first keys are `{old_key}` and `{new_key}`: compare assignments of the same records, keyed by the same column")
    )]
    NothingInCommon {
        old: String,
        new: String,
        old_key: String,
        new_key: String,
    },

    #[error("{place}: {biggest:e} is too large to scale; the feature's sums would overflow")]
    #[diagnostic(
        code(assort::run::too_large_to_scale),
        help("values near 1e308 are beyond what the method can handle; check the column for corrupt values, and if they are real, `transform {} log1p` or `clip 0..0.99` brings them within range", place.name)
    )]
    TooLargeToScale { place: Place, biggest: f64 },

    #[error("labels would move to other segments, {moves}")]
    #[diagnostic(code(assort::run::labels_moved), help("{help}"))]
    LabelsMoved { moves: String, help: String },

    #[error("cannot run `{recipe}` now: {reason}")]
    #[diagnostic(
        code(assort::run::busy),
        help("wait for the other run to finish, then run again; two runs of one recipe at once would mix their outputs")
    )]
    Busy { recipe: String, reason: String },

    #[error("cannot write `{path}`: {reason}")]
    #[diagnostic(
        code(assort::run::write),
        help(
            "check that the folder can be written; every output was left as it was before this run"
        )
    )]
    Write { path: String, reason: String },

    #[error("{reason}")]
    #[diagnostic(
        code(assort::run::database),
        help("nothing was written; the connection comes from the service file or the PG variables (docs/scale-out.md)")
    )]
    Database { reason: String },

    #[error("{reason}")]
    #[diagnostic(
        code(assort::run::cluster),
        help("nothing was written; the cluster's scheduler is found at the address in `ASSORT_CLUSTER_NAME` (`host:port`, NAME the recipe's `cluster` in capitals), and its executors read the Parquet input by the same path (docs/scale-out.md)")
    )]
    Cluster { reason: String },

    #[error("`sample ... by key` cannot run: {reason}")]
    #[diagnostic(
        code(assort::run::by_key),
        help("remove `by key` to run the sample by record number, or change the data as the message says; nothing was written")
    )]
    ByKey { reason: String },
}
