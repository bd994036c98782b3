//! The words a statement takes after its statement word: the values of
//! options, the transforms, the scalings, the outputs, the criteria and
//! the fixed words (`all`, `except`, `for`...), each with the statement it
//! belongs to and one line of help, for hover and completion. Tests keep
//! every name the plan accepts in this list.

/// A word in its statement, with help.
pub struct ValueDoc {
    /// The statement the word belongs to.
    pub statement: &'static str,
    /// The option it is a value of, or `None` for a word with a fixed
    /// place in the statement.
    pub option: Option<&'static str>,
    pub word: &'static str,
    pub summary: &'static str,
}

const fn fixed(statement: &'static str, word: &'static str, summary: &'static str) -> ValueDoc {
    ValueDoc {
        statement,
        option: None,
        word,
        summary,
    }
}

const fn value_of(
    statement: &'static str,
    option: &'static str,
    word: &'static str,
    summary: &'static str,
) -> ValueDoc {
    ValueDoc {
        statement,
        option: Some(option),
        word,
        summary,
    }
}

pub const VALUES: &[ValueDoc] = &[
    fixed("features", "all", "every numeric column of the input except the key"),
    fixed("features", "except", "leaves the columns listed after it out of `all`"),
    fixed("missing", "drop", "leaves out every record with a gap in a column the rule covers; the run counts them"),
    fixed("missing", "keep", "for categories: a blank is a level of its own, `(blank)` (numbers need `fill` or `drop`)"),
    fixed("missing", "fill", "puts a value in every gap: `median` or `mean` of the column's known values, or a number"),
    fixed("missing", "for", "limits the rule to the columns listed after it; without `for` it covers every column"),
    fixed("missing", "median", "the middle of the column's known values: a few extreme values do not move it"),
    fixed("missing", "mean", "the average of the column's known values: pulled by extreme values"),
    fixed("transform", "log1p", "log(1 + x), for counts and amounts that include 0; values must be above -1"),
    fixed("transform", "log", "natural logarithm; values must be above 0"),
    fixed("transform", "sqrt", "square root, milder than a logarithm; values must be 0 or more"),
    fixed("transform", "clip", "`clip 0.01..0.99`: values beyond these quantiles of the column are set to them, so a few extreme records do not pull a centre (the records stay)"),
    fixed("scale", "zscore", "subtracts the mean and divides by the standard deviation: every feature gets mean 0 and spread 1"),
    fixed("scale", "robust", "subtracts the median and divides by the interquartile range: extreme values do not set the scale"),
    fixed("scale", "range", "maps each feature's smallest value to 0 and its largest to 1: one extreme record squeezes the rest"),
    fixed("scale", "none", "keeps each feature in its own units: the feature with the largest numbers dominates the distance"),
    fixed("choose", "k", "the number of segments, chosen from the method's range"),
    fixed("choose", "by", "names the criterion that picks k from the range"),
    value_of("choose", "by", "silhouette", "the k whose records sit best in their own segment against the nearest other (higher is better, -1 to 1)"),
    value_of("choose", "by", "calinski-harabasz", "the k with the largest ratio of between-segment to within-segment spread, each per degree of freedom"),
    value_of("choose", "by", "davies-bouldin", "the k whose segments are most compact relative to the distance between them (lower is better)"),
    value_of("choose", "by", "elbow", "the k at the knee of the within-segment sum of squares against k"),
    value_of("choose", "by", "gap", "the smallest k whose gap statistic is at least the next k's less its standard error (needs `evidence gap`)"),
    value_of("choose", "by", "stability", "the k whose segments come back most alike on bootstrap resamples (needs `evidence stability`)"),
    value_of("kmeans", "by", "key", "draw the sample by a hash of each record's key, with the records in key order and exact refinement: nothing depends on the order of the records"),
    value_of("input", "read", "whole", "read the records into memory once (the default)"),
    value_of("input", "read", "passes", "leave the records in the Parquet input and read them once per pass, holding only a sample and sums: for inputs larger than memory (with `sample N by key`)"),
    value_of("kmeans", "seeding", "kmeans++", "the first centres drawn far apart, each with probability proportional to squared distance (the default)"),
    value_of("kmeans", "seeding", "random-partition", "every record put in a random segment and the centres taken as their means"),
    value_of("tree", "linkage", "ward", "merges the pair that raises the within-segment sum of squares least: compact segments of similar size (Euclidean only)"),
    value_of("tree", "linkage", "average", "distance between segments is the mean distance between their records"),
    value_of("tree", "linkage", "complete", "distance between segments is the largest distance between their records: tight segments"),
    value_of("tree", "linkage", "single", "distance between segments is the smallest distance between their records: chains, finds odd shapes and outliers"),
    value_of("tree", "linkage", "weighted", "average linkage where each merged half counts equally, whatever its size"),
    value_of("tree", "linkage", "centroid", "distance between segment means; heights may fall (Euclidean only)"),
    value_of("tree", "linkage", "median", "distance between midpoints of the merged halves; heights may fall (Euclidean only)"),
    value_of("tree", "distance", "euclidean", "straight-line distance (the default)"),
    value_of("tree", "distance", "manhattan", "sum of absolute differences: one large difference counts less than in Euclidean"),
    value_of("tree", "distance", "cosine", "1 minus the cosine of the angle between records: the mix matters, not the size"),
    value_of("tree", "distance", "correlation", "1 minus the correlation between records' values: the profile's shape matters, not its level"),
    value_of("tree", "distance", "gower", "Gower's dissimilarity: each number by its range, each category by match or not, the mean over the columns a pair shares (any linkage but ward, centroid and median)"),
    value_of("kmedoids", "distance", "gower", "Gower's dissimilarity over numbers and categories, each column by its range or by match (the default)"),
    value_of("kmedoids", "distance", "euclidean", "straight-line distance over the prepared columns"),
    value_of("kmedoids", "distance", "manhattan", "sum of absolute differences over the prepared columns: outlying values count less"),
    value_of("kmedoids", "distance", "cosine", "1 minus the cosine of the angle between records: the mix matters, not the size"),
    value_of("kmedoids", "distance", "correlation", "1 minus the correlation between records' values: the profile's shape matters"),
    value_of("evidence", "silhouette", "estimate", "above 12,000 records the silhouette is measured on a seeded sample, with its standard error (the default)"),
    value_of("evidence", "silhouette", "exact", "the silhouette over every pair of records: time grows with the square of the records"),
    fixed("save", "assignments", "a CSV: each record's key, segment, label, distance to its centre, and how much farther the second-nearest centre is"),
    fixed("save", "profiles", "per segment: size, share, each feature's mean and standardised difference, category shares (.csv or .json)"),
    fixed("save", "centroids", "a CSV of each segment's centre in original units, and category level shares"),
    fixed("save", "report", "one self-contained HTML page for people who will not open a CSV"),
    fixed("save", "model", "the segment model (JSON): `assort assign` puts new records in the segments with it"),
    fixed("save", "scoring", "the segment model as one standard SQL query, so the customer database puts records in segments exactly as `assort assign` does (.sql)"),
    fixed("save", "rules", "each segment's readable rule (at most three conditions, with its coverage and precision) as one SQL query for a CRM or marketing system (.sql)"),
    fixed("save", "handoff", "a CSV for a CRM or marketing system: each record's key and its segment's name, nothing else"),
    fixed("save", "merges", "a CSV of the tree's merges in order (`tree` only)"),
    fixed("save", "table", "the assignments written into a table on the input's connection, replaced as a whole in one transaction; only with `--allow-table NAME` on the command line"),
    fixed("save", "tree", "the tree in Newick format for tree viewers (`tree` only)"),
    value_of("call", "as", "number", "up to two decimals, thousands separated, the unit after: `4.5 visits`"),
    value_of("call", "as", "percent", "a fraction shown as a percentage: 0.21 as `21 %`"),
    value_of("call", "as", "money", "two decimals, thousands separated, the unit before: `€1,250.00`"),
    value_of("call", "as", "count", "a whole number, thousands separated: `12,480`"),
    fixed("validate", "against", "names the file holding the known grouping, joined on the key"),
    fixed("compare", "with", "names the earlier assignments file, joined on the key"),
];

/// Help on `word` in `statement`.
pub fn value(statement: &str, word: &str) -> Option<&'static ValueDoc> {
    VALUES
        .iter()
        .find(|v| v.statement == statement && v.word == word)
}

/// The values `option` of `statement` takes, when they are words.
pub fn values_of<'a>(
    statement: &'a str,
    option: Option<&'a str>,
) -> impl Iterator<Item = &'static ValueDoc> + 'a {
    VALUES
        .iter()
        .filter(move |v| v.statement == statement && v.option == option)
}
