//! The method: `kmeans`, `kmedoids`, `kprototypes` or `tree`, their
//! options and the values of k.

use super::*;

/// The method statement words.
pub(super) const METHODS: [&str; 4] = ["kmeans", "kmedoids", "kprototypes", "tree"];

impl Checker {
    /// The one method statement, of those `found` (each the first of its
    /// word).
    pub(super) fn method(&mut self, mut found: Vec<&Statement>) -> Option<MethodPlan> {
        found.sort_by_key(|s| s.span.start);
        match found.as_slice() {
            [] => {
                self.err(CheckError::NoMethod { span: self.end });
                None
            }
            [s] => match &s.kind {
                StatementKind::KMeans { .. } => self.kmeans(s).map(MethodPlan::KMeans),
                StatementKind::KMedoids { .. } => self.kmedoids(s).map(MethodPlan::KMedoids),
                StatementKind::KPrototypes { .. } => {
                    self.kprototypes(s).map(MethodPlan::KPrototypes)
                }
                _ => self.tree(s).map(MethodPlan::Tree),
            },
            [first, second, ..] => {
                self.err(CheckError::Conflict {
                    what: "a method (`kmeans`, `kmedoids`, `kprototypes` or `tree`)".into(),
                    span: second.keyword.span,
                    first: first.keyword.span,
                });
                None
            }
        }
    }

    /// What a method with its own measure (k-medoids, k-prototypes, a tree
    /// on Gower's) cannot do yet: the reclustering evidence (gap
    /// statistic, bootstrap stability), which reclusters with k-means, and
    /// the scoring SQL, which writes the Euclidean nearest centre.
    pub(super) fn method_limits(&mut self, stmts: &[Statement], method: &MethodPlan) {
        let name = match method {
            MethodPlan::KMedoids(_) => "`kmedoids`",
            MethodPlan::KPrototypes(_) => "`kprototypes`",
            MethodPlan::Tree(t) if t.distance == Distance::Gower => "a tree on `distance gower`",
            _ => return,
        };
        let evidence_help = "the gap statistic and bootstrap stability recluster with k-means, which would judge another method than this one; choose k by `silhouette`, `calinski-harabasz`, `davies-bouldin` or `elbow`, which this method measures on its own dissimilarity";
        for st in stmts {
            let found: Vec<(String, Span, &str)> = match &st.kind {
                StatementKind::Evidence { options } => options
                    .iter()
                    .filter(|o| matches!(o.name.node.as_str(), "gap" | "stability"))
                    .map(|o| (format!("`evidence {}`", o.name.node), o.name.span, evidence_help))
                    .collect(),
                StatementKind::Choose {
                    rule: ChooseRule::By(c),
                    ..
                } if matches!(c.node.as_str(), "gap" | "stability") => {
                    vec![(format!("`choose k by {}`", c.node), c.span, evidence_help)]
                }
                StatementKind::Save { what, .. } if what.node == "scoring" => vec![(
                    "`save scoring`".to_string(),
                    st.span,
                    "the scoring SQL writes the nearest centre by Euclidean distance; save the model (`save model`) and score new records with `assort assign`, which measures as this method does",
                )],
                _ => Vec::new(),
            };
            for (what, span, help) in found {
                self.err(CheckError::NotWithMethod {
                    what,
                    method: name.to_string(),
                    span,
                    help: help.to_string(),
                });
            }
        }
    }

    /// Refuses a method that holds every pair of records beyond the
    /// matrix's memory limit.
    fn matrix_fits(&mut self, method: &str, span: Span, help: &str) {
        let limit = TreeLimit::of(Linkage::Average);
        if let Some(n) = self.records().filter(|&n| n > limit.records) {
            self.err(CheckError::LargeMatrix {
                method: method.to_string(),
                records: crate::text::thousands(n),
                gib: TreeLimit::matrix_bytes(n) as f64 / (1u64 << 30) as f64,
                span,
                help: format!(
                    "the matrix takes at most {} records (2 GiB); {help}",
                    crate::text::thousands(limit.records)
                ),
            });
        }
    }

