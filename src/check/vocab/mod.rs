//! The language's vocabulary: statement words and their options, with the
//! one-line help the checker, the docs, the session and the editor share.

mod values;
pub use values::{value, values_of, ValueDoc, VALUES};

/// A statement word with a one-line summary and an example.
pub struct StatementDoc {
    pub word: &'static str,
    pub summary: &'static str,
    pub example: &'static str,
}

/// Statement words the language used to have, with the word that replaced
/// them and why, so an old recipe gets a precise fix instead of a list.
pub const RENAMED_STATEMENTS: &[(&str, &str, &str)] = &[(
    "reshape",
    "transform",
    "it changes values (log, square root, clipping), not the table's shape",
)];

/// The word that replaced a retired statement word, with the reason.
pub fn renamed_statement(word: &str) -> Option<(&'static str, &'static str)> {
    RENAMED_STATEMENTS
        .iter()
        .find(|(old, _, _)| *old == word)
        .map(|(_, new, why)| (*new, *why))
}

pub const STATEMENTS: &[StatementDoc] = &[
    StatementDoc {
        word: "recipe",
        summary: "names the segmentation",
        example: r#"recipe "member-segments""#,
    },
    StatementDoc {
        word: "seed",
        summary: "fixes every random draw, so reruns match bit for bit",
        example: "seed 2026",
    },
    StatementDoc {
        word: "input",
        summary: "the CSV file (relative to the recipe) and its key column",
        example: r#"input "data/members.csv" key member_id"#,
    },
    StatementDoc {
        word: "features",
        summary: "the numeric columns to segment on",
        example: "features visits_per_month, basket_value",
    },
    StatementDoc {
        word: "categories",
        summary: "text columns to segment on, one-hot encoded, with a weight",
        example: "categories home_branch weight 0.5",
    },
    StatementDoc {
        word: "ordered",
        summary: "a column whose levels have an order (lowest first), clustered by rank: `<` between the levels",
        example: r#"ordered loyalty_tier "seedling" < "sprout" < "harvest""#,
    },
    StatementDoc {
        word: "flags",
        summary: "columns of two values (yes/no, true/false, 1/0, on/off), clustered as 1 and 0 and profiled as the share set",
        example: "flags newsletter, app_user",
    },
    StatementDoc {
        word: "missing",
        summary: "what to do with missing values: drop the record or fill",
        example: "missing fill median",
    },
    StatementDoc {
        word: "transform",
        summary: "tames skew: log1p, log, sqrt, or clip at quantiles",
        example: "transform basket_value log1p",
    },
    StatementDoc {
        word: "scale",
        summary: "puts features on one footing: zscore, robust, range or none",
        example: "scale zscore",
    },
    StatementDoc {
        word: "weight",
        summary: "makes features count more or less in the distance",
        example: "weight share_fresh 2",
    },
    StatementDoc {
        word: "kmeans",
        summary: "the method: k fixed or a range, restarts, rounds, tolerance, seeding",
        example: "kmeans k 2..9 restarts 25",
    },
    StatementDoc {
        word: "kmedoids",
        summary: "the method: k-medoids, each segment around a real record, on Gower's dissimilarity for numbers and categories unless another distance is named",
        example: "kmedoids k 2..8 restarts 10",
    },
    StatementDoc {
        word: "kprototypes",
        summary: "the method: k-prototypes, k-means for numbers and categories together (means and most common levels), for tables too large for a dissimilarity matrix",
        example: "kprototypes k 2..8 restarts 10",
    },
    StatementDoc {
        word: "tree",
        summary: "the method: agglomerative clustering, one tree cut at every k",
        example: "tree linkage ward k 2..9",
    },
    StatementDoc {
        word: "evidence",
        summary: "asks for costlier evidence for k: the gap statistic, bootstrap stability, the exact silhouette on large data",
        example: "evidence gap 20 stability 30",
    },
    StatementDoc {
        word: "choose",
        summary: "how k is chosen from the range: fixed, or by silhouette, calinski-harabasz, davies-bouldin, elbow, gap or stability",
        example: "choose k by silhouette",
    },
    StatementDoc {
        word: "label",
        summary: "names a segment after review",
        example: r#"label 1 "weekly fresh regulars""#,
    },
    StatementDoc {
        word: "brief",
        summary: "a segment in one line for the people who act on it, with an optional next step; shown on its card in the report",
        example: r#"brief 1 "shop twice a week, fresh food first" action "early access to the seasonal box""#,
    },
    StatementDoc {
        word: "save",
        summary: "writes assignments, profiles (.csv or .json), centroids, a segment model, a one-file HTML report, or a tree's merges and tree",
        example: r#"save assignments "out/members.csv""#,
    },
    StatementDoc {
        word: "acknowledge",
        summary: "records that a column which looks like personal data was reviewed and its use approved",
        example: r#"acknowledge loyalty_tier "approved by the privacy office, ref 2026-114""#,
    },
    StatementDoc {
        word: "compare",
        summary: "compares the segments with an earlier assignments file, joined on the key",
        example: r#"compare with "out/last_quarter.csv""#,
    },
    StatementDoc {
        word: "previous",
        summary: "last run's segment model: matched segments keep their numbers and labels, and the run says what changed",
        example: r#"previous "out/last_quarter.model" assignments "out/last_quarter.csv""#,
    },
    StatementDoc {
        word: "tally",
        summary: "numeric columns to tally per segment without clustering on them: value, revenue, a consent flag (mean, median, quartiles, total and share of the total)",
        example: "tally spend_12m, contactable",
    },
    StatementDoc {
        word: "represents",
        summary: "the numeric column saying how many members each record stands for (a household, a survey weight): record weights, used in seeding, centres, every criterion, profiles, rules and the bootstrap",
        example: "represents household_size",
    },
    StatementDoc {
        word: "call",
        summary: "the name people see for a column, and how its numbers are shown (percent, money, count)",
        example: r#"call share_fresh "fresh food share" as percent"#,
    },
    StatementDoc {
        word: "validate",
        summary: "compares the segments with a known grouping of the same records",
        example: r#"validate against "data/known.csv" column group"#,
    },
];

