//! The `input` statement and the paths and columns it leads to: the data file
//! probed, a separator or a header that gives the file away, paths judged
//! by the sandbox, columns looked up with a "did you mean".

use super::*;

impl Checker {
    pub(super) fn input(&mut self, stmt: Option<&Statement>) -> Option<CheckedInput> {
        let Some(
            s @ Statement {
                kind: StatementKind::Input { path, options },
                ..
            },
        ) = stmt
        else {
            self.err(CheckError::MissingStatement {
                span: self.end,
                keyword: "input",
                help: r#"name the data file and its key, such as `input "data/members.csv" key member_id`"#.into(),
            });
            return None;
        };
        let opts = self.options("input", options, vocab::INPUT_OPTIONS);
        let read = self.read_option(&opts);
        if let Some(connection) = opts.get("database") {
            return self.database_input(s, path, &opts, connection);
        }
        let separator = self.separator(&opts);
        let decimal = self.decimal(&opts, separator);
        let no_key = self.no_key(&opts);
        let key = self.key_option(&opts, no_key, s.span);
        let resolved = self.read_path(path)?;
        self.input_file = path.node.clone();
        self.no_csv_options(&opts, &resolved)?;
        read?;
        self.passes_need_parquet(&opts, &resolved)?;
        let cluster = self.cluster_option(&opts)?;
        let (separator, decimal) = (separator?, decimal?);
        self.decimal = decimal;
        self.probe_input(path, &resolved, separator, decimal)?;
        if let Some(Some(span)) = no_key {
            let mut keyless = self.keyless_input(path, resolved, separator, decimal, span);
            keyless.plan.cluster = cluster;
            return Some(keyless);
        }
        let key = key?;
        self.known_column(&key)?;
        self.keys_usable(path, &resolved, separator, &key)?;
        Some(CheckedInput {
            plan: InputPlan {
                path: path.node.clone(),
                resolved,
                key: key.node.clone(),
                keyless: false,
                separator,
                decimal,
                database: None,
                cluster,
                passes: false,
            },
            key_span: key.span,
        })
    }

    /// `input "TABLE OR QUERY" database NAME key COLUMN`: the connection
    /// reached, a query checked to only read, the columns and a sample
    /// read, the key judged over every record (blank) and the sample
    /// (repeated). Problems with the connection or the source are
    /// reported at the source's text.
    fn database_input(
        &mut self,
        s: &Statement,
        path: &Spanned<String>,
        opts: &HashMap<&'static str, &OptionPair>,
        connection: &OptionPair,
    ) -> Option<CheckedInput> {
        self.database = true;
        let name = match &connection.value.node {
            Value::Word(w) | Value::Text(w) if !w.trim().is_empty() => Some(w.trim().to_string()),
            other => {
                self.bad_value(
                    "database",
                    other,
                    "a connection's name",
                    connection.value.span,
                    "for example `database coop`; the service file or the PG variables say how to reach it (docs/scale-out.md)",
                );
                None
            }
        };
        let mut ok = name.is_some();
        for (option, why) in [
            ("separator", "a database stores its values typed; remove the option"),
            ("decimal", "a database stores its values typed; remove the option"),
            ("no", "a table has no order of its own, so records cannot be numbered by it; name its key"),
            ("cluster", "the database runs the rounds of a table read in passes itself; remove the option"),
        ] {
            if let Some(o) = opts.get(option) {
                self.bad_value(option, &o.value.node, "nothing here", o.value.span, why);
                ok = false;
            }
        }
        let key = self.key_option(opts, None, s.span);
        let (connection, key) = (name?, key?);
        ok.then_some(())?;
        let source = crate::scale::source::Source {
            connection: connection.clone(),
            text: path.node.clone(),
        };
        self.input_file = source.describe();
        let looked = match probe::database::look(&source, &key.node) {
            Ok(l) => l,
            Err(reason) => {
                self.err(CheckError::DatabaseInput {
                    reason,
                    span: path.span,
                    label: "read here".into(),
                    help: "a table is named `name` or `schema.name`, anything else is read as a query; the connection's host, port, database and user come from its section of the service file, else the PG variables, a password also from ~/.pgpass (docs/scale-out.md)".into(),
                });
                return None;
            }
        };
        self.probe = Some(looked.probe.clone());
        self.known_column(&key)?;
        if let Some(reason) = looked.key_problem {
            self.err(CheckError::DatabaseInput {
                reason: format!("the key `{}` of {}: {reason}", key.node, source.describe()),
                span: key.span,
                label: "this key".into(),
                help: "every record needs its own key; choose another key column, or select records with a key in a query".into(),
            });
            return None;
        }
        Some(CheckedInput {
            plan: InputPlan {
                path: path.node.clone(),
                resolved: PathBuf::new(),
                key: key.node.clone(),
                keyless: false,
                separator: defaults::SEPARATOR,
                decimal: DecimalMark::Point,
                database: Some(connection),
                cluster: None,
                passes: false,
            },
            key_span: key.span,
        })
    }