    pub(super) fn kmedoids(&mut self, s: &Statement) -> Option<KMedoidsPlan> {
        let StatementKind::KMedoids { options } = &s.kind else {
            return None;
        };
        let opts = self.options("kmedoids", options, vocab::KMEDOIDS_OPTIONS);
        let ks = self.required_ks("kmedoids", &opts, s.span);
        let restarts = self.capped_option(
            &opts,
            "restarts",
            defaults::RESTARTS,
            MOST_RESTARTS,
            "each restart swaps medoids over every pair of records; 10 to 50 restarts are usual",
        );
        let passes = self.capped_option(
            &opts,
            "passes",
            defaults::PASSES,
            MOST_ROUNDS,
            "a pass tries every record as a medoid; k-medoids settles in a few passes, and a cap this high only hides a run that does not",
        );
        let distance = self
            .word_option(
                &opts,
                "distance",
                Distance::Gower,
                &Distance::NAMES,
                Distance::parse,
                "a distance name",
                "`gower` compares numbers and categories together; it is the usual choice for mixed tables",
            )
            .map(|(d, _)| d);
        self.matrix_fits(
            "k-medoids",
            s.keyword.span,
            "for larger tables use `kprototypes` (numbers and categories, no matrix), or segment a sample",
        );
        Some(KMedoidsPlan {
            ks: ks?,
            restarts: restarts?,
            passes: passes?,
            distance: distance?,
        })
    }

    pub(super) fn kprototypes(&mut self, s: &Statement) -> Option<KPrototypesPlan> {
        let StatementKind::KPrototypes { options } = &s.kind else {
            return None;
        };
        let opts = self.options("kprototypes", options, vocab::KPROTOTYPES_OPTIONS);
        let ks = self.required_ks("kprototypes", &opts, s.span);
        let restarts = self.capped_option(
            &opts,
            "restarts",
            defaults::RESTARTS,
            MOST_RESTARTS,
            "10 to 100 restarts find the best partition in practice",
        );
        let rounds = self.capped_option(
            &opts,
            "rounds",
            defaults::ROUNDS,
            MOST_ROUNDS,
            "k-prototypes settles in tens of rounds, and a cap this high only hides a run that does not",
        );
        let gamma = match opts.get("gamma") {
            None => Some(None),
            Some(o) => match &o.value.node {
                Value::Number(n) if n.value.is_finite() && n.value > 0.0 => Some(Some(n.value)),
                other => {
                    self.bad_value(
                        "gamma",
                        other,
                        "a number above 0",
                        o.value.span,
                        "a mismatched category costs this much against the squared differences of the scaled numbers; leave it out for Huang's suggestion from the data",
                    );
                    None
                }
            },
        };
        Some(KPrototypesPlan {
            ks: ks?,
            restarts: restarts?,
            rounds: rounds?,
            tolerance: self.tolerance(&opts)?,
            gamma: gamma?,
        })
    }

