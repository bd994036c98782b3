//! What the checker can say about a recipe.
//!
//! Each kind carries the data it speaks of (names, spans, counts), and its
//! wording lives on the variant. Message conventions: lowercase, names in
//! backticks, no trailing period, "found X, expected Y".

use crate::syntax::{ast::Span, SyntaxError};
use miette::{Diagnostic, GraphicalReportHandler, GraphicalTheme};
use thiserror::Error;

/// Any problem found in a recipe: syntax or meaning.
#[derive(Debug, Clone, Error, Diagnostic)]
pub enum Problem {
    #[error(transparent)]
    #[diagnostic(transparent)]
    Syntax(#[from] SyntaxError),
    #[error(transparent)]
    #[diagnostic(transparent)]
    Check(#[from] CheckError),
}

impl Problem {
    /// A problem of the recipe as a whole (a statement it lacks), rather
    /// than of one statement: expected while a recipe is being built.
    pub fn is_incomplete(&self) -> bool {
        matches!(
            self,
            Problem::Check(
                CheckError::MissingStatement { .. }
                    | CheckError::NoMethod { .. }
                    // A `missing` rule entered next settles it.
                    | CheckError::GapsWithoutRule { .. }
                    | CheckError::CategoryGapsWithoutRule { .. }
            )
        )
    }

    pub fn is_error(&self) -> bool {
        !matches!(
            self.severity(),
            Some(miette::Severity::Warning) | Some(miette::Severity::Advice)
        )
    }
}

/// How a suggestion is written in a help line, before and after it; the
/// quick fixes read it back (see [`super::fixes`]).
pub(crate) const DID_YOU_MEAN: (&str, &str) = ("did you mean `", "`?");

/// "did you mean `x`?" or a fallback sentence.
pub(crate) fn did_you_mean(suggestion: &Option<String>, otherwise: &str) -> String {
    match suggestion {
        Some(s) => format!("{}{s}{}", DID_YOU_MEAN.0, DID_YOU_MEAN.1),
        None => otherwise.to_string(),
    }
}

#[derive(Debug, Clone, Error, Diagnostic, PartialEq)]
pub enum CheckError {
    #[error("unknown statement `{word}`")]
    #[diagnostic(code(assort::unknown_statement), help("{help}"))]
    UnknownStatement {
        word: String,
        #[label("not a statement word")]
        span: Span,
        help: String,
    },

    #[error("`{statement}` has no option `{option}`")]
    #[diagnostic(code(assort::unknown_option), help("{help}"))]
    UnknownOption {
        statement: &'static str,
        option: String,
        #[label("unknown option")]
        span: Span,
        help: String,
    },

    #[error("`{option}` found {found}, expected {expected}")]
    #[diagnostic(code(assort::bad_value), help("{help}"))]
    BadValue {
        option: String,
        found: String,
        expected: String,
        #[label("this value")]
        span: Span,
        help: String,
    },

    #[error("unknown {what} `{found}`")]
    #[diagnostic(code(assort::unknown_word), help("{help}"))]
    UnknownWord {
        what: &'static str,
        found: String,
        #[label("expected one of {choices}")]
        span: Span,
        choices: String,
        help: String,
    },

    #[error("no column `{column}` in `{file}`")]
    #[diagnostic(code(assort::unknown_column), help("{help}"))]
    UnknownColumn {
        column: String,
        file: String,
        #[label("not in the header")]
        span: Span,
        help: String,
    },

    #[error(
        "column `{column}` holds text (such as `{example}`), so it cannot be a numeric feature"
    )]
    #[diagnostic(
        code(assort::text_feature),
        help("to segment on it, list it as a category instead: `categories {column}`")
    )]
    TextFeature {
        column: String,
        example: String,
        #[label("text column")]
        span: Span,
    },

    #[error(
        "`{file}` line {line}, column {column} (`{name}`): found `{found}`, expected a number"
    )]
    #[diagnostic(code(assort::not_a_number), help("{help}"))]
    NotANumberInData {
        file: String,
        line: u64,
        column: usize,
        name: String,
        found: String,
        #[label("this feature")]
        span: Span,
        help: String,
    },

    #[error(
        "`{file}` line {line}, column {column} (`{name}`): found `{found}`, which is not {expected}"
    )]
    #[diagnostic(code(assort::not_a_level), help("{help}"))]
    ValueNotOfKind {
        file: String,
        line: u64,
        column: usize,
        name: String,
        found: String,
        expected: String,
        #[label("its kind is given here")]
        span: Span,
        help: String,
    },

    #[error("`ordered {column}` needs two levels or more, lowest first")]
    #[diagnostic(
        code(assort::one_level),
        help("list the levels from lowest to highest with `<` between them, such as `ordered {column} \"bronze\" < \"silver\" < \"gold\"`; a column of one value adds nothing to distances")
    )]
    OneLevel {
        column: String,
        #[label("only this level")]
        span: Span,
    },

    #[error("a blank cannot be a level of `{column}`")]
    #[diagnostic(
        code(assort::blank_level),
        help("a blank value is a gap, handled by `missing` (`missing fill median for {column}` takes the middle rank, `missing drop for {column}` leaves the record out); list only the written levels")
    )]
    BlankLevel {
        column: String,
        #[label("blank")]
        span: Span,
    },

    #[error("level `{level}` is named twice")]
    #[diagnostic(
        code(assort::level_twice),
        help("each level has one place in the order; remove the second")
    )]
    LevelTwice {
        level: String,
        #[label("named again here")]
        span: Span,
        #[label("first named here")]
        first: Span,
    },

    #[error("`{column}` is the key column, so it cannot also be clustered on")]
    #[diagnostic(
        code(assort::key_clustered),
        help("the key identifies records in the outputs; it never takes part in the segmentation")
    )]
    KeyClustered {
        column: String,
        #[label("the key")]
        span: Span,
    },

    #[error("`{column}` is named twice")]
    #[diagnostic(code(assort::duplicate_column), help("{help}"))]
    DuplicateColumn {
        column: String,
        #[label("named again here")]
        span: Span,
        #[label("first named here")]
        first: Span,
        /// What the statements that name it allow: clustered once, or
        /// tallied once.
        help: &'static str,
    },

    #[error("`{column}` is not a numeric feature of this recipe")]
    #[diagnostic(code(assort::not_a_feature), help("{help}"))]
    NotAFeature {
        column: String,
        #[label("not among the features")]
        span: Span,
        help: String,
    },

    #[error("a recipe takes one `{keyword}` statement, found a second")]
    #[diagnostic(code(assort::duplicate_statement), help("keep one of them"))]
    DuplicateStatement {
        keyword: String,
        #[label("second")]
        span: Span,
        #[label("first")]
        first: Span,
    },

    #[error("{what} is given twice")]
    #[diagnostic(code(assort::conflict), help("keep one of them"))]
    Conflict {
        what: String,
        #[label("second")]
        span: Span,
        #[label("first")]
        first: Span,
    },

    #[error("`{column}` looks like {kind} (`{word}`)")]
    #[diagnostic(
        code(assort::personal_data),
        severity(Warning),
        help("segmenting or targeting people on it may be unlawful or unfair; local law and your organisation's privacy practice decide. If its use has been reviewed and approved, say so in the recipe: `acknowledge {column} \"who approved it, and when\"`")
    )]
    PersonalData {
        column: String,
        kind: &'static str,
        word: &'static str,
        #[label("personal data?")]
        span: Span,
    },

    #[error("`acknowledge` needs a reason")]
    #[diagnostic(
        code(assort::acknowledge_reason),
        help("say who reviewed the column and when, so the next reader can check")
    )]
    EmptyReason {
        #[label("empty")]
        span: Span,
    },

    #[error("the recipe names no method")]
    #[diagnostic(
        code(assort::no_method),
        help("say how to form segments: `kmeans k 2..9` or `tree linkage ward k 2..9`")
    )]
    NoMethod {
        #[label("the recipe ends here without one")]
        span: Span,
    },

    #[error("`{linkage}` linkage needs Euclidean distances, found `distance {distance}`")]
    #[diagnostic(
        code(assort::needs_euclidean),
        help("`{linkage}` measures distances between group means, which exist only in Euclidean geometry; use `distance euclidean`, or `average`, `complete`, `single` or `weighted` linkage with this distance")
    )]
    NeedsEuclidean {
        linkage: &'static str,
        distance: &'static str,
        #[label("this distance")]
        span: Span,
        #[label("this linkage")]
        linkage_span: Span,
    },

    #[error("`{column}` cannot weigh records: {why}")]
    #[diagnostic(code(assort::not_a_weight), help("{help}"))]
    NotAWeight {
        column: String,
        why: String,
        #[label("not a record weight")]
        span: Span,
        help: String,
    },

    #[error("`{column}` cannot be tallied: {why}")]
    #[diagnostic(code(assort::not_tallied), help("{help}"))]
    NotTallied {
        column: String,
        why: String,
        #[label("not a value column")]
        span: Span,
        help: String,
    },

    #[error("`{column}` holds {what} in {source_name}, which assort does not read")]
    #[diagnostic(
        code(assort::unreadable_type),
        help("assort segments on numbers and text; derive a number when making the extract (days since a date, say), or leave the column out")
    )]
    UnreadableType {
        column: String,
        what: String,
        /// "the Parquet file", "the database".
        source_name: &'static str,
        #[label("not numbers or text")]
        span: Span,
    },

    #[error("the name given is empty")]
    #[diagnostic(
        code(assort::empty_name),
        help("write the name people should see, such as `call share_fresh \"fresh food share\"`")
    )]
    EmptyName {
        #[label("empty")]
        span: Span,
    },

    #[error("the {what} given is empty")]
    #[diagnostic(
        code(assort::empty_text),
        help("write one line people should read on the segment's card, or leave the {what} out")
    )]
    EmptyText {
        /// `brief` or `action`.
        what: &'static str,
        #[label("empty")]
        span: Span,
    },

    #[error("{records} records: {why}")]
    #[diagnostic(
        code(assort::large_tree),
        help("build the tree over k-means micro-segments instead: add `micro 500` (or more) to `tree`; every record still gets a segment")
    )]
    LargeTree {
        records: usize,
        why: String,
        #[label("one tree over all records")]
        span: Span,
    },

    #[error("{method} over {records} records would hold a dissimilarity matrix of {gib:.1} GiB")]
    #[diagnostic(code(assort::large_matrix), help("{help}"))]
    LargeMatrix {
        method: String,
        records: String,
        gib: f64,
        #[label("compares every pair of records")]
        span: Span,
        help: String,
    },

    #[error("{what} is not available with {method}")]
    #[diagnostic(code(assort::not_with_method), help("{help}"))]
    NotWithMethod {
        what: String,
        method: String,
        #[label("here")]
        span: Span,
        help: String,
    },

    #[error("`save {what}` needs the `tree` method")]
    #[diagnostic(
        code(assort::needs_tree),
        help("merges and the tree exist only when segments come from `tree`")
    )]
    NeedsTree {
        what: String,
        #[label("no tree to save")]
        span: Span,
    },

    #[error("the recipe has no `{keyword}` statement")]
    #[diagnostic(code(assort::missing_statement), help("{help}"))]
    MissingStatement {
        keyword: &'static str,
        #[label("the recipe ends here without one")]
        span: Span,
        help: String,
    },

    #[error("`{statement}` needs the option `{option}`")]
    #[diagnostic(code(assort::missing_option), help("{help}"))]
    MissingOption {
        statement: &'static str,
        option: &'static str,
        #[label("add `{option}` here")]
        span: Span,
        help: String,
    },

    #[error("`features all` took {took}; left out {left}")]
    #[diagnostic(
        code(assort::all_features),
        severity(Advice),
        help("name the columns instead (`features a, b, c`) to fix the list whatever the file holds; `features all except COLUMNS` leaves some out")
    )]
    AllFeatures {
        took: String,
        left: String,
        #[label("these columns")]
        span: Span,
    },

    #[error("`{column}` looks like {what}, not a measure")]
    #[diagnostic(
        code(assort::looks_like_code),
        severity(Warning),
        help("a number that names or dates something has no distance that means anything (member 1001 is no nearer member 1002 than member 9000): leave it out with `features all except {column}`, or list the features by name; if it is a real measure, list it by name to say so")
    )]
    LooksLikeCode {
        column: String,
        what: &'static str,
        #[label("taken by `all`")]
        span: Span,
    },

    #[error("segments {other} and {segment} are both called \"{label}\"")]
    #[diagnostic(
        code(assort::same_label),
        help("two segments with one name merge wherever the name is the key (a CRM import, a pivot table); give each segment a name of its own")
    )]
    SameLabel {
        label: String,
        segment: usize,
        other: usize,
        #[label("the same name again")]
        span: Span,
        #[label("first here")]
        first: Span,
    },

    #[error("`{what}` needs a key column, and this file has none (`no key`)")]
    #[diagnostic(
        code(assort::needs_key),
        help("line numbers do not identify a record from one file to the next, so {why}; name a key column with `key COLUMN`, or drop this statement")
    )]
    NeedsKey {
        what: &'static str,
        why: &'static str,
        #[label("needs a key")]
        span: Span,
        #[label("no key here")]
        no_key: Span,
    },

    #[error("impossible k: {reason}")]
    #[diagnostic(code(assort::impossible_k), help("{help}"))]
    ImpossibleK {
        reason: String,
        #[label("this k")]
        span: Span,
        help: String,
    },

    #[error("data file `{path}` not found")]
    #[diagnostic(code(assort::file_not_found), help("{help}"))]
    FileNotFound {
        path: String,
        help: String,
        #[label("no such file")]
        span: Span,
    },

    #[error("{reason}")]
    #[diagnostic(code(assort::database_input), help("{help}"))]
    DatabaseInput {
        reason: String,
        #[label("{label}")]
        span: Span,
        label: String,
        help: String,
    },

    #[error("data file `{path}` cannot be read: {reason}")]
    #[diagnostic(code(assort::file_unreadable), help("{help}"))]
    FileUnreadable {
        path: String,
        reason: String,
        #[label("this file")]
        span: Span,
        help: String,
    },

    #[error("path `{path}` leads outside the recipe's folder")]
    #[diagnostic(
        code(assort::path_outside),
        help("keep paths inside the recipe's folder (symbolic links are followed); a recipe may touch another folder only when the person running it allows that folder: `--allow-dir FOLDER` after `run`, `check` or `repl`, and in an editor in the language server's command, `assort lsp --allow-dir FOLDER` (docs/editors.md)")
    )]
    PathOutside {
        path: String,
        #[label("outside the recipe's folder")]
        span: Span,
    },

    #[error("path `{path}` is written from the root of this machine: the recipe breaks when its folder is copied or moved")]
    #[diagnostic(
        code(assort::absolute_path),
        severity(Warning),
        help("write it relative to the recipe's folder: `\"{relative}\"`")
    )]
    AbsolutePath {
        path: String,
        relative: String,
        #[label("inside the recipe's folder, written from the root")]
        span: Span,
    },

    #[error("`save table` writes into the input's database, and this recipe's input is a file")]
    #[diagnostic(
        code(assort::table_needs_database),
        help("save the assignments as a file (`save assignments \"out/assignments.csv\"`), or read the input from a connection (`input \"members\" database NAME key COLUMN`) to write them beside it")
    )]
    TableNeedsDatabase {
        #[label("a table on which connection?")]
        span: Span,
    },

    #[error("`{name}` is not a table's name")]
    #[diagnostic(
        code(assort::table_name),
        help("name a table with letters, digits and `_` (not starting with a digit), its schema before a dot if it needs one: `segments.members_2026q4`; the name is used as written, letter case included")
    )]
    TableName {
        name: String,
        #[label("a table's name")]
        span: Span,
    },

    #[error("`save table \"{name}\"` would replace the recipe's input")]
    #[diagnostic(
        code(assort::table_is_input),
        help("write the segments into a table of their own, for example `{name}_segments`")
    )]
    TableIsInput {
        name: String,
        #[label("replaced")]
        span: Span,
        #[label("read")]
        input: Span,
    },

    #[error("the recipe writes table `{name}` on connection `{connection}`, which the person running it has not allowed")]
    #[diagnostic(
        code(assort::table_not_allowed),
        help("a recipe may come from a colleague, so it writes into a database only where you allow it, by the table's name: `--allow-table {name}` after `run`, `check` or `repl` (and `assort lsp --allow-table {name}` for an editor); the table is dropped and made again with the assignments, in one transaction")
    )]
    TableNotAllowed {
        name: String,
        connection: String,
        #[label("not allowed")]
        span: Span,
    },

    #[error("output `{path}` would overwrite the input data")]
    #[diagnostic(
        code(assort::output_is_input),
        help("write outputs to another file, for example under `out/`")
    )]
    OutputIsInput {
        path: String,
        #[label("output")]
        span: Span,
        #[label("input")]
        input: Span,
    },

    #[error("two outputs write to `{path}`")]
    #[diagnostic(code(assort::output_twice), help("give each output its own file"))]
    OutputTwice {
        path: String,
        #[label("second")]
        span: Span,
        #[label("first")]
        first: Span,
    },

    #[error("{what} must end in {expected}, found `{path}`")]
    #[diagnostic(
        code(assort::output_format),
        help("the file's ending chooses its format")
    )]
    OutputFormat {
        what: String,
        expected: &'static str,
        path: String,
        #[label("this path")]
        span: Span,
    },

    #[error("{what} for segment {segment}, but the recipe makes at most {most} segments")]
    #[diagnostic(
        code(assort::label_out_of_range),
        help("segments are numbered 1 to k, largest first")
    )]
    LabelOutOfRange {
        /// `label`, or `brief`.
        what: &'static str,
        segment: i64,
        most: usize,
        #[label("no such segment")]
        span: Span,
    },

    #[error("no features left to cluster on")]
    #[diagnostic(code(assort::no_features), help("{help}"))]
    NoFeatures {
        #[label("selects nothing")]
        span: Span,
        help: String,
    },

    #[error(
        "category `{column}` has {blanks} in the first {sampled} records, and no rule for them"
    )]
    #[diagnostic(
        code(assort::category_gaps_without_rule),
        help("say what a blank means: `missing keep for {column}` keeps it as a level of its own, `(blank)`; `missing drop for {column}` leaves such records out")
    )]
    CategoryGapsWithoutRule {
        column: String,
        blanks: String,
        sampled: usize,
        #[label("has blanks")]
        span: Span,
    },

    #[error("`{rule}` does not apply to {kind} `{column}`")]
    #[diagnostic(code(assort::rule_not_for_kind), help("{help}"))]
    RuleNotForKind {
        rule: String,
        /// With its article: "a number", "an ordered category".
        kind: &'static str,
        column: String,
        #[label("{kind}")]
        span: Span,
        help: String,
    },

    #[error("`{column}` has {blanks} in the first {sampled} records, and no rule for them")]
    #[diagnostic(
        code(assort::gaps_without_rule),
        help("say what a gap means: `missing fill median for {column}`, `missing drop for {column}`, or one `missing` rule for every column")
    )]
    GapsWithoutRule {
        column: String,
        /// "1 blank value", "3 blank values".
        blanks: String,
        sampled: usize,
        #[label("has gaps")]
        span: Span,
    },

    #[error("{count} more problems not shown, {errors} of them errors")]
    #[diagnostic(
        code(assort::more_problems),
        help("mend the problems above and check again; a recipe with this many problems is best rebuilt from a smaller one that checks")
    )]
    MoreProblems {
        count: String,
        errors: String,
        hidden_errors: usize,
        #[label("checked to here")]
        span: Span,
    },

    #[error("{count} more warnings not shown")]
    #[diagnostic(
        code(assort::more_warnings),
        severity(Warning),
        help("mend the warnings above and check again to see the rest")
    )]
    MoreWarnings {
        count: String,
        #[label("checked to here")]
        span: Span,
    },

    #[error("key `{key}` appears twice in `{file}`: lines {first} and {again}")]
    #[diagnostic(
        code(assort::repeated_key),
        help("each record needs a key of its own in `{column}`; remove the repeated record, or key the file by another column")
    )]
    RepeatedKey {
        column: String,
        key: String,
        file: String,
        first: u64,
        again: u64,
        #[label("this key column")]
        span: Span,
    },

    #[error("`{file}` line {line}: the key `{column}` is blank")]
    #[diagnostic(
        code(assort::blank_key),
        help("every record needs a key, so it can be found in the outputs; fill it in, or remove the record")
    )]
    BlankKey {
        column: String,
        file: String,
        line: u64,
        #[label("this key column")]
        span: Span,
    },

    #[error("the previous model does not fit this recipe: {reason}")]
    #[diagnostic(code(assort::previous_mismatch), help("{help}"))]
    PreviousMismatch {
        reason: String,
        #[label("this model")]
        span: Span,
        help: String,
    },

    #[error("last run's model was made with other settings (recipe `{recipe}`): it had {then}; this recipe has {now}")]
    #[diagnostic(
        code(assort::previous_other_settings),
        severity(Warning),
        help("segment numbers and names are carried over to this run's segments by shared members (or centres), so last run's names may land on segments made differently; if the change is meant, check each name against its profile before the hand-off goes out, and if not, point `previous` at the model this recipe made")
    )]
    PreviousOtherSettings {
        recipe: String,
        then: String,
        now: String,
        #[label("made with other settings")]
        span: Span,
    },

    #[error("only one k is fitted, so `choose k by {criterion}` has nothing to choose from")]
    #[diagnostic(
        code(assort::nothing_to_choose),
        severity(Warning),
        help("give `kmeans` a range such as `k 2..9` to compare several k")
    )]
    NothingToChoose {
        criterion: String,
        #[label("ignored")]
        span: Span,
    },
}