    /// Refuses `separator` and `decimal` on a Parquet input, where they
    /// would silently mean nothing.
    fn no_csv_options(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        resolved: &Path,
    ) -> Option<()> {
        if !crate::parquet::is_parquet(resolved) {
            return Some(());
        }
        let mut ok = true;
        for name in ["separator", "decimal"] {
            if let Some(o) = opts.get(name) {
                self.bad_value(
                    name,
                    &o.value.node,
                    "nothing: a Parquet file stores its values typed",
                    o.value.span,
                    "remove the option; Parquet columns need no separator or decimal mark",
                );
                ok = false;
            }
        }
        ok.then_some(())
    }

    /// The `read` option: `whole` (the default) or `passes`, whose span
    /// is kept for the checks of what reading in passes allows.
    fn read_option(&mut self, opts: &HashMap<&'static str, &OptionPair>) -> Option<()> {
        let Some(o) = opts.get("read") else {
            return Some(());
        };
        match &o.value.node {
            Value::Word(w) if w == "whole" => Some(()),
            Value::Word(w) if w == "passes" => {
                self.read_passes = Some(o.value.span);
                Some(())
            }
            other => {
                self.bad_value(
                    "read",
                    other,
                    "`whole` or `passes`",
                    o.value.span,
                    "`read passes` leaves the records in the file and reads them once per pass, holding only the sample and the sums: for inputs larger than memory (docs/scale-out.md)",
                );
                None
            }
        }
    }

    /// The `cluster` option: the name of a Ballista cluster whose
    /// executors run the k-means rounds of a Parquet input read in passes
    /// (docs/scale-out.md); only with `read passes`, and only in an assort
    /// built with the `ballista` feature.
    fn cluster_option(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
    ) -> Option<Option<String>> {
        let Some(o) = opts.get("cluster") else {
            return Some(None);
        };
        let name = match &o.value.node {
            Value::Word(w) | Value::Text(w)
                if crate::scale::source::is_table_name(w) && !w.contains('.') =>
            {
                w.clone()
            }
            other => {
                self.bad_value(
                    "cluster",
                    other,
                    "a cluster's name",
                    o.value.span,
                    "for example `cluster lake`; its scheduler's address comes from the variable `ASSORT_CLUSTER_LAKE` (`host:port`), never from the recipe (docs/scale-out.md)",
                );
                return None;
            }
        };
        let problem = if self.read_passes.is_none() {
            Some("the rounds run on a cluster when the records stay in the Parquet input: add `read passes` (with `kmeans ... sample N by key`)")
        } else if !cfg!(feature = "ballista") {
            Some("this assort was built without the cluster engine: build it with `cargo build --release --features ballista` (docs/scale-out.md), or remove the option to run the rounds here")
        } else {
            None
        };
        if let Some(help) = problem {
            self.bad_value("cluster", &o.value.node, "nothing here", o.value.span, help);
            return None;
        }
        self.cluster = true;
        Some(Some(name))
    }

    /// `read passes` reads Parquet (a file or a folder of parts) for now.
    fn passes_need_parquet(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        resolved: &Path,
    ) -> Option<()> {
        let (Some(span), Some(o)) = (self.read_passes, opts.get("read")) else {
            return Some(());
        };
        if crate::parquet::is_parquet(resolved) {
            return Some(());
        }
        self.bad_value(
            "read",
            &o.value.node,
            "`whole` for a CSV file, for now",
            span,
            "reading in passes takes a Parquet file or a folder of Parquet parts, whose row groups are read in parallel; write the extract as Parquet, or read the CSV whole",
        );
        None
    }