    /// The required `k` option of a method statement.
    pub(super) fn required_ks(
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

    pub(super) fn tree(&mut self, s: &Statement) -> Option<TreePlan> {
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
        let linkage = self.word_option(
            &opts,
            "linkage",
            Linkage::Ward,
            &Linkage::NAMES,
            Linkage::parse,
            "a linkage name",
            "for example `linkage ward`",
        );
        let distance = self.word_option(
            &opts,
            "distance",
            Distance::Euclidean,
            &Distance::NAMES,
            Distance::parse,
            "a distance name",
            "for example `distance manhattan`",
        );
        if let (Some((l, l_span)), Some((m, Some(m_span)))) = (linkage, distance) {
            if l.needs_euclidean() && m != Distance::Euclidean {
                self.err(CheckError::NeedsEuclidean {
                    linkage: l.name(),
                    distance: m.name(),
                    span: m_span,
                    linkage_span: l_span.unwrap_or(s.keyword.span),
                });
                return None;
            }
        }
        let linkage = linkage.map(|(l, _)| l);
        let gower = matches!(distance, Some((Distance::Gower, _)));
        if gower {
            self.gower_tree(&opts, s)?;
        }
        let micro = match opts.get("micro") {
            None => None,
            Some(o) => Some(self.micro(&opts, o, ks.as_deref(), linkage)?),
        };
        if let (false, None, Some(l)) = (gower, &micro, linkage) {
            let limit = TreeLimit::of(l);
            if let Some(n) = self.records().filter(|&n| n > limit.records) {
                self.err(CheckError::large_tree(n, l.name(), limit, s.keyword.span));
            }
        }
        Some(TreePlan {
            ks: ks?,
            height,
            linkage: linkage?,
            distance: distance?.0,
            micro,
        })
    }

    /// A tree on Gower's dissimilarity: over every record (no `micro`,
    /// whose micro-segments are k-means centres) and within the matrix's
    /// limit.
    fn gower_tree(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        s: &Statement,
    ) -> Option<()> {
        if let Some(o) = opts.get("micro") {
            self.err(CheckError::NotWithMethod {
                what: "`micro`".into(),
                method: "`distance gower`".into(),
                span: o.name.span,
                help: "micro-segments are k-means centres, which Gower's dissimilarity does not have; drop `micro`, or use `kprototypes` for large mixed tables".into(),
            });
            return None;
        }
        self.matrix_fits(
            "a tree on Gower's dissimilarity",
            s.keyword.span,
            "for larger tables use `kprototypes` (numbers and categories, no matrix)",
        );
        Some(())
    }

    /// The `micro` option of `tree`: more micro-segments than the largest
    /// k, about [`PER_MICRO_SEGMENT`] records or more each, and no more
    /// than the linkage's tree limit, each refusal with its predicted cost.
    fn micro(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        o: &OptionPair,
        ks: Option<&[usize]>,
        linkage: Option<Linkage>,
    ) -> Option<MicroPlan> {
        let m = self.whole_option(opts, "micro", 2, 500)?;
        let largest_k = ks.and_then(|k| k.last().copied());
        if let Some(most) = largest_k.filter(|&most| m <= most) {
            self.err(CheckError::ImpossibleK {
                reason: format!("{m} micro-segments cannot be cut into {most} segments"),
                span: o.value.span,
                help: "micro-segments are the tree's leaves; use many more than the largest k, such as `micro 500`".into(),
            });
            return None;
        }
        // Micro-segments of a record or two cost a k-means fit with k near
        // n (time n² a round) and summarise nothing.
        if let Some(n) = self.records().filter(|&n| m * PER_MICRO_SEGMENT > n) {
            let most = n / PER_MICRO_SEGMENT;
            let tree = match linkage.map(TreeLimit::of) {
                Some(limit) if n <= limit.records => format!(
                    "with {} records, a tree over every record (no `micro`) is the better route",
                    crate::text::thousands(n)
                ),
                _ => "use fewer micro-segments, such as `micro 500`".to_string(),
            };
            let largest_k = largest_k.unwrap_or(1);
            let expected = if most > largest_k {
                format!("at most {} for {} records ({PER_MICRO_SEGMENT} records per micro-segment on average)", crate::text::thousands(most), crate::text::thousands(n))
            } else {
                format!("no `micro` here: {} records are too few for more than {largest_k} micro-segments of {PER_MICRO_SEGMENT} records on average", crate::text::thousands(n))
            };
            let cost = format!(
                "{} micro-segments cost a k-means fit with k = {m}: {} distance measurements a round, {} restarts; {tree}",
                crate::text::thousands(m),
                crate::text::thousands(m as u128 * n as u128),
                defaults::MICRO_RESTARTS
            );
            self.bad_value("micro", &o.value.node, &expected, o.value.span, &cost);
            return None;
        }
        // The tree is built over the micro-segments, so they are held to
        // the linkage's limit like records are.
        if let Some(l) = linkage {
            let limit = TreeLimit::of(l);
            if m > limit.records {
                let why = limit
                    .reason(m, l.name())
                    .replace("every record", "every micro-segment");
                let expected = format!(
                    "at most {} for `{}` linkage",
                    crate::text::thousands(limit.records),
                    l.name()
                );
                let why =
                    format!("{why}; a few hundred to a few thousand micro-segments are usual");
                self.bad_value("micro", &o.value.node, &expected, o.value.span, &why);
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

    pub(super) fn kmeans(&mut self, s: &Statement) -> Option<KMeansPlan> {
        let StatementKind::KMeans { options } = &s.kind else {
            return None;
        };
        let opts = self.options("kmeans", options, vocab::KMEANS_OPTIONS);
        let ks = self.required_ks("kmeans", &opts, s.span);
        let values_of_k = ks.as_ref().map_or(1, Vec::len) as u128;
        let restarts = self
            .whole_option(&opts, "restarts", 1, defaults::RESTARTS)
            .and_then(|r| {
                let cost = self.fits_cost(r as u128 * values_of_k, "k-means fits");
                let why = format!("that is {cost}, one per restart and value of k; 10 to 100 restarts find the best partition in practice");
                self.at_most(&opts, "restarts", r, MOST_RESTARTS, &why)
            });
        let rounds = self
            .whole_option(&opts, "rounds", 1, defaults::ROUNDS)
            .and_then(|r| {
                let most_k = ks.as_ref().and_then(|k| k.last().copied()).unwrap_or(2);
                let per_round = match self.records() {
                    Some(n) => format!("each measuring {} records against up to {most_k} centres", crate::text::thousands(n)),
                    None => format!("each measuring every record against up to {most_k} centres"),
                };
                let why = format!("a fit could then take {} rounds, {per_round}; k-means converges in tens to hundreds of rounds, and a cap this high only hides a run that does not converge", crate::text::thousands(r));
                self.at_most(&opts, "rounds", r, MOST_ROUNDS, &why)
            });
        let sample = match opts.get("sample") {
            None => Some(None),
            Some(o) => self.sample(&opts, o, ks.as_deref()).map(Some),
        };
        let by_key = self.by_key(&opts);
        let tolerance = self.tolerance(&opts);
        let seeding = self
            .word_option(
                &opts,
                "seeding",
                Seeding::KMeansPlusPlus,
                &Seeding::NAMES,
                Seeding::parse,
                "`kmeans++` or `random-partition`",
                "k-means++ spreads the first centres out; it is the usual choice",
            )
            .map(|(s, _)| s);
        Some(KMeansPlan {
            ks: ks?,
            restarts: restarts?,
            rounds: rounds?,
            tolerance: tolerance?,
            seeding: seeding?,
            sample: sample?,
            by_key: by_key?,
        })
    }

    /// `by key` (with `sample`): whether the sample is drawn by key rank.
    fn by_key(&mut self, opts: &HashMap<&'static str, &OptionPair>) -> Option<bool> {
        let Some(o) = opts.get("by") else {
            return Some(false);
        };
        if !matches!(&o.value.node, Value::Word(w) if w == "key") {
            self.bad_value(
                "by",
                &o.value.node,
                "`key`",
                o.value.span,
                "`sample 200000 by key` draws the sample by each record's key",
            );
            return None;
        }
        if !opts.contains_key("sample") {
            self.bad_value(
                "by",
                &o.value.node,
                "`key` after `sample N`",
                o.name.span.to(o.value.span),
                "`by key` says how the sample is drawn: give its size too, such as `sample 200000 by key`",
            );
            return None;
        }
        Some(true)
    }

    /// The `tolerance` option of `kmeans` and `kprototypes`.
    fn tolerance(&mut self, opts: &HashMap<&'static str, &OptionPair>) -> Option<f64> {
        let Some(o) = opts.get("tolerance") else {
            return Some(defaults::TOLERANCE);
        };
        match &o.value.node {
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
        }
    }

    /// The `sample` option of `kmeans`: at least [`SMALLEST_SAMPLE`]
    /// records, and [`PER_SEGMENT_IN_SAMPLE`] per segment at the largest k.
    fn sample(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        o: &OptionPair,
        ks: Option<&[usize]>,
    ) -> Option<usize> {
        let v = self.whole_option(opts, "sample", SMALLEST_SAMPLE, 200_000)?;
        let most = ks.and_then(|k| k.last().copied()).unwrap_or(0);
        if v >= PER_SEGMENT_IN_SAMPLE * most {
            return Some(v);
        }
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
    }

    /// The values of k, checked against each other and the record count.
    pub(super) fn ks(&mut self, value: &Spanned<Value>) -> Option<Vec<usize>> {
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
}
