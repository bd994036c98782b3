//! The plan: a checked recipe, typed, with every default written out.
//!
//! A `Plan` is only ever built by the checker ([`crate::check`]); the
//! interpreter ([`crate::run`]) accepts nothing else. Every value in it has
//! been validated, so the run stage never re-checks the recipe's words.

use serde::Serialize;
use std::collections::BTreeMap;
use std::path::PathBuf;

pub use crate::engine::kmeans::Seeding;
pub use crate::engine::tree::{Linkage, Metric};

/// Version of the plan's layout, printed by `assort plan`.
pub const PLAN_FORMAT: u32 = 1;

#[derive(Debug, Clone, Serialize)]
pub struct Plan {
    pub format: u32,
    pub name: String,
    /// The report's title and the period the data covers (`recipe ...
    /// title "..." period "..."`).
    pub title: Option<String>,
    pub period: Option<String>,
    /// What a record is, in the plural (`members`), for the report.
    pub records_noun: Option<String>,
    pub seed: u64,
    pub input: InputPlan,
    /// Numeric features in the order they are clustered.
    pub features: Vec<FeaturePlan>,
    /// Category columns, one-hot encoded after the numeric features.
    pub categories: Vec<CategoryPlan>,
    pub scale: Scale,
    pub method: MethodPlan,
    pub choose: ChooseK,
    /// The smallest segment a chosen k may have (`choose ... floor`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub floor: Option<SizeFloor>,
    /// Segment number (1-based) to label.
    pub labels: BTreeMap<usize, String>,
    /// Segment number (1-based) to its description and next step
    /// (`brief`), for the people who act on segments.
    #[serde(skip_serializing_if = "BTreeMap::is_empty")]
    pub briefs: BTreeMap<usize, SegmentNote>,
    /// The recipe line of each label, for messages.
    #[serde(skip)]
    pub label_lines: BTreeMap<usize, usize>,
    pub evidence: EvidencePlan,
    pub validate: Option<ValidatePlan>,
    /// An earlier assignments file to compare with.
    pub compare: Option<ComparePlan>,
    /// Last run's segment model, whose numbers and labels this run keeps.
    pub previous: Option<PreviousPlan>,
    pub outputs: Vec<OutputPlan>,
    /// `save table "NAME"`: the assignments also written into a table on
    /// the input's connection, allowed by `--allow-table NAME`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub table: Option<TablePlan>,
    /// Columns profiled per segment but not clustered (`tally`), read
    /// as numbers after the features.
    pub tally: Vec<String>,
    /// The column whose value says how many members each record stands
    /// for (`represents`): record weights, read as a number after the
    /// `tally` columns.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub record_weights: Option<String>,
    /// How people see a column (`call`), by column name.
    pub display: BTreeMap<String, Display>,
}

/// A segment in one line, and what to do with it (`brief`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SegmentNote {
    pub text: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub action: Option<String>,
}

/// A column's name and number format for people (`call`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Display {
    pub name: String,
    pub format: NumberFormat,
    /// Written after a number or count (`visits`), before money (`€`).
    pub unit: Option<String>,
}

/// How a column's numbers are shown to people.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum NumberFormat {
    /// Up to two decimals, thousands separated.
    Number,
    /// A fraction shown as a percentage: 0.21 as 21 %.
    Percent,
    /// Two decimals, thousands separated, the unit (a currency) before.
    Money,
    /// Whole numbers, thousands separated.
    Count,
}