    /// The `key` option, given alone; `None` (reported) when it is
    /// missing, or given together with `no key`.
    fn key_option(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        no_key: Option<Option<Span>>,
        statement: Span,
    ) -> Option<Spanned<String>> {
        match (opts.get("key"), no_key) {
            (Some(o), None) => self.column_name("key", o),
            (Some(o), Some(Some(span))) => {
                self.err(CheckError::Conflict {
                    what: "the key (`key` and `no key`)".into(),
                    span,
                    first: o.name.span,
                });
                None
            }
            (_, Some(_)) => None,
            (None, None) => {
                self.err(CheckError::MissingOption {
                    statement: "input",
                    option: "key",
                    span: statement,
                    help: "the key column identifies each record in the outputs, such as `key member_id`; a file without one takes `no key` (records keyed by their line)".into(),
                });
                None
            }
        }
    }

    /// Keys present and unique through the whole file (counted by the
    /// probe): `None` (reported at the key) when one is blank or repeated.
    fn keys_usable(
        &mut self,
        path: &Spanned<String>,
        resolved: &Path,
        separator: char,
        key: &Spanned<String>,
    ) -> Option<()> {
        match probe::key_problem(resolved, separator as u8, &key.node) {
            Some(probe::KeyProblem::Repeated(k, first, again)) => {
                self.err(CheckError::RepeatedKey {
                    column: key.node.clone(),
                    key: clipped(&k, 40),
                    file: path.node.clone(),
                    first,
                    again,
                    span: key.span,
                });
                None
            }
            Some(probe::KeyProblem::Blank(line)) => {
                self.err(CheckError::BlankKey {
                    column: key.node.clone(),
                    file: path.node.clone(),
                    line,
                    span: key.span,
                });
                None
            }
            None => Some(()),
        }
    }

    /// `no key`: `None` when absent, `Some(None)` when its value is not
    /// `key`, else the option's span.
    fn no_key(&mut self, opts: &HashMap<&'static str, &OptionPair>) -> Option<Option<Span>> {
        let o = opts.get("no")?;
        match &o.value.node {
            Value::Word(w) if w == "key" => Some(Some(o.name.span.to(o.value.span))),
            other => {
                self.bad_value(
                    "no",
                    other,
                    "`key`",
                    o.value.span,
                    "`no key` says the file has no key column; records are then keyed by their line",
                );
                Some(None)
            }
        }
    }

    /// The input of a file without a key: records keyed by their line,
    /// under a column name the header does not use.
    fn keyless_input(
        &mut self,
        path: &Spanned<String>,
        resolved: PathBuf,
        separator: char,
        decimal: DecimalMark,
        span: Span,
    ) -> CheckedInput {
        let taken = self
            .probe
            .as_ref()
            .is_some_and(|p| p.columns.iter().any(|c| c.name == LINE_KEY));
        CheckedInput {
            plan: InputPlan {
                path: path.node.clone(),
                resolved,
                key: if taken { LINE_KEY_TAKEN } else { LINE_KEY }.to_string(),
                keyless: true,
                separator,
                decimal,
                database: None,
                cluster: None,
                passes: false,
            },
            key_span: span,
        }
    }

    /// The `separator` option: one ASCII character, `,` unless given.
    fn separator(&mut self, opts: &HashMap<&'static str, &OptionPair>) -> Option<char> {
        let Some(o) = opts.get("separator") else {
            return Some(defaults::SEPARATOR);
        };
        match &o.value.node {
            Value::Text(t) if t.chars().count() == 1 && t.is_ascii() => t.chars().next(),
            other => {
                self.bad_value(
                    "separator",
                    other,
                    "one quoted ASCII character",
                    o.value.span,
                    r#"for example `separator ";"`"#,
                );
                None
            }
        }
    }

