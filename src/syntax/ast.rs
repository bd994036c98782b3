//! The recipe syntax tree: what was written, where, before any meaning is
//! given to it. Every node keeps the byte span it came from, so the checker
//! can point at it.

use serde::Serialize;
use std::fmt;

/// A byte range in the recipe text, half-open.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Default)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(start: usize, end: usize) -> Self {
        Span { start, end }
    }

    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span::new(self.start.min(other.start), self.end.max(other.end))
    }

    pub fn len(self) -> usize {
        self.end - self.start
    }

    pub fn is_empty(self) -> bool {
        self.start == self.end
    }
}

impl From<Span> for miette::SourceSpan {
    fn from(span: Span) -> Self {
        (span.start, span.len()).into()
    }
}

/// A value together with the span it was written at.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Spanned<T> {
    pub node: T,
    pub span: Span,
}

impl<T> Spanned<T> {
    pub fn new(node: T, span: Span) -> Self {
        Spanned { node, span }
    }
}

/// A number as written, with its value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Number {
    pub raw: String,
    pub value: f64,
}

impl Number {
    /// The value as a whole number, when it was written as one.
    pub fn as_whole(&self) -> Option<i64> {
        let plain = !self.raw.contains(['.', 'e', 'E']);
        if plain {
            self.raw.parse().ok()
        } else {
            None
        }
    }
}

/// An option's value, in the shapes the grammar allows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum Value {
    Number(Number),
    Range(Number, Number),
    Text(String),
    Word(String),
}

impl Value {
    /// How the value reads in a message: "a range", "a word"...
    pub fn kind_name(&self) -> &'static str {
        match self {
            Value::Number(n) if n.as_whole().is_some() => "a whole number",
            Value::Number(_) => "a number",
            Value::Range(..) => "a range",
            Value::Text(_) => "a quoted text",
            Value::Word(_) => "a word",
        }
    }
}

impl fmt::Display for Value {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Value::Number(n) => f.write_str(&n.raw),
            Value::Range(lo, hi) => write!(f, "{}..{}", lo.raw, hi.raw),
            Value::Text(t) => write!(f, "{t:?}"),
            Value::Word(w) => f.write_str(w),
        }
    }
}

/// `name value` after a statement's fixed part.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OptionPair {
    pub name: Spanned<String>,
    pub value: Spanned<Value>,
}

/// A column named in a recipe, bare or quoted.
pub type Column = Spanned<String>;

#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum FeatureChoice {
    Listed(Vec<Column>),
    AllNumeric { except: Vec<Column> },
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum MissingAction {
    DropRows,
    /// `keep`: a blank category is a level of its own.
    Keep,
    /// `fill median`, `fill mean` (words) or `fill 0` (a number).
    Fill(Spanned<Value>),
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum TransformAction {
    Clip(Spanned<(Number, Number)>),
    Named(Spanned<String>),
}

#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum ChooseRule {
    By(Spanned<String>),
    Fixed(Spanned<Number>),
}

/// One statement, by kind.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum StatementKind {
    Recipe {
        name: Spanned<String>,
        options: Vec<OptionPair>,
    },
    Seed {
        value: Spanned<Number>,
    },
    Input {
        path: Spanned<String>,
        options: Vec<OptionPair>,
    },
    Features(FeatureChoice),
    Categories {
        columns: Vec<Column>,
        options: Vec<OptionPair>,
    },
    /// `ordered COLUMN "low" < "middle" < "high"`: a category whose
    /// levels have an order, clustered by rank.
    Ordered {
        column: Column,
        levels: Vec<Spanned<String>>,
    },
    /// `flags COLUMNS`: columns of two values (yes/no, true/false, 1/0),
    /// clustered as 1 and 0.
    Flags {
        columns: Vec<Column>,
    },
    Missing {
        action: Spanned<MissingAction>,
        columns: Option<Vec<Column>>,
    },
    Transform {
        columns: Vec<Column>,
        action: TransformAction,
    },
    Scale {
        method: Spanned<String>,
    },
    Weight {
        columns: Vec<Column>,
        value: Spanned<Number>,
    },
    KMeans {
        options: Vec<OptionPair>,
    },
    /// `kmedoids k ... [distance gower]`: k-medoids (FasterPAM).
    KMedoids {
        options: Vec<OptionPair>,
    },
    /// `kprototypes k ... [gamma g]`: k-prototypes for numbers and
    /// categories.
    KPrototypes {
        options: Vec<OptionPair>,
    },
    Tree {
        options: Vec<OptionPair>,
    },
    Evidence {
        options: Vec<OptionPair>,
    },
    Choose {
        rule: ChooseRule,
        options: Vec<OptionPair>,
    },
    Label {
        segment: Spanned<Number>,
        text: Spanned<String>,
    },
    /// `brief 2 "..." action "..."`: a segment in one line for the
    /// people who act on it, and what to do with it.
    Brief {
        segment: Spanned<Number>,
        text: Spanned<String>,
        options: Vec<OptionPair>,
    },
    Save {
        what: Spanned<String>,
        path: Spanned<String>,
    },
    Validate {
        path: Spanned<String>,
        options: Vec<OptionPair>,
    },
    Compare {
        path: Spanned<String>,
    },
    /// `previous "model" [assignments "file"]`: last run's segments, whose
    /// numbers and labels this run keeps.
    Previous {
        path: Spanned<String>,
        options: Vec<OptionPair>,
    },
    Acknowledge {
        columns: Vec<Column>,
        reason: Spanned<String>,
    },
    /// `tally COLUMNS`: columns summed and profiled per segment, not clustered.
    Tally {
        columns: Vec<Column>,
    },
    /// `represents COLUMN`: each record stands for as many members as the
    /// column says (record weights).
    Represents {
        column: Column,
    },
    /// `call COLUMN "name" [as FORMAT] [unit "TEXT"]`: how people see a
    /// column.
    Call {
        column: Column,
        name: Spanned<String>,
        options: Vec<OptionPair>,
    },
    /// A line whose first word is no statement word.
    Unknown {
        word: Spanned<String>,
    },
}

/// A statement with the span of its statement word and of the whole.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Statement {
    pub kind: StatementKind,
    pub keyword: Spanned<String>,
    pub span: Span,
}

/// A parsed recipe: the statements that parsed, and an error for each that
/// did not.
#[derive(Debug, Clone, Default)]
pub struct Recipe {
    pub statements: Vec<Statement>,
    pub errors: Vec<super::SyntaxError>,
}