pub fn statement(word: &str) -> Option<&'static StatementDoc> {
    STATEMENTS.iter().find(|s| s.word == word)
}

pub fn statement_words() -> impl Iterator<Item = &'static str> {
    STATEMENTS.iter().map(|s| s.word)
}

/// An option of a statement and the value it takes.
pub struct OptionDoc {
    pub name: &'static str,
    pub takes: &'static str,
    pub summary: &'static str,
}

pub const INPUT_OPTIONS: &[OptionDoc] = &[
    OptionDoc {
        name: "key",
        takes: "a column name",
        summary: "the column that identifies each record; kept, never clustered (required, unless `no key`)",
    },
    OptionDoc {
        name: "no",
        takes: "`key`",
        summary: "`no key`: the file has no key column; records are keyed by their line in the file, which does not identify anyone across files, so `previous`, `compare` and `save handoff` are refused",
    },
    OptionDoc {
        name: "separator",
        takes: "one quoted character",
        summary: r#"the field separator, `","` unless given"#,
    },
    OptionDoc {
        name: "decimal",
        takes: r#"`"."` or `","`"#,
        summary: r#"the decimal mark of the data's numbers, `"."` unless given; `","` reads `1,5` as one and a half"#,
    },
    OptionDoc {
        name: "database",
        takes: "a connection's name",
        summary: "read a table or a query on this PostgreSQL connection instead of a file: `input \"members\" database coop key member_id`; how to reach the connection and log in comes from the service file or the PG variables, never from the recipe (docs/scale-out.md)",
    },
    OptionDoc {
        name: "cluster",
        takes: "a cluster's name",
        summary: "with `read passes` over Parquet: run the k-means rounds on this Apache DataFusion Ballista cluster, whose scheduler's address comes from the variable `ASSORT_CLUSTER_NAME` (`host:port`), never from the recipe (an assort built with the `ballista` feature; docs/scale-out.md)",
    },
    OptionDoc {
        name: "read",
        takes: "`whole` or `passes`",
        summary: "`whole` (unless given) reads the records into memory once; `passes` leaves them in the Parquet input and reads them once per pass, holding only a sample and sums, for inputs larger than memory (with `kmeans ... sample N by key`; docs/scale-out.md)",
    },
];