    /// The `decimal` option: `"."` (unless given) or `","`, which the
    /// separator must then not be.
    fn decimal(
        &mut self,
        opts: &HashMap<&'static str, &OptionPair>,
        separator: Option<char>,
    ) -> Option<DecimalMark> {
        let Some(o) = opts.get("decimal") else {
            return Some(DecimalMark::Point);
        };
        let mark = match &o.value.node {
            Value::Text(t) if t == "." => DecimalMark::Point,
            Value::Text(t) if t == "," => DecimalMark::Comma,
            other => {
                self.bad_value(
                    "decimal",
                    other,
                    r#"`"."` or `","`"#,
                    o.value.span,
                    r#"the mark between whole and fraction in the data: `decimal ","` for values written like `1,5`"#,
                );
                return None;
            }
        };
        if separator == Some(mark.char()) {
            self.bad_value(
                "decimal",
                &o.value.node,
                "a mark other than the separator",
                o.value.span,
                r#"files with decimal commas separate fields by another character, most often `;`: add `separator ";"`"#,
            );
            return None;
        }
        Some(mark)
    }

    /// Reads the input's header and sample into `self.probe`, naming a
    /// separator or header the file gives away.
    fn probe_input(
        &mut self,
        path: &Spanned<String>,
        resolved: &Path,
        separator: char,
        decimal: DecimalMark,
    ) -> Option<()> {
        let probed = probe::probe(resolved, separator as u8, decimal);
        if let (Err(ProbeError::Malformed { .. }), Some(sep)) =
            (&probed, probe::header_separator(resolved, separator))
        {
            // Fields of unequal count under a header with another common
            // separator in it (decimal commas, say): name the separator.
            self.wrong_separator(
                path,
                sep,
                format!(
                    "its header line is separated by `{}`, not `{separator}`",
                    shown_separator(sep)
                ),
            );
            return None;
        }
        let p = match probed {
            Ok(p) => p,
            Err(e) => {
                self.file_problem(path, &e);
                return None;
            }
        };
        if let Some(sep) = p.likely_separator().filter(|&c| c != separator) {
            let reason = format!(
                "its header is one column, `{}`: the fields seem separated by `{}`, not `{separator}`",
                clipped(&p.columns[0].name, 60),
                shown_separator(sep)
            );
            self.wrong_separator(path, sep, reason);
            return None;
        }
        if let Some((name, a, b)) = p.repeated_name() {
            self.err(CheckError::FileUnreadable {
                path: path.node.clone(),
                reason: format!(
                    "its header names `{}` twice (fields {a} and {b}), so a recipe cannot say which is meant",
                    clipped(name, 60)
                ),
                span: path.span,
                help: "rename one of the two columns in the data file".into(),
            });
            return None;
        }
        self.probe = Some(p);
        Some(())
    }

    /// The input seems separated by `sep`, not the separator in use.
    pub(super) fn wrong_separator(&mut self, path: &Spanned<String>, sep: char, reason: String) {
        self.err(CheckError::FileUnreadable {
            path: path.node.clone(),
            reason,
            span: path.span,
            help: format!(
                "add `separator \"{}\"` to the `input` statement",
                shown_separator(sep)
            ),
        });
    }

    pub(super) fn file_problem(&mut self, path: &Spanned<String>, e: &ProbeError) {
        let (reason, help) = match e {
            ProbeError::NotFound => {
                let help = match self.nearest_file(&path.node) {
                    Some(f) => format!("did you mean `{f}`?"),
                    None => format!("paths are read relative to the recipe's folder, here `{}`", self.folder.display()),
                };
                self.err(CheckError::FileNotFound {
                    path: path.node.clone(),
                    span: path.span,
                    help,
                });
                return;
            }
            ProbeError::Unreadable(r) => (r.clone(), "check the file's permissions".to_string()),
            ProbeError::Malformed { line, reason } => (
                format!("line {line}: {reason}"),
                "every line needs as many fields as the header; quote fields that hold the separator".to_string(),
            ),
            ProbeError::NoHeader => (
                "it has no header line".to_string(),
                "the first line must name the columns".to_string(),
            ),
            ProbeError::NotUtf8 { line } => (
                format!("line {line} is not UTF-8 text"),
                NOT_UTF8_HELP.to_string(),
            ),
        };
        self.err(CheckError::FileUnreadable {
            path: path.node.clone(),
            reason,
            span: path.span,
            help,
        });
    }

    /// The file beside a missing one whose name is closest to it.
    pub(super) fn nearest_file(&self, written: &str) -> Option<String> {
        let p = Path::new(written);
        let name = p.file_name()?.to_str()?;
        let dir = self.folder.join(p.parent().unwrap_or(Path::new("")));
        let mut names: Vec<String> = std::fs::read_dir(dir)
            .ok()?
            .filter_map(|e| e.ok()?.file_name().into_string().ok())
            .collect();
        names.sort();
        let best = suggest::nearest(name, names.iter().map(String::as_str))?;
        Some(p.with_file_name(best).to_string_lossy().into_owned())
    }