/// Where rendered problems are shown: in colour or not, and the width of
/// the terminal they go to (`None` for a pipe, a file or a test).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Screen {
    pub colour: bool,
    pub width: Option<usize>,
}

/// Text wraps at this many columns at most, however wide the terminal.
const WIDEST: usize = 100;
/// A terminal narrower than this is treated as this wide: below it the
/// frames cannot hold a word and its underline.
const NARROWEST: usize = 40;

impl Screen {
    /// No colour and no terminal: golden files, pipes, tests.
    pub const PLAIN: Screen = Screen {
        colour: false,
        width: None,
    };

    /// Standard error as it is now: colour on a terminal unless
    /// `NO_COLOR` is set (any value), and the terminal's width.
    pub fn stderr() -> Screen {
        Screen::of(&std::io::stderr(), 2)
    }

    /// Standard output, as [`Screen::stderr`].
    pub fn stdout() -> Screen {
        Screen::of(&std::io::stdout(), 1)
    }

    fn of(stream: &impl std::io::IsTerminal, fd: i32) -> Screen {
        if !stream.is_terminal() {
            return Screen::PLAIN;
        }
        Screen {
            colour: std::env::var_os("NO_COLOR").is_none(),
            width: terminal_width(fd),
        }
    }

    /// How lines of the recipe are fitted: cut to the terminal's width
    /// (less the frame's gutter for `lines` numbered lines), so that an
    /// underline stays under its word; without a terminal, only very long
    /// lines are cut.
    fn fit(self, lines: usize) -> crate::check::shown::Fit {
        match self.width {
            Some(w) => {
                // ` 12 │ ` and a spare column.
                let gutter = lines.max(1).to_string().len() + 5;
                crate::check::shown::Fit::terminal(w.max(NARROWEST) - gutter)
            }
            None => crate::check::shown::Fit::LONG_LINES,
        }
    }
}

