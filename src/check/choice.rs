//! How k is chosen and defended, and what the segments are named and
//! compared with: `choose`, `evidence`, `label`, `validate`, `compare`.

use super::*;

impl Checker {
    pub(super) fn choose(
        &mut self,
        stmt: Option<&Statement>,
        fitted: Option<&[usize]>,
    ) -> Option<ChooseK> {
        let Some(Statement {
            kind: StatementKind::Choose { rule, .. },
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

    /// The size floor of `choose ... floor N`: a whole number of records
    /// (1 or more), or a share of the records (above 0, below 1). `None`
    /// when the value does not fit; `Some(None)` when no floor is given.
    pub(super) fn floor(&mut self, stmt: Option<&Statement>) -> Option<Option<SizeFloor>> {
        let Some(Statement {
            kind: StatementKind::Choose { options, .. },
            ..
        }) = stmt
        else {
            return Some(None);
        };
        let opts = self.options("choose", options, vocab::CHOOSE_OPTIONS);
        let Some(o) = opts.get("floor") else {
            return Some(None);
        };
        let floor = match &o.value.node {
            Value::Number(n) if n.value.is_finite() && n.value > 0.0 && n.value < 1.0 => {
                Some(SizeFloor::Share(n.value))
            }
            Value::Number(n) => n
                .as_whole()
                .filter(|&r| r >= 1)
                .map(|r| SizeFloor::Records(r as usize)),
            _ => None,
        };
        if floor.is_none() {
            self.bad_value(
                "floor",
                &o.value.node,
                "a whole number of records, or a share between 0 and 1",
                o.value.span,
                "for example `floor 250` (records) or `floor 0.05` (5 % of the records)",
            );
            return None;
        }
        // Only a counted file is held to this; an estimate could be low.
        let counted = self.probe.as_ref().and_then(|p| p.rows);
        if let (Some(SizeFloor::Records(r)), Some(n)) = (floor, counted) {
            if r > n {
                self.bad_value(
                    "floor",
                    &o.value.node,
                    &format!(
                        "at most the {} records of the data",
                        crate::text::thousands(n)
                    ),
                    o.value.span,
                    "no segment can hold more records than the data has",
                );
                return None;
            }
        }
        Some(floor)
    }

    /// The `evidence` statement; a choice by gap or stability turns that
    /// evidence on with its default size.
    pub(super) fn evidence(
        &mut self,
        stmt: Option<&Statement>,
        choose: Option<ChooseK>,
        ks: Option<&[usize]>,
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
            let values_of_k = ks.map_or(1, <[usize]>::len) as u128;
            for (name, what) in [("gap", "reference sets"), ("stability", "resamples")] {
                if !opts.contains_key(name) {
                    continue;
                }
                let sets = self.whole_option(&opts, name, 2, defaults::EVIDENCE_SETS)?;
                let fits = sets as u128 * values_of_k * defaults::EVIDENCE_RESTARTS as u128;
                let why = format!(
                    "{} {what} for {values_of_k} values of k with {} restarts each is {}; 20 to 100 are usual",
                    crate::text::thousands(sets),
                    defaults::EVIDENCE_RESTARTS,
                    self.fits_cost(fits, "reclusterings")
                );
                let sets = self.at_most(&opts, name, sets, MOST_EVIDENCE_SETS, &why)?;
                match name {
                    "gap" => plan.gap = Some(sets),
                    _ => plan.stability = Some(sets),
                }
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

    /// A segment's number in `label` or `brief`: whole, 1 or more, and
    /// at most `most` when the recipe's k are known.
    fn segment_number(
        &mut self,
        word: &'static str,
        segment: &Spanned<crate::syntax::ast::Number>,
        most: Option<usize>,
    ) -> Option<i64> {
        let n = match segment.node.as_whole() {
            Some(n) if n >= 1 => n,
            _ => {
                self.bad_value(
                    word,
                    &Value::Number(segment.node.clone()),
                    "a segment number, 1 or more",
                    segment.span,
                    "segments are numbered 1 to k, largest first",
                );
                return None;
            }
        };
        if let Some(m) = most.filter(|&m| n as usize > m) {
            self.err(CheckError::LabelOutOfRange {
                what: word,
                segment: n,
                most: m,
                span: segment.span,
            });
            return None;
        }
        Some(n)
    }

    pub(super) fn labels(
        &mut self,
        stmts: &[Statement],
        fitted: Option<&[usize]>,
        room: usize,
    ) -> Option<BTreeMap<usize, String>> {
        let most = fitted.and_then(|k| k.last().copied()).map(|m| m + room);
        let mut out = BTreeMap::new();
        let mut spans: HashMap<usize, Span> = HashMap::new();
        // Names as people and CRM imports compare them: case and outer
        // spaces aside.
        let mut names: HashMap<String, (usize, Span)> = HashMap::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Label { segment, text } = &s.kind else {
                continue;
            };
            let Some(n) = self.segment_number("label", segment, most) else {
                ok = false;
                continue;
            };
            if let Some(first) = spans.get(&(n as usize)) {
                self.err(CheckError::Conflict {
                    what: format!("a label for segment {n}"),
                    span: segment.span,
                    first: *first,
                });
                ok = false;
                continue;
            }
            let name = text.node.trim().to_lowercase();
            if let Some(&(other, first)) = names.get(&name) {
                self.err(CheckError::SameLabel {
                    label: text.node.clone(),
                    segment: n as usize,
                    other,
                    span: text.span,
                    first,
                });
                ok = false;
                continue;
            }
            names.insert(name, (n as usize, text.span));
            spans.insert(n as usize, segment.span);
            out.insert(n as usize, text.node.clone());
        }
        ok.then_some(out)
    }

    /// Each `brief`: a segment in one line and, optionally, its next
    /// step (`action`), one per segment, neither blank.
    pub(super) fn briefs(
        &mut self,
        stmts: &[Statement],
        fitted: Option<&[usize]>,
        room: usize,
    ) -> Option<BTreeMap<usize, SegmentNote>> {
        let most = fitted.and_then(|k| k.last().copied()).map(|m| m + room);
        let mut out = BTreeMap::new();
        let mut spans: HashMap<usize, Span> = HashMap::new();
        let mut ok = true;
        for s in stmts {
            let StatementKind::Brief {
                segment,
                text,
                options,
            } = &s.kind
            else {
                continue;
            };
            let opts = self.options("brief", options, vocab::BRIEF_OPTIONS);
            let action = match opts.get("action").map(|o| &o.value) {
                None => Some(None),
                Some(Spanned {
                    node: Value::Text(t),
                    span,
                }) if t.trim().is_empty() => {
                    self.err(CheckError::EmptyText {
                        what: "action",
                        span: *span,
                    });
                    None
                }
                Some(Spanned {
                    node: Value::Text(t),
                    ..
                }) => Some(Some(t.clone())),
                Some(v) => {
                    self.bad_value(
                        "action",
                        &v.node,
                        "a quoted text",
                        v.span,
                        r#"write it in quotes: `action "invite to the tasting evening"`"#,
                    );
                    None
                }
            };
            let Some(n) = self.segment_number("brief", segment, most) else {
                ok = false;
                continue;
            };
            if let Some(first) = spans.insert(n as usize, segment.span) {
                self.err(CheckError::Conflict {
                    what: format!("a brief for segment {n}"),
                    span: segment.span,
                    first,
                });
                ok = false;
                continue;
            }
            if text.node.trim().is_empty() {
                self.err(CheckError::EmptyText {
                    what: "brief",
                    span: text.span,
                });
                ok = false;
                continue;
            }
            let Some(action) = action else {
                ok = false;
                continue;
            };
            let text = text.node.clone();
            out.insert(n as usize, SegmentNote { text, action });
        }
        ok.then_some(out)
    }

    pub(super) fn validate(
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
        let decimal = input.map(|i| i.plan.decimal).unwrap_or_default();
        match probe::probe(&resolved, separator as u8, decimal) {
            Ok(p) => {
                // Columns of the known grouping are checked against its own
                // header, so swap it in for the lookup.
                let saved = self.probe.replace(p);
                let saved_file = std::mem::replace(&mut self.input_file, path.node.clone());
                let found = self.known_column(&column).is_some();
                let key_found = match input {
                    // Without a key the grouping is joined by line, so the
                    // file must list the same records in the same order.
                    Some(i) if i.plan.keyless => true,
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
    pub(super) fn compare(&mut self, stmt: Option<&Statement>) -> Option<Option<ComparePlan>> {
        let Some(Statement {
            kind: StatementKind::Compare { path },
            ..
        }) = stmt
        else {
            return Some(None);
        };
        let resolved = self.read_path(path)?;
        match probe::probe(&resolved, b',', DecimalMark::Point) {
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
}