    /// Resolves a recipe path against the recipe's folder, refusing paths
    /// that lead outside it and warning of absolute ones inside it.
    pub(super) fn safe_path(&mut self, path: &Spanned<String>) -> Option<PathBuf> {
        let resolved = self.sandbox.resolve(&path.node);
        if resolved.is_none() {
            self.err(CheckError::PathOutside {
                path: path.node.clone(),
                span: path.span,
            });
        } else if let Some(relative) = self.sandbox.relative_form(&path.node) {
            self.err(CheckError::AbsolutePath {
                path: path.node.clone(),
                relative,
                span: path.span,
            });
        }
        resolved
    }

    /// A path the recipe reads: checked like any path, and remembered.
    pub(super) fn read_path(&mut self, path: &Spanned<String>) -> Option<PathBuf> {
        let resolved = self.safe_path(path)?;
        self.reads
            .push((paths::Sandbox::real_path(&resolved), path.span));
        Some(resolved)
    }

    // ---------------------------------------------------------- columns --

    /// The column's header entry, or an `unknown column` diagnostic. When
    /// the header could not be read, no column can be judged and `None`
    /// comes back silently (the file's own problem was reported).
    pub(super) fn known_column(&mut self, col: &Column) -> Option<probe::ColumnInfo> {
        let probe = self.probe.as_ref()?;
        if let Some(info) = probe.column(&col.node) {
            if let Some(what) = &info.unsupported {
                let source_name = match self.database {
                    true => "the database",
                    false => "the Parquet file",
                };
                self.err(CheckError::UnreadableType {
                    column: col.node.clone(),
                    what: what.clone(),
                    source_name,
                    span: col.span,
                });
                return None;
            }
            return Some(info.clone());
        }
        let suggestion = suggest::nearest(&col.node, probe.names());
        let names: Vec<&str> = probe.names().collect();
        let listing = if names.len() <= 12 {
            format!("its columns are {}", names.join(", "))
        } else {
            format!("its columns include {}, ...", names[..12].join(", "))
        };
        self.err(CheckError::UnknownColumn {
            column: col.node.clone(),
            file: self.input_file.clone(),
            span: col.span,
            help: did_you_mean(&suggestion, &listing),
        });
        None
    }

    /// An option value that names a column.
    pub(super) fn column_name(&mut self, option: &str, o: &OptionPair) -> Option<Column> {
        match &o.value.node {
            Value::Word(w) | Value::Text(w) => Some(Spanned::new(w.clone(), o.value.span)),
            other => {
                self.err(CheckError::BadValue {
                    option: option.into(),
                    found: other.kind_name().into(),
                    expected: "a column name".into(),
                    span: o.value.span,
                    help: "write the column's name as in the header, quoted if it has spaces"
                        .into(),
                });
                None
            }
        }
    }

    /// With `no key`, the statements that match records across files are
    /// refused: `previous`, `compare` and `save handoff`.
    pub(super) fn keyless_refusals(&mut self, stmts: &[Statement], input: &CheckedInput) {
        if !input.plan.keyless {
            return;
        }
        for s in stmts {
            let refused = match &s.kind {
                StatementKind::Previous { .. } => {
                    Some(("previous", "last run's members cannot be found in this run"))
                }
                StatementKind::Compare { .. } => Some((
                    "compare",
                    "the two segmentations cannot be joined record by record",
                )),
                StatementKind::Save { what, .. } if what.node == "handoff" => Some((
                    "save handoff",
                    "a CRM could not match the file's rows to its customers",
                )),
                StatementKind::KMeans { options } if options.iter().any(|o| o.name.node == "by") => {
                    Some((
                        "`by key`",
                        "a line number follows the file's order, which drawing the sample by key is meant to be free of",
                    ))
                }
                _ => None,
            };
            if let Some((what, why)) = refused {
                self.err(CheckError::NeedsKey {
                    what,
                    why,
                    span: s.span,
                    no_key: input.key_span,
                });
            }
        }
    }
}