/// The columns of the terminal behind file descriptor `fd`, asked of the
/// terminal itself (it follows a resize); `None` when it cannot say.
#[cfg(unix)]
fn terminal_width(fd: i32) -> Option<usize> {
    // SAFETY: an all-zero `winsize` is a valid value of that plain struct.
    let mut size: libc::winsize = unsafe { std::mem::zeroed() };
    // SAFETY: TIOCGWINSZ writes one `winsize` through the pointer, which
    // points at `size`, alive and writable for the whole call.
    let ok = unsafe { libc::ioctl(fd, libc::TIOCGWINSZ, &mut size) } == 0;
    (ok && size.ws_col > 0).then_some(usize::from(size.ws_col))
}

/// Elsewhere the width comes from `COLUMNS` when a shell exports it.
#[cfg(not(unix))]
fn terminal_width(_fd: i32) -> Option<usize> {
    std::env::var("COLUMNS").ok()?.parse().ok()
}

/// Renders problems as text, with the recipe lines they point at, fitted
/// to the screen.
pub fn render(problems: &[Problem], name: &str, text: &str, screen: Screen) -> String {
    let handler = handler(screen);
    let fit = screen.fit(text.lines().count());
    let mut out = String::new();
    for p in problems {
        let shown = super::shown::Shown::fitted(p, name, text, fit);
        // Writing into a String cannot fail.
        let _ = handler.render_report(&mut out, &shown);
        out.push('\n');
    }
    out
}

/// Renders a diagnostic that points at no recipe text (a data or output
/// problem), in the same style.
pub fn render_bare(diag: &dyn Diagnostic, screen: Screen) -> String {
    let mut out = String::new();
    let _ = handler(screen).render_report(&mut out, &super::shown::Shown::new(diag, "", ""));
    out
}

/// The one report style: Unicode frames, text wrapped at the terminal's
/// width up to 100 columns, colour on request.
fn handler(screen: Screen) -> GraphicalReportHandler {
    let theme = if screen.colour {
        GraphicalTheme::unicode()
    } else {
        GraphicalTheme::unicode_nocolor()
    };
    let width = screen.width.map_or(WIDEST, |w| w.clamp(NARROWEST, WIDEST));
    GraphicalReportHandler::new_themed(theme).with_width(width)
}

impl CheckError {
    /// A tree over too many records, saying what limits this linkage.
    pub fn large_tree(
        records: usize,
        linkage: &str,
        limit: crate::plan::TreeLimit,
        span: Span,
    ) -> CheckError {
        CheckError::LargeTree {
            records,
            why: limit.reason(records, linkage),
            span,
        }
    }
}