pub const CATEGORIES_OPTIONS: &[OptionDoc] = &[OptionDoc {
    name: "weight",
    takes: "a positive number",
    summary: "how much a category counts, 1 unless given (1 = at most one z-scored feature)",
}];

pub const RECIPE_OPTIONS: &[OptionDoc] = &[
    OptionDoc {
        name: "title",
        takes: "a quoted text",
        summary: "the title people see on the report (the recipe's name unless given)",
    },
    OptionDoc {
        name: "period",
        takes: "a quoted text",
        summary: "the period the data covers, shown under the title (`\"July to September 2026\"`)",
    },
    OptionDoc {
        name: "records",
        takes: "a quoted text",
        summary: "what one record is, in the plural, as the report says it (`\"members\"`; `records` unless given)",
    },
];

pub const BRIEF_OPTIONS: &[OptionDoc] = &[OptionDoc {
    name: "action",
    takes: "a quoted text",
    summary: "what to do with the segment, in one line: shown on its card as the next step",
}];

pub const CALL_OPTIONS: &[OptionDoc] = &[
    OptionDoc {
        name: "as",
        takes: "`number`, `percent`, `money` or `count`",
        summary: "how the column's numbers are shown; `number` unless given",
    },
    OptionDoc {
        name: "unit",
        takes: "a quoted text",
        summary: "written after a number or count (`\"visits\"`), before money (`\"€\"`)",
    },
];

/// `k` and `restarts`, as every method with restarts takes them.
const K_OPTION: OptionDoc = OptionDoc {
    name: "k",
    takes: "a whole number or a range such as `2..9`",
    summary: "how many segments, or the range to try (required)",
};
const RESTARTS_OPTION: OptionDoc = OptionDoc {
    name: "restarts",
    takes: "a whole number",
    summary: "independent starts per k; the best is kept (10 unless given)",
};

pub const KMEANS_OPTIONS: &[OptionDoc] = &[
    K_OPTION,
    RESTARTS_OPTION,
    OptionDoc {
        name: "rounds",
        takes: "a whole number",
        summary: "the most assign/re-centre rounds per start (300 unless given)",
    },
    OptionDoc {
        name: "tolerance",
        takes: "a number at least 0",
        summary: "stop when centres move less than this, relative to the data's spread (1e-6 unless given)",
    },
    OptionDoc {
        name: "seeding",
        takes: "`kmeans++` or `random-partition`",
        summary: "how each start picks its first centres (`kmeans++` unless given)",
    },
    OptionDoc {
        name: "sample",
        takes: "a whole number, 1,000 or more",
        summary: "run the restarts on a seeded sample of this many records, then refine the best 3 on every record (for millions of records; every record unless given)",
    },
    OptionDoc {
        name: "by",
        takes: "`key`",
        summary: "`sample N by key`: draw the sample by a hash of each record's key and refine with exact sums, so the segments do not depend on the order of the records; the fit a database or a cluster runs where the data lives (docs/scale-out.md)",
    },
];

pub const KMEDOIDS_OPTIONS: &[OptionDoc] = &[
    K_OPTION,
    RESTARTS_OPTION,
    OptionDoc {
        name: "passes",
        takes: "a whole number",
        summary: "the most passes of swaps over the records per start (100 unless given; a few usually suffice)",
    },
    OptionDoc {
        name: "distance",
        takes: "`gower`, `euclidean`, `manhattan`, `cosine` or `correlation`",
        summary: "how two records are compared (`gower` unless given)",
    },
];

pub const KPROTOTYPES_OPTIONS: &[OptionDoc] = &[
    K_OPTION,
    RESTARTS_OPTION,
    OptionDoc {
        name: "rounds",
        takes: "a whole number",
        summary: "the most assign/update rounds per start (300 unless given)",
    },
    OptionDoc {
        name: "tolerance",
        takes: "a number at least 0",
        summary: "stop when a round lowers the total cost by less than this share of it (1e-6 unless given; 0 runs until no record moves)",
    },
    OptionDoc {
        name: "gamma",
        takes: "a number above 0",
        summary: "what a category mismatch costs against the squared differences of the numbers (half the numbers' mean standard deviation unless given, Huang's suggestion)",
    },
];