impl NumberFormat {
    pub const NAMES: [&'static str; 4] = ["number", "percent", "money", "count"];

    pub fn parse(word: &str) -> Option<NumberFormat> {
        match word {
            "number" => Some(NumberFormat::Number),
            "percent" => Some(NumberFormat::Percent),
            "money" => Some(NumberFormat::Money),
            "count" => Some(NumberFormat::Count),
            _ => None,
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct InputPlan {
    /// As written in the recipe, relative to the recipe's folder.
    pub path: String,
    /// Resolved against the recipe's folder.
    #[serde(skip)]
    pub resolved: PathBuf,
    /// The key column; with `no key`, the name of the line-number column
    /// the outputs carry instead.
    pub key: String,
    /// `no key`: records are keyed by their line in the file.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub keyless: bool,
    pub separator: char,
    /// The decimal mark of the data's numbers.
    pub decimal: DecimalMark,
    /// `database NAME`: `path` is a table or a query on this connection
    /// (docs/scale-out.md), read in the order of its key.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub database: Option<String>,
    /// `cluster NAME`: the k-means rounds of a Parquet input read in
    /// passes run on this Ballista cluster (docs/scale-out.md).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cluster: Option<String>,
    /// `read passes`: the records are not read into memory but once per
    /// pass, holding only the sample and the sums (src/run/passes.rs).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub passes: bool,
}

impl InputPlan {
    /// The table or query on a connection this input reads, if it reads
    /// one.
    /// The input in words: the path as written, or "table `members` on
    /// connection `coop`".
    pub fn shown(&self) -> String {
        match self.source() {
            Some(source) => source.describe(),
            None => self.path.clone(),
        }
    }

    pub fn source(&self) -> Option<crate::scale::source::Source> {
        self.database
            .as_ref()
            .map(|connection| crate::scale::source::Source {
                connection: connection.clone(),
                text: self.path.clone(),
            })
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct FeaturePlan {
    pub column: String,
    pub missing: MissingRule,
    /// Quantile fractions to clip at, applied before `transform`.
    pub clip: Option<(f64, f64)>,
    pub transform: Transform,
    /// Counts as this many features in squared distance.
    pub weight: f64,
    /// A number, an ordered category (`ordered`) or a flag (`flags`):
    /// the last two are read as numbers through their levels.
    pub kind: FeatureKind,
}

/// What a clustered number stands for. An ordered category and a flag are
/// clustered as numbers: the level's rank (1 for the first level), or 1
/// for a flag that is set and 0 for one that is not. Every method then
/// treats them as the numbers they are coded to (k-means by distance,
/// Gower's dissimilarity by rank over the levels' range, as Kaufman and
/// Rousseeuw 1990 score ordinal variables), and the outputs name levels.
#[derive(Debug, Clone, PartialEq, Eq, Default, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FeatureKind {
    #[default]
    Number,
    /// Levels from lowest to highest, as written in the recipe.
    Ordered(Vec<String>),
    /// Two values: one of [`FLAG_SET`] (1) or [`FLAG_UNSET`] (0),
    /// letter case aside.
    Flag,
}

/// Values that set a flag, and that leave it unset (compared without
/// regard to letter case).
pub const FLAG_SET: [&str; 6] = ["yes", "y", "true", "t", "1", "on"];
pub const FLAG_UNSET: [&str; 6] = ["no", "n", "false", "f", "0", "off"];

impl FeatureKind {
    pub fn is_number(&self) -> bool {
        *self == FeatureKind::Number
    }

    /// The number a non-blank value of an ordered category or a flag
    /// stands for (`None`: not one of its levels or flag values); `None`
    /// for a plain number, which is parsed as one. For one value; a
    /// column's values go through one [`Coder`].
    pub fn code(&self, text: &str) -> Option<f64> {
        self.coder().code(text)
    }

    /// The kind's levels laid out once, to code a column's values.
    pub fn coder(&self) -> Coder {
        match self {
            FeatureKind::Number => Coder::Number,
            FeatureKind::Flag => Coder::Flag,
            FeatureKind::Ordered(levels) => match numeric_levels(levels) {
                Some(values) => Coder::Numbers(values),
                // The first of two equal levels wins, as the check refuses
                // them anyway.
                None => Coder::Texts(
                    levels
                        .iter()
                        .enumerate()
                        .rev()
                        .map(|(r, l)| (l.clone(), r as f64 + 1.0))
                        .collect(),
                ),
            },
        }
    }

    /// The levels of an ordered category, lowest first.
    pub fn levels(&self) -> Option<&[String]> {
        match self {
            FeatureKind::Ordered(l) => Some(l),
            _ => None,
        }
    }

    /// The level of an ordered category nearest a rank (`None` for other
    /// kinds).
    pub fn nearest_level(&self, rank: f64) -> Option<&str> {
        let levels = self.levels()?;
        if levels.is_empty() || !rank.is_finite() {
            return None;
        }
        let at = (rank.round().clamp(1.0, levels.len() as f64) as usize) - 1;
        levels.get(at).map(String::as_str)
    }

    /// The words for the kind in messages and the plan.
    pub fn words(&self) -> String {
        match self {
            FeatureKind::Number => "a number".into(),
            FeatureKind::Ordered(l) => format!(
                "ordered {}, clustered by rank",
                l.iter()
                    .map(|x| format!("{x:?}"))
                    .collect::<Vec<_>>()
                    .join(" < ")
            ),
            FeatureKind::Flag => "a flag, clustered as 1 set and 0 not".into(),
        }
    }
}

/// A kind's values coded: an ordered level to its 1-based rank, a flag
/// to 1 or 0. Levels that are all numbers (`1 < 2 < 3`) are matched as
/// numbers, so `2.0` from a spreadsheet or a database is level `2`; other
/// levels are matched as written, letter case included; spaces (only
/// spaces) at the ends are trimmed, as categories are read and as SQL's
/// `TRIM` trims. The scoring SQL matches the same way.
#[derive(Debug, Clone)]
pub enum Coder {
    /// A plain number: nothing to code.
    Number,
    Texts(std::collections::HashMap<String, f64>),
    Numbers(Vec<f64>),
    Flag,
}

impl Coder {
    /// The number `text` stands for; `None` when it is none of the
    /// levels (or for a plain number).
    pub fn code(&self, text: &str) -> Option<f64> {
        let text = crate::text::trim_spaces(text);
        match self {
            Coder::Number => None,
            Coder::Texts(ranks) => ranks.get(text).copied(),
            Coder::Numbers(values) => {
                let v: f64 = text.parse().ok()?;
                values
                    .iter()
                    .position(|&x| x == v)
                    .map(|at| at as f64 + 1.0)
            }
            Coder::Flag => {
                let is = |words: &[&str]| words.iter().any(|w| w.eq_ignore_ascii_case(text));
                if is(&FLAG_SET) {
                    Some(1.0)
                } else if is(&FLAG_UNSET) {
                    Some(0.0)
                } else {
                    None
                }
            }
        }
    }
}

/// The levels as numbers, when every one is written as a number.
pub fn numeric_levels(levels: &[String]) -> Option<Vec<f64>> {
    levels
        .iter()
        .map(|l| l.parse::<f64>().ok().filter(|v| v.is_finite()))
        .collect()
}

#[derive(Debug, Clone, Serialize)]
pub struct CategoryPlan {
    pub column: String,
    pub weight: f64,
    /// What a blank value does (`missing keep` or `drop` for the column).
    pub gaps: CategoryGaps,
}

/// What happens to a record whose category is blank.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CategoryGaps {
    /// No rule given: a blank stops the run with its location.
    Refuse,
    /// `missing drop`: the record is left out.
    Drop,
    /// `missing keep`: a blank is a level of its own, `(blank)` (what
    /// every category did before blanks were gaps, so a model written
    /// then reads as this).
    #[default]
    Keep,
}

/// What happens to a record whose value is missing in one column.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum MissingRule {
    /// No rule given: a missing value stops the run with its location.
    Refuse,
    DropRow,
    FillMedian,
    FillMean,
    FillValue(f64),
    /// `missing keep`: for categories only (a blank is a level of its
    /// own); the checker never gives it to a numeric feature.
    Keep,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Transform {
    None,
    Log1p,
    Log,
    Sqrt,
}

impl Transform {
    pub const NAMES: [&'static str; 3] = ["log1p", "log", "sqrt"];

    pub fn parse(word: &str) -> Option<Transform> {
        match word {
            "log1p" => Some(Transform::Log1p),
            "log" => Some(Transform::Log),
            "sqrt" => Some(Transform::Sqrt),
            _ => None,
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Scale {
    Zscore,
    Robust,
    Range,
    None,
}

impl Scale {
    pub const NAMES: [&'static str; 4] = ["zscore", "robust", "range", "none"];

    pub fn parse(word: &str) -> Option<Scale> {
        match word {
            "zscore" => Some(Scale::Zscore),
            "robust" => Some(Scale::Robust),
            "range" => Some(Scale::Range),
            "none" => Some(Scale::None),
            _ => None,
        }
    }
}

impl Plan {
    /// Where segments come from, in the recipe's words: `k 2..9`, `k 5`,
    /// or `height 1.5`.
    pub fn cut_description(&self) -> String {
        if let MethodPlan::Tree(TreePlan {
            height: Some(h), ..
        }) = &self.method
        {
            return format!("height {h}");
        }
        match self.ks() {
            [] => "k ?".to_string(),
            [k] => format!("k {k}"),
            ks => format!("k {}..{}", ks[0], ks[ks.len() - 1]),
        }
    }

    /// The values of k the method fits, ascending.
    pub fn ks(&self) -> &[usize] {
        self.method.ks()
    }

    /// Whether the method compares records other than by the Euclidean
    /// distance over the prepared columns the criteria assume: k-medoids,
    /// k-prototypes, or a tree on Gower's dissimilarity. Such runs judge
    /// k on their own measure.
    pub fn own_measure(&self) -> bool {
        match &self.method {
            MethodPlan::KMeans(_) => false,
            MethodPlan::Tree(t) => t.distance == Distance::Gower,
            MethodPlan::KMedoids(_) | MethodPlan::KPrototypes(_) => true,
        }
    }
}

/// How two records are compared: a distance over the prepared columns, or
/// Gower's dissimilarity over the columns as they are (numbers by their
/// range, categories by match).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Distance {
    Euclidean,
    Manhattan,
    Cosine,
    Correlation,
    Gower,
}

impl Distance {
    pub const NAMES: [&'static str; 5] =
        ["euclidean", "manhattan", "cosine", "correlation", "gower"];

    pub fn parse(word: &str) -> Option<Distance> {
        match word {
            "gower" => Some(Distance::Gower),
            other => Metric::parse(other).map(Distance::from),
        }
    }

    pub fn name(self) -> &'static str {
        match self.metric() {
            Some(m) => m.name(),
            None => "gower",
        }
    }

    /// The distance in words: "euclidean distance", "Gower's
    /// dissimilarity".
    pub fn words(self) -> String {
        match self {
            Distance::Gower => "Gower's dissimilarity".to_string(),
            other => format!("{} distance", other.name()),
        }
    }

    /// The distance over rows, or `None` for Gower's.
    pub fn metric(self) -> Option<Metric> {
        match self {
            Distance::Euclidean => Some(Metric::Euclidean),
            Distance::Manhattan => Some(Metric::Manhattan),
            Distance::Cosine => Some(Metric::Cosine),
            Distance::Correlation => Some(Metric::Correlation),
            Distance::Gower => None,
        }
    }
}

impl From<Metric> for Distance {
    fn from(m: Metric) -> Distance {
        match m {
            Metric::Manhattan => Distance::Manhattan,
            Metric::Cosine => Distance::Cosine,
            Metric::Correlation => Distance::Correlation,
            _ => Distance::Euclidean,
        }
    }
}

/// k-medoids (FasterPAM) over a dissimilarity matrix.
#[derive(Debug, Clone, Serialize)]
pub struct KMedoidsPlan {
    pub ks: Vec<usize>,
    pub restarts: usize,
    /// The most passes of swaps over the records per start.
    pub passes: usize,
    pub distance: Distance,
}

/// k-prototypes: numbers by squared difference, categories by mismatch.
#[derive(Debug, Clone, Serialize)]
pub struct KPrototypesPlan {
    pub ks: Vec<usize>,
    pub restarts: usize,
    pub rounds: usize,
    /// Stop when a round lowers the total cost by no more than this share.
    pub tolerance: f64,
    /// What a category mismatch costs; `None`: Huang's suggestion from the
    /// data (half the numbers' mean standard deviation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gamma: Option<f64>,
}

/// The clustering method, with its settings.
#[derive(Debug, Clone, Serialize)]
#[serde(tag = "method", rename_all = "kebab-case")]
pub enum MethodPlan {
    #[serde(rename = "kmeans")]
    KMeans(KMeansPlan),
    Tree(TreePlan),
    #[serde(rename = "kmedoids")]
    KMedoids(KMedoidsPlan),
    #[serde(rename = "kprototypes")]
    KPrototypes(KPrototypesPlan),
}

impl MethodPlan {
    /// The values of k the method fits, ascending.
    pub fn ks(&self) -> &[usize] {
        match self {
            MethodPlan::KMeans(k) => &k.ks,
            MethodPlan::Tree(t) => &t.ks,
            MethodPlan::KMedoids(m) => &m.ks,
            MethodPlan::KPrototypes(p) => &p.ks,
        }
    }

    /// The method in words: "k-means (50 restarts per k)".
    pub fn words(&self) -> String {
        match self {
            MethodPlan::KMeans(k) => format!("k-means ({} restarts per k)", k.restarts),
            MethodPlan::KMedoids(m) => format!(
                "k-medoids by FasterPAM on {} ({} restarts per k)",
                m.distance.words(),
                m.restarts
            ),
            MethodPlan::KPrototypes(p) => format!(
                "k-prototypes ({} restarts per k; a category mismatch costs {})",
                p.restarts,
                p.gamma.map_or(
                    "half the numbers' mean standard deviation".to_string(),
                    |g| { format!("{g}") }
                )
            ),
            MethodPlan::Tree(t) => format!(
                "an agglomerative tree ({} linkage, {}{})",
                t.linkage.name(),
                t.distance.words(),
                t.micro
                    .as_ref()
                    .map(|m| format!(", over {} k-means micro-segments", m.segments))
                    .unwrap_or_default()
            ),
        }
    }
}

/// Agglomerative clustering: one tree, cut at every k.
#[derive(Debug, Clone, Serialize)]
pub struct TreePlan {
    /// The k to cut at; empty when the cut is by height.
    pub ks: Vec<usize>,
    /// Cut where the merges pass this height instead of at given k.
    pub height: Option<f64>,
    pub linkage: Linkage,
    pub distance: Distance,
    /// Micro-segment route: k-means into this many micro-segments first, then
    /// the tree over their centres weighted by their sizes.
    pub micro: Option<MicroPlan>,
}

/// The k-means stage of the micro-segment route.
#[derive(Debug, Clone, Serialize)]
pub struct MicroPlan {
    pub segments: usize,
    pub restarts: usize,
    pub rounds: usize,
    pub tolerance: f64,
}

/// Memory a tree's distance matrix may take: n(n - 1)/2 distances of 8
/// bytes each.
pub const TREE_MATRIX_BYTES: u64 = 2 << 30;

/// Records above which a single or Ward tree over every record is refused:
/// they need no distance matrix (O(n) memory), but their time grows with
/// the square of the records.
pub const TREE_LINEAR_MEMORY_LIMIT: usize = 200_000;

/// What bounds a tree over every record, by linkage; the checker enforces
/// it from the counted records, the run from the records it kept.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TreeLimit {
    /// The most records.
    pub records: usize,
    /// The matrix's memory at `n` records, for linkages that need one.
    pub matrix: bool,
}

impl TreeLimit {
    pub fn of(linkage: Linkage) -> TreeLimit {
        match linkage {
            Linkage::Single | Linkage::Ward => TreeLimit {
                records: TREE_LINEAR_MEMORY_LIMIT,
                matrix: false,
            },
            _ => {
                // Largest n with n(n - 1)/2 * 8 <= TREE_MATRIX_BYTES.
                let pairs = TREE_MATRIX_BYTES / 8;
                let mut n = ((2.0 * pairs as f64).sqrt() as u64) + 1;
                while n * (n - 1) / 2 > pairs {
                    n -= 1;
                }
                TreeLimit {
                    records: n as usize,
                    matrix: true,
                }
            }
        }
    }

    /// Why a tree over `records` records is refused, shared by the checker
    /// and the run: the distance matrix's memory for matrix linkages, the
    /// time for the others.
    pub fn reason(self, records: usize, linkage: &str) -> String {
        if self.matrix {
            let gib = TreeLimit::matrix_bytes(records) as f64 / (1u64 << 30) as f64;
            format!(
                "a `{linkage}` tree over every record would hold a distance matrix of {gib:.1} GiB (at most {} records, 2 GiB)",
                self.records
            )
        } else {
            format!(
                "too many for a `{linkage}` tree over every record (at most {}: it needs no distance matrix, but its time grows with the square of the records)",
                self.records
            )
        }
    }

    /// Bytes of the distance matrix over `n` records.
    pub fn matrix_bytes(n: usize) -> u64 {
        let n = n as u64;
        n * n.saturating_sub(1) / 2 * 8
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct KMeansPlan {
    /// The values of k to fit, ascending, each at least 2.
    pub ks: Vec<usize>,
    pub restarts: usize,
    pub rounds: usize,
    pub tolerance: f64,
    pub seeding: Seeding,
    /// Restarts on a seeded sample of this many records, the best refined
    /// on every record; `None` runs every restart on every record.
    pub sample: Option<usize>,
    /// `sample N by key`: the sample drawn by key rank and refined with
    /// exact sums (`crate::scale::drive`), independent of record order.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub by_key: bool,
}

#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ChooseK {
    Fixed(usize),
    By(Criterion),
}

/// The column name outputs give the line number when the data has no key
/// (`input ... no key`); `file_line` when the file has a `line` column.
pub const LINE_KEY: &str = "line";
pub const LINE_KEY_TAKEN: &str = "file_line";

/// The smallest segment a chosen k may have: a number of records, or a
/// share of the segmented records (`choose ... floor 250`, `floor 0.05`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SizeFloor {
    Records(usize),
    Share(f64),
}

impl SizeFloor {
    /// The floor in records when `n` records are segmented: a share is
    /// rounded up, so a segment at the floor never holds less than it.
    pub fn records(self, n: usize) -> usize {
        match self {
            SizeFloor::Records(r) => r,
            SizeFloor::Share(s) => (s * n as f64).ceil() as usize,
        }
    }

    /// The floor in words: "250 records", "5 % of the records (300)";
    /// `noun` says what is counted ("records", or "weighted members" when
    /// records carry weights).
    pub fn words(self, n: usize, noun: &str) -> String {
        match self {
            SizeFloor::Records(r) => format!("{} {noun}", crate::text::thousands(r)),
            SizeFloor::Share(s) => {
                let percent = format!("{:.2}", 100.0 * s);
                let percent = percent.trim_end_matches('0').trim_end_matches('.');
                format!(
                    "{percent} % of the {noun} ({})",
                    crate::text::thousands(self.records(n))
                )
            }
        }
    }
}

/// A criterion that can choose k.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Criterion {
    Silhouette,
    CalinskiHarabasz,
    DaviesBouldin,
    /// The knee of the within-cluster sum of squares.
    Elbow,
    /// The gap statistic's one-standard-error rule.
    Gap,
    /// The highest mean adjusted Rand index under bootstrap resampling.
    Stability,
}

impl Criterion {
    pub const NAMES: [&'static str; 6] = [
        "silhouette",
        "calinski-harabasz",
        "davies-bouldin",
        "elbow",
        "gap",
        "stability",
    ];
    pub const ALL: [Criterion; 6] = [
        Criterion::Silhouette,
        Criterion::CalinskiHarabasz,
        Criterion::DaviesBouldin,
        Criterion::Elbow,
        Criterion::Gap,
        Criterion::Stability,
    ];

    pub fn parse(word: &str) -> Option<Criterion> {
        Self::NAMES
            .iter()
            .position(|n| *n == word)
            .map(|i| Self::ALL[i])
    }

    pub fn name(self) -> &'static str {
        Self::NAMES[Self::ALL.iter().position(|c| *c == self).unwrap_or(0)]
    }

    /// Whether a higher value is better.
    pub fn higher_is_better(self) -> bool {
        !matches!(self, Criterion::DaviesBouldin)
    }
}

/// Evidence for k that costs reclustering, when asked for.
#[derive(Debug, Clone, Serialize)]
pub struct EvidencePlan {
    /// Reference sets for the gap statistic.
    pub gap: Option<usize>,
    /// Bootstrap resamples for stability.
    pub stability: Option<usize>,
    /// Restarts when k-means reclusters a reference set or a resample.
    pub restarts: usize,
    /// How the silhouette is obtained on data above the exact limit.
    pub silhouette: SilhouetteMode,
}

/// The silhouette on large data: estimated from a sample with its standard
/// error (the default), or exact over every pair of records.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SilhouetteMode {
    Estimate,
    Exact,
}

impl SilhouetteMode {
    pub const NAMES: [&'static str; 2] = ["estimate", "exact"];

    pub fn parse(word: &str) -> Option<SilhouetteMode> {
        match word {
            "estimate" => Some(SilhouetteMode::Estimate),
            "exact" => Some(SilhouetteMode::Exact),
            _ => None,
        }
    }
}

#[derive(Debug, Clone, Serialize)]
pub struct ValidatePlan {
    pub path: String,
    #[serde(skip)]
    pub resolved: PathBuf,
    /// The column holding the known grouping; joined on the input's key.
    pub column: String,
}

#[derive(Debug, Clone, Serialize)]
pub struct ComparePlan {
    pub path: String,
    #[serde(skip)]
    pub resolved: PathBuf,
}

/// `previous`: last run's model, and optionally its assignments (then the
/// segments are matched on the records they share, else on their centres).
#[derive(Debug, Clone, Serialize)]
pub struct PreviousPlan {
    pub path: String,
    #[serde(skip)]
    pub resolved: PathBuf,
    pub assignments: Option<ComparePlan>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum OutputKind {
    Assignments,
    ProfilesCsv,
    ProfilesJson,
    Centroids,
    /// The segment model, for scoring new records (JSON).
    Model,
    /// The one-file HTML report.
    Report,
    /// The segment model as one SQL query (`assort assign` in a database).
    Scoring,
    /// Each segment's readable rule as one SQL query.
    Rules,
    /// Key and segment name only, for a CRM (CSV).
    Handoff,
    /// The tree's merge table (CSV).
    Merges,
    /// The tree in Newick format.
    Newick,
}

#[derive(Debug, Clone, Serialize)]
pub struct OutputPlan {
    pub kind: OutputKind,
    pub path: String,
    #[serde(skip)]
    pub resolved: PathBuf,
}

/// `save table "NAME"`: the assignments written into table `name` on the
/// input's connection, replacing it as a whole in one transaction
/// (src/output/table.rs). Only where the person running the recipe allows
/// that table (`--allow-table NAME`), as `--allow-dir` allows a folder.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct TablePlan {
    pub connection: String,
    /// As written: one or two plain SQL names joined by a dot, quoted
    /// as written when sent (so the letter case counts).
    pub name: String,
}

impl TablePlan {
    /// In words: "table `segments` on connection `coop`".
    pub fn describe(&self) -> String {
        format!("table `{}` on connection `{}`", self.name, self.connection)
    }
}

/// The segment model's file format, written by `save model`; kept here so
/// the checker (`previous`) and the run (`assign`) share it without the
/// checker reaching into the run.
pub const MODEL_FORMAT: &str = "assort-model/2";

/// Formats this assort reads: version 1 lacks the segments' means, which
/// only "what changed" uses; it scores exactly as before.
pub const MODEL_FORMATS_READ: [&str; 4] = [
    "assort-model/1",
    MODEL_FORMAT,
    MODEL_FORMAT_MEASURED,
    MODEL_FORMAT_KINDS,
];

/// The format of a model that scores by its own measure (k-medoids,
/// k-prototypes, a tree on Gower's dissimilarity): version 2 with a
/// `measure`, under a new name so that an assort that does not know
/// measures refuses it rather than score it by the Euclidean distance.
pub const MODEL_FORMAT_MEASURED: &str = "assort-model/3";

/// The format of a model with an ordered category or a flag among its
/// features (with or without a measure): an assort that does not know
/// kinds would read `10 < 20 < 30` levels as the numbers 10, 20 and 30
/// instead of ranks 1 to 3 and score wrong in silence, so the name is new
/// and such an assort refuses it.
pub const MODEL_FORMAT_KINDS: &str = "assort-model/4";

/// How a data file writes the decimal mark: `1.5` or `1,5`.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, Hash, Default, serde::Serialize, serde::Deserialize,
)]
#[serde(rename_all = "lowercase")]
pub enum DecimalMark {
    #[default]
    Point,
    Comma,
}

impl DecimalMark {
    pub fn char(self) -> char {
        match self {
            DecimalMark::Point => '.',
            DecimalMark::Comma => ',',
        }
    }

    pub fn is_point(&self) -> bool {
        *self == DecimalMark::Point
    }
}
