//! What is clustered: `categories`, `features`, and the rules per feature
//! (`missing`, `transform`, `weight`), with the cautions on personal data.

use super::*;

impl Checker {
    pub(super) fn categories(
        &mut self,
        stmts: &[Statement],
        input: Option<&CheckedInput>,
    ) -> Option<Vec<CategoryPlan>> {
        let mut out = Vec::new();
        let key = input.map(|i| i.plan.key.as_str());
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
                let first = self.category_spans.get(&col.node).copied();
                if first.is_none() {
                    self.category_spans.insert(col.node.clone(), col.span);
                }
                if !self.clustered_once(col, first, key) {
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
                    gaps: CategoryGaps::Refuse,
                });
            }
        }
        ok.then_some(out)
    }

    /// Whether `col` may be clustered: not named before among the
    /// clustered columns (`first`, where it was), and not the key; else
    /// the diagnostic.
    pub(super) fn clustered_once(
        &mut self,
        col: &Column,
        first: Option<Span>,
        key: Option<&str>,
    ) -> bool {
        if let Some(first) = first {
            self.err(CheckError::DuplicateColumn {
                column: col.node.clone(),
                span: col.span,
                first,
                help: "each column is either a feature or a category, once",
            });
            return false;
        }
        if key == Some(col.node.as_str()) {
            self.key_clustered(col);
            return false;
        }
        true
    }

    pub(super) fn key_clustered(&mut self, col: &Column) {
        self.err(CheckError::KeyClustered {
            column: col.node.clone(),
            span: col.span,
        });
    }

    /// The feature columns, in order, with default rules.
    pub(super) fn features(
        &mut self,
        stmt: Option<&Statement>,
        input: Option<&CheckedInput>,
        categories: &Option<Vec<CategoryPlan>>,
        kinded: Option<Vec<(String, Span)>>,
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
        // Columns clustered otherwise, which `features all` leaves.
        let cats: Vec<String> = categories
            .iter()
            .flatten()
            .map(|c| c.column.clone())
            .chain(self.kinds.keys().cloned())
            .collect();
        let mut out: Vec<(String, Span)> = Vec::new();
        let mut ok = true;
        match choice {
            FeatureChoice::Listed(cols) => {
                for col in cols {
                    match self.listed_feature(col, &out, key.as_deref()) {
                        Some(f) => out.push(f),
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
                self.all_took(&out, except, key.as_deref(), &cats, s.span);
            }
        }
        // Ordered categories and flags follow, clustered as numbers.
        out.extend(kinded.iter().flatten().cloned());
        ok &= kinded.is_some();
        if ok && out.is_empty() && self.probe.is_some() {
            self.err(CheckError::NoFeatures {
                span: s.span,
                help: "name at least one numeric column".into(),
            });
            return None;
        }
        ok.then_some(out)
    }

    /// What `features all` took and left, said once as advice, and a
    /// warning for each column taken that looks like a code (a year, a
    /// date, an identifier).
    fn all_took(
        &mut self,
        took: &[(String, Span)],
        except: &[Column],
        key: Option<&str>,
        cats: &[String],
        span: Span,
    ) {
        let Some(probe) = self.probe.as_ref() else {
            return;
        };
        let left = left_out(&probe.columns, except, key, cats);
        let taken: Vec<&probe::ColumnInfo> =
            took.iter().filter_map(|(n, _)| probe.column(n)).collect();
        let constant: Vec<&str> = taken
            .iter()
            .filter(|c| c.numbers > 1 && c.min == c.max)
            .map(|c| c.name.as_str())
            .collect();
        let mut took_words = format!(
            "{}: {}",
            crate::text::count(took.len(), "numeric column"),
            name_list(took.iter().map(|(n, _)| n.as_str()).collect())
        );
        if !constant.is_empty() {
            took_words.push_str(&format!(
                " (constant in the sample, so adding nothing to distances: {})",
                name_list(constant)
            ));
        }
        let codes: Vec<(String, &'static str)> = taken
            .iter()
            .filter_map(|c| c.looks_like_code().map(|w| (c.name.clone(), w)))
            .collect();
        self.err(CheckError::AllFeatures {
            took: took_words,
            left,
            span,
        });
        for (column, what) in codes {
            self.err(CheckError::LooksLikeCode { column, what, span });
        }
    }

    /// One column listed in `features`: named once, not the key, not a
    /// category, in the header, and numeric in the sample.
    fn listed_feature(
        &mut self,
        col: &Column,
        so_far: &[(String, Span)],
        key: Option<&str>,
    ) -> Option<(String, Span)> {
        let first = so_far
            .iter()
            .find(|(n, _)| *n == col.node)
            .map(|(_, s)| *s)
            .or_else(|| self.category_spans.get(&col.node).copied())
            .or_else(|| self.kinds.get(&col.node).map(|(s, _)| *s));
        if !self.clustered_once(col, first, key) {
            return None;
        }
        match self.known_column(col)? {
            // Numbers with a stray value, or numbers written with a decimal
            // comma: the data line is at fault.
            info if info.mostly_numeric() || info.comma_numbers == info.texts && info.texts > 0 => {
                self.not_a_number_in_data(&info, col.span);
                None
            }
            info if info.kind == ColumnKind::Text => {
                self.err(CheckError::TextFeature {
                    column: col.node.clone(),
                    example: clipped(&info.text_example.unwrap_or_default(), 60),
                    span: col.span,
                });
                None
            }
            _ => Some((col.node.clone(), col.span)),
        }
    }

    /// Warns about clustered columns whose names suggest personal data,
    /// unless the recipe acknowledges them.
    pub(super) fn cautions(
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

    /// A sampled value of a numeric column that is not a number, located
    /// in the data, with a decimal comma named as such.
    fn not_a_number_in_data(&mut self, info: &probe::ColumnInfo, span: Span) {
        let at = self
            .probe
            .as_ref()
            .and_then(|p| p.columns.iter().position(|c| c.name == info.name))
            .unwrap_or(0);
        let found = info.text_example.clone().unwrap_or_default();
        let help = if info.comma_numbers == info.texts {
            format!(
                "of the sampled values of `{}`, {} written with a decimal comma, such as `{}`: give `input` the option `decimal \",\"`",
                info.name,
                if info.texts == 1 { "1 is".to_string() } else { format!("{} are", crate::text::thousands(info.texts)) },
                clipped(&found, 20)
            )
        } else {
            probe::number_help(&found, self.decimal)
        };
        self.err(CheckError::NotANumberInData {
            file: self.input_file.clone(),
            line: info.text_line.unwrap_or(0),
            column: at + 1,
            name: info.name.clone(),
            found: clipped(&found, 60),
            span,
            help,
        });
    }

    /// Checks the values of every `missing`, `transform` and `weight`
    /// statement on their own, so a misspelt fill or transform is reported
    /// even when the feature list has problems of its own.
    pub(super) fn rules<'s>(&mut self, stmts: &'s [Statement]) -> Vec<CheckedRule<'s>> {
        let mut out = Vec::new();
        for s in stmts {
            let (rule, columns) = match &s.kind {
                StatementKind::Missing { action, columns } => (
                    self.missing_rule(action).map(Rule::Missing),
                    columns.as_deref(),
                ),
                StatementKind::Transform { columns, action } => {
                    (self.transform_action(action), Some(columns.as_slice()))
                }
                StatementKind::Weight { columns, value } => {
                    let w = self.positive(
                        "weight",
                        &Spanned::new(Value::Number(value.node.clone()), value.span),
                    );
                    (w.map(Rule::Weight), Some(columns.as_slice()))
                }
                _ => continue,
            };
            if let Some(rule) = rule {
                out.push(CheckedRule {
                    rule,
                    columns,
                    span: s.span,
                });
            }
        }
        out
    }

    /// A `transform` statement's action: a known transform word, or clip
    /// fractions in order.
    fn transform_action(&mut self, action: &TransformAction) -> Option<Rule> {
        match action {
            TransformAction::Clip(range) => {
                let (lo, hi) = (&range.node.0, &range.node.1);
                if (0.0..=1.0).contains(&lo.value)
                    && (0.0..=1.0).contains(&hi.value)
                    && lo.value < hi.value
                {
                    return Some(Rule::Clip(lo.value, hi.value));
                }
                self.err(CheckError::BadValue {
                    option: "clip".into(),
                    found: format!("`{}..{}`", lo.raw, hi.raw),
                    expected: "two quantile fractions from 0 to 1, the lower first".into(),
                    span: range.span,
                    help: "for example `clip 0.01..0.99` keeps the middle 98%".into(),
                });
                None
            }
            TransformAction::Named(word) => self
                .word_choice("transform", word, &Transform::NAMES, Transform::parse)
                .map(Rule::Transform),
        }
    }

    /// Applies the checked rules to the features: each column's rule of a
    /// kind given once, a rule for every column under the ones per column.
    pub(super) fn feature_rules(
        &mut self,
        rules: &[CheckedRule<'_>],
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
                kind: self
                    .kinds
                    .get(name)
                    .map(|(_, k)| k.clone())
                    .unwrap_or_default(),
            })
            .collect();
        let mut given: HashMap<(&'static str, String), Span> = HashMap::new();
        let mut global_missing: Option<(MissingRule, Span)> = None;
        for r in rules {
            let Some(columns) = r.columns else {
                // `missing keep` without `for` is for the categories.
                if let Rule::Missing(MissingRule::Keep) = r.rule {
                    continue;
                }
                // `missing` without `for`: every column.
                if let (Rule::Missing(rule), None) = (r.rule, global_missing) {
                    global_missing = Some((rule, r.span));
                } else if let Some((_, first)) = global_missing {
                    self.err(CheckError::Conflict {
                        what: "a rule for missing values in all columns".into(),
                        span: r.span,
                        first,
                    });
                }
                continue;
            };
            let (kind, what, statement) = r.rule.kind();
            for col in columns {
                let Some(f) = self.feature_of(&mut plans, col, statement) else {
                    continue;
                };
                if let Rule::Missing(MissingRule::Keep) = r.rule {
                    self.keep_for_number(col);
                    continue;
                }
                if matches!(r.rule, Rule::Transform(_) | Rule::Clip(..)) {
                    if let Some((_, kind)) = self.kinds.get(&col.node) {
                        self.transform_for_levels(col, kind.clone());
                        continue;
                    }
                }
                if let Some(&first) = given.get(&(kind, col.node.clone())) {
                    self.err(CheckError::Conflict {
                        what: format!("{what} (`{}`)", col.node),
                        span: col.span,
                        first,
                    });
                    continue;
                }
                given.insert((kind, col.node.clone()), col.span);
                r.rule.apply(&mut plans[f]);
            }
        }
        if let Some((rule, _)) = global_missing {
            for p in plans.iter_mut() {
                if !given.contains_key(&("missing", p.column.clone())) {
                    p.missing = rule;
                }
            }
        }
        self.gaps_without_rule(&plans, &features);
        plans
    }

    /// Gaps the sample already shows in features with no rule to handle
    /// them: the run would stop at the first; say so now.
    fn gaps_without_rule(&mut self, plans: &[FeaturePlan], features: &[(String, Span)]) {
        for (p, (_, span)) in plans.iter().zip(features) {
            if p.missing != MissingRule::Refuse {
                continue;
            }
            let blanks = self.sample_blanks(&p.column);
            if blanks > 0 {
                let sampled = self.probe.as_ref().map_or(0, |pr| pr.sampled);
                self.err(CheckError::GapsWithoutRule {
                    column: p.column.clone(),
                    blanks: crate::text::count(blanks, "blank value"),
                    sampled,
                    span: *span,
                });
            }
        }
    }

    /// Blank values of `column` in the input's sample.
    fn sample_blanks(&self, column: &str) -> usize {
        self.probe
            .as_ref()
            .and_then(|pr| pr.column(column))
            .map_or(0, |c| c.blanks)
    }

    /// `missing keep` named for a number.
    fn keep_for_number(&mut self, col: &Column) {
        self.err(CheckError::RuleNotForKind {
            rule: "missing keep".into(),
            kind: "a number",
            column: col.node.clone(),
            span: col.span,
            help: format!("a number needs a value to be measured by: `missing fill median for {0}` fills a blank, `missing drop for {0}` leaves the record out; `keep` is for categories, where a blank can be a level of its own", col.node),
        });
    }

    /// `transform` named for an ordered category or a flag.
    fn transform_for_levels(&mut self, col: &Column, kind: FeatureKind) {
        let (what, help) = match kind {
            FeatureKind::Flag => ("a flag", format!("`{}` is 1 or 0: there is no skew to tame or tail to clip; leave it out of `transform`", col.node)),
            _ => ("an ordered category", format!("`{}` is clustered by rank, evenly spaced: there is no skew to tame or tail to clip; leave it out of `transform` (`weight {} 0.5` makes it count less)", col.node, col.node)),
        };
        self.err(CheckError::RuleNotForKind {
            rule: "transform".into(),
            kind: what,
            column: col.node.clone(),
            span: col.span,
            help,
        });
    }

    /// What a blank does in each category: the `missing` rule naming it
    /// (`keep` or `drop`; a fill is for numbers), else a `missing keep` or
    /// `missing drop` for every column; a category the sample shows blanks
    /// in, with neither, is an error naming the fix.
    pub(super) fn category_gaps(
        &mut self,
        rules: &[CheckedRule<'_>],
        mut categories: Vec<CategoryPlan>,
    ) -> Vec<CategoryPlan> {
        let as_gaps = |m: MissingRule| match m {
            MissingRule::DropRow => Some(CategoryGaps::Drop),
            MissingRule::Keep => Some(CategoryGaps::Keep),
            _ => None,
        };
        let mut named: HashMap<String, Span> = HashMap::new();
        let mut global: Option<CategoryGaps> = None;
        for r in rules {
            let Rule::Missing(m) = r.rule else { continue };
            let Some(columns) = r.columns else {
                // `keep` is the categories' own word, so it wins over a
                // `drop` for every column.
                global = match (global, as_gaps(m)) {
                    (_, Some(CategoryGaps::Keep)) => Some(CategoryGaps::Keep),
                    (None, g) => g,
                    (g, _) => g,
                };
                continue;
            };
            for col in columns {
                let Some(c) = categories.iter_mut().find(|c| c.column == col.node) else {
                    continue;
                };
                if let Some(&first) = named.get(&col.node) {
                    self.err(CheckError::Conflict {
                        what: format!("a missing-value rule for this column (`{}`)", col.node),
                        span: col.span,
                        first,
                    });
                    continue;
                }
                named.insert(col.node.clone(), col.span);
                match as_gaps(m) {
                    Some(g) => c.gaps = g,
                    None => self.err(CheckError::RuleNotForKind {
                        rule: "missing fill".into(),
                        kind: "a category",
                        column: col.node.clone(),
                        span: col.span,
                        help: format!("a category has levels, not a middle to fill with: `missing keep for {0}` keeps a blank as a level of its own, `(blank)`; `missing drop for {0}` leaves the record out", col.node),
                    }),
                }
            }
        }
        for c in categories.iter_mut() {
            if !named.contains_key(&c.column) {
                c.gaps = global.unwrap_or(CategoryGaps::Refuse);
            }
            if c.gaps != CategoryGaps::Refuse {
                continue;
            }
            let blanks = self.sample_blanks(&c.column);
            if let (true, Some(&span)) = (blanks > 0, self.category_spans.get(&c.column)) {
                self.err(CheckError::CategoryGapsWithoutRule {
                    column: c.column.clone(),
                    blanks: crate::text::count(blanks, "blank value"),
                    sampled: self.probe.as_ref().map_or(0, |pr| pr.sampled),
                    span,
                });
            }
        }
        categories
    }

    /// Index of the feature `col` names, or a diagnostic.
    pub(super) fn feature_of(
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
        let help = if self.category_spans.contains_key(&col.node) {
            match statement {
                // Its rule is the categories' own (see `category_gaps`).
                "missing" => return None,
                _ => format!("`{}` is a category column, whose weight is set by `categories {} weight ...`; `{statement}` is for the numeric columns listed in `features`", col.node, col.node),
            }
        } else {
            format!(
                "`{statement}` applies to the columns listed in `features`; add `{}` there first",
                col.node
            )
        };
        self.err(CheckError::NotAFeature {
            column: col.node.clone(),
            span: col.span,
            help,
        });
        None
    }

    pub(super) fn missing_rule(&mut self, action: &Spanned<MissingAction>) -> Option<MissingRule> {
        match &action.node {
            MissingAction::DropRows => Some(MissingRule::DropRow),
            MissingAction::Keep => Some(MissingRule::Keep),
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
}

/// The action of a `missing`, `transform` or `weight` statement, checked.
#[derive(Debug, Clone, Copy)]
pub(super) enum Rule {
    Missing(MissingRule),
    Clip(f64, f64),
    Transform(Transform),
    Weight(f64),
}

impl Rule {
    /// (kind, what a second one of the kind for a column is, statement).
    fn kind(self) -> (&'static str, &'static str, &'static str) {
        match self {
            Rule::Missing(_) => ("missing", "a missing-value rule for this column", "missing"),
            Rule::Clip(..) => ("clip", "a clip for this column", "transform"),
            Rule::Transform(_) => ("transform", "a transform for this column", "transform"),
            Rule::Weight(_) => ("weight", "a weight for this column", "weight"),
        }
    }

    fn apply(self, plan: &mut FeaturePlan) {
        match self {
            Rule::Missing(m) => plan.missing = m,
            Rule::Clip(lo, hi) => plan.clip = Some((lo, hi)),
            Rule::Transform(t) => plan.transform = t,
            Rule::Weight(w) => plan.weight = w,
        }
    }
}

/// A checked rule with the columns it names (`None`: every column).
pub(super) struct CheckedRule<'s> {
    pub rule: Rule,
    pub columns: Option<&'s [Column]>,
    pub span: Span,
}

/// Names in backticks, at most a dozen, so a wide file does not flood the
/// check.
fn name_list(names: Vec<&str>) -> String {
    let mut shown: Vec<String> = names
        .iter()
        .take(12)
        .map(|n| format!("`{}`", clipped(n, 40)))
        .collect();
    if names.len() > 12 {
        shown.push(format!("and {} more", names.len() - 12));
    }
    shown.join(", ")
}

/// What `features all` left, grouped by why, in words (`nothing` when it
/// took every column).
fn left_out(
    columns: &[probe::ColumnInfo],
    except: &[Column],
    key: Option<&str>,
    cats: &[String],
) -> String {
    let why = |c: &probe::ColumnInfo| -> Option<usize> {
        if Some(c.name.as_str()) == key {
            Some(0)
        } else if cats.contains(&c.name) {
            Some(1)
        } else if except.iter().any(|e| e.node == c.name) {
            Some(2)
        } else if c.unsupported.is_some() {
            Some(5)
        } else {
            match c.kind {
                ColumnKind::Text => Some(3),
                ColumnKind::Blank => Some(4),
                _ => None,
            }
        }
    };
    let groups = [
        "the key",
        "categories",
        "excepted",
        "text columns",
        "blank columns",
        "columns of types assort does not read (dates, times, lists...)",
    ];
    let parts: Vec<String> = groups
        .iter()
        .enumerate()
        .filter_map(|(g, what)| {
            let names: Vec<&str> = columns
                .iter()
                .filter(|c| why(c) == Some(g))
                .map(|c| c.name.as_str())
                .collect();
            (!names.is_empty()).then(|| format!("{what} {}", name_list(names)))
        })
        .collect();
    if parts.is_empty() {
        "nothing".to_string()
    } else {
        parts.join("; ")
    }
}