pub const TREE_OPTIONS: &[OptionDoc] = &[
    OptionDoc {
        name: "k",
        takes: "a whole number or a range such as `2..9`",
        summary: "how many segments to cut the tree into, or the range to compare (required unless `height` is given)",
    },
    OptionDoc {
        name: "height",
        takes: "a number above 0",
        summary: "cut the tree where its merges pass this height, instead of at given k",
    },
    OptionDoc {
        name: "linkage",
        takes: "`ward`, `average`, `complete`, `single`, `weighted`, `centroid` or `median`",
        summary: "how the distance between two groups is measured (`ward` unless given)",
    },
    OptionDoc {
        name: "distance",
        takes: "`euclidean`, `manhattan`, `cosine`, `correlation` or `gower`",
        summary: "how the distance between two records is measured (`euclidean` unless given; `gower` for numbers and categories together)",
    },
    OptionDoc {
        name: "micro",
        takes: "a whole number above the largest k",
        summary: "first k-means into this many micro-segments, then the tree over their centres (for large data)",
    },
];

pub const EVIDENCE_OPTIONS: &[OptionDoc] = &[
    OptionDoc {
        name: "gap",
        takes: "a whole number, 2 or more",
        summary: "compute the gap statistic with this many reference sets",
    },
    OptionDoc {
        name: "stability",
        takes: "a whole number, 2 or more",
        summary: "measure bootstrap stability with this many resamples",
    },
    OptionDoc {
        name: "silhouette",
        takes: "`estimate` or `exact`",
        summary: "above 12,000 records the silhouette is estimated from a sample, with its standard error; `exact` measures every pair of records instead (time grows with the square of the records)",
    },
];

pub const CHOOSE_OPTIONS: &[OptionDoc] = &[OptionDoc {
    name: "floor",
    takes: "a whole number of records, or a share below 1",
    summary: "the smallest segment a chosen k may have: `floor 250` records, or `floor 0.05` of the records; a k whose segmentation has a smaller segment is marked in the sweep and never chosen",
}];

pub const VALIDATE_OPTIONS: &[OptionDoc] = &[OptionDoc {
    name: "column",
    takes: "a column name",
    summary: "the column holding the known grouping (required)",
}];

pub const PREVIOUS_OPTIONS: &[OptionDoc] = &[OptionDoc {
    name: "assignments",
    takes: "a quoted path",
    summary: "the previous run's assignments: segments are then matched on the members they share, not only on their centres",
}];

/// What `save` can write.
pub const SAVE_WHAT: [&str; 11] = [
    "assignments",
    "profiles",
    "centroids",
    "report",
    "model",
    "scoring",
    "rules",
    "handoff",
    "merges",
    "tree",
    "table",
];

/// Fill words `missing fill` takes besides a number.
pub const FILL_WORDS: [&str; 2] = ["median", "mean"];

/// The options a statement takes (none for statements without options).
pub fn options_for(word: &str) -> &'static [OptionDoc] {
    match word {
        "input" => INPUT_OPTIONS,
        "categories" => CATEGORIES_OPTIONS,
        "call" => CALL_OPTIONS,
        "brief" => BRIEF_OPTIONS,
        "recipe" => RECIPE_OPTIONS,
        "kmeans" => KMEANS_OPTIONS,
        "kmedoids" => KMEDOIDS_OPTIONS,
        "kprototypes" => KPROTOTYPES_OPTIONS,
        "tree" => TREE_OPTIONS,
        "evidence" => EVIDENCE_OPTIONS,
        "choose" => CHOOSE_OPTIONS,
        "validate" => VALIDATE_OPTIONS,
        "previous" => PREVIOUS_OPTIONS,
        _ => &[],
    }
}

pub fn names(options: &[OptionDoc]) -> impl Iterator<Item = &'static str> + '_ {
    options.iter().map(|o| o.name)
}
