//! The `assort` command line: a thin front end over check, run and output.

use assort::check::diagnostic::{self, Screen};
use assort::check::{self, CheckOptions, RecipeSource};
use assort::output::deliver::{self, recipe_shown, record_path, shown};
use assort::output::{self, files::Rendered, record};
use assort::plan::Plan;
use assort::run;
use clap::{Args, Parser, Subcommand};
use serde_json::json;
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Segment records with a recipe you can check, rerun and hand on.
#[derive(Parser)]
#[command(name = "assort", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Check a recipe against its data's header without running it.
    Check(RecipeArgs),
    /// Print the checked plan, with every default written out, as JSON.
    Plan(RecipeArgs),
    /// Run a recipe: sweep k, choose, profile, and write the outputs and the
    /// run record.
    Run {
        #[command(flatten)]
        recipe: RecipeArgs,
        /// List what the run would read and write, and stop.
        #[arg(long)]
        dry_run: bool,
    },
    /// Rerun a recipe and compare with its run record: exit 0 when the
    /// recipe, the data and every output are as recorded.
    Verify(RecipeArgs),
    /// Score new records with a saved segment model: each record's segment,
    /// label, distance to its segment's centre and how much nearer that
    /// centre is than the next (`nearer_by`), prepared exactly as in
    /// training.
    Assign {
        /// The model file a recipe saved (`save model "out/model.json"`).
        model: PathBuf,
        /// The records to score (CSV with the model's columns).
        data: PathBuf,
        /// Write the assignments here instead of to standard output.
        #[arg(long, value_name = "FILE")]
        out: Option<PathBuf>,
        /// A numeric feature these records differ in by design, such as
        /// new joiners' tenure: its shift is shown but not warned about,
        /// and distances to the centres leave it out (repeatable).
        #[arg(long = "expect-shift", value_name = "COLUMN")]
        expect_shift: Vec<String>,
    },
    /// An interactive session: enter statements one by one, each checked
    /// at once; run, look, change, and save the result as a recipe.
    Repl {
        /// The recipe to start from, or to save to (`session.assort` unless
        /// given).
        recipe: Option<PathBuf>,
        #[command(flatten)]
        allowed: Allowed,
    },
    /// The language server, over standard input and output: diagnostics,
    /// hover help, completion, go to definition, symbols and formatting
    /// for recipes in any editor that speaks the protocol.
    Lsp {
        #[command(flatten)]
        allowed: Allowed,
    },
    /// Rewrite recipes in the canonical layout (comments kept).
    Fmt {
        /// Change nothing; list the files whose layout differs and exit 1.
        #[arg(long)]
        check: bool,
        /// The recipe files.
        #[arg(required = true)]
        files: Vec<PathBuf>,
    },
    /// Compare two assignments files joined on their key: who moved where,
    /// the adjusted Rand index, each old segment's best match.
    Compare {
        /// The earlier assignments file.
        old: PathBuf,
        /// The later assignments file.
        new: PathBuf,
        /// Print one JSON document instead of text (see docs/json.md).
        #[arg(long)]
        json: bool,
    },
}

/// What the person running a recipe allows it beyond its own folder.
#[derive(Args)]
struct Allowed {
    /// A folder outside the recipe's own that it may read and write
    /// (repeatable).
    #[arg(long = "allow-dir", value_name = "FOLDER")]
    allow_dirs: Vec<PathBuf>,
    /// Accept an `--allow-dir` that is the whole disk or a home folder
    /// (refused otherwise: a recipe from someone else could then read and
    /// write anything there).
    #[arg(long = "allow-wide")]
    allow_wide: bool,
    /// A table on the recipe's database connection that `save table` may
    /// replace (repeatable): a recipe writes into a database only there.
    #[arg(long = "allow-table", value_name = "TABLE")]
    allow_tables: Vec<String>,
}

impl Allowed {
    /// The check's options, or `None` (said on standard error unless
    /// `quiet`) when a folder would open too much.
    fn options(&self, quiet: bool) -> Option<CheckOptions> {
        allowed_folders_ok(&self.allow_dirs, self.allow_wide, quiet).then(|| CheckOptions {
            allow_dirs: self.allow_dirs.clone(),
            allow_tables: self.allow_tables.clone(),
        })
    }
}

#[derive(Args)]
struct RecipeArgs {
    /// The recipe file.
    recipe: PathBuf,
    #[command(flatten)]
    allowed: Allowed,
    /// Print one JSON document on standard output instead of text (see
    /// docs/json.md).
    #[arg(long)]
    json: bool,
    /// Print only problems: no tables, no progress.
    #[arg(long, short)]
    quiet: bool,
    /// After a run, print on standard error where the time went: each
    /// stage's wall time and the peak memory when it ended (always in
    /// `--json`).
    #[arg(long)]
    times: bool,
}

fn main() -> ExitCode {
    quiet_broken_pipe();
    let cli = Cli::parse();
    match cli.command {
        Command::Check(args) => with_plan(&args, "assort-check/1", |_, plan, diagnostics| {
            if args.json {
                output::json::print(&json!({
                    "format": "assort-check/1",
                    "ok": true,
                    "diagnostics": diagnostics,
                    "recipe": plan.name,
                    "features": plan.features.len(),
                    "categories": plan.categories.len(),
                    "cut": plan.cut_description(),
                }));
            } else {
                println!(
                    "recipe `{}` checks out: {}, {}, {}",
                    plan.name,
                    plural(plan.features.len(), "numeric feature"),
                    plural(plan.categories.len(), "category column"),
                    plan.cut_description()
                );
            }
            ExitCode::SUCCESS
        }),
        Command::Plan(args) => with_plan(&args, "assort-plan/1", |_, plan, diagnostics| {
            if args.json {
                output::json::print(
                    &json!({"format": "assort-plan/1", "ok": true, "diagnostics": diagnostics, "plan": plan}),
                );
            } else {
                output::json::print(&serde_json::to_value(plan).unwrap_or_default());
            }
            ExitCode::SUCCESS
        }),
        Command::Run { recipe, dry_run } => {
            with_plan(&recipe, "assort-result/1", |source, plan, diagnostics| {
                if dry_run {
                    if recipe.json {
                        output::json::print(&dry_run_json(source, plan, diagnostics));
                    } else {
                        print!("{}", dry_run_listing(source, plan));
                    }
                    return ExitCode::SUCCESS;
                }
                let fail = |e: &dyn miette::Diagnostic| {
                    if recipe.json {
                        output::json::print(
                            &json!({"format": "assort-result/1", "ok": false, "diagnostics": diagnostics, "error": output::json::error(e)}),
                        );
                    } else {
                        eprint!("{}", diagnostic::render_bare(e, Screen::stderr()));
                    }
                    ExitCode::FAILURE
                };
                output::set::on_interrupt();
                // One run of a recipe at a time; a set a killed run left
                // half-written is rolled back first.
                let lock = match deliver::lock(source) {
                    Ok((lock, recovered)) => {
                        if recovered && !recipe.quiet && !recipe.json {
                            eprintln!("{}", deliver::RECOVERED_NOTE);
                        }
                        lock
                    }
                    Err(e) => return fail(&e),
                };
                say_what_passes_hold(plan, recipe.quiet || recipe.json);
                let progress = Progress::new(recipe.quiet || recipe.json);
                let (mut outcome, files, _) = match deliver::run_and_render(
                    source,
                    plan,
                    &mut run::DataCache::default(),
                    &|step| progress.step(step),
                ) {
                    Ok(x) => x,
                    Err(e) => return fail(&e),
                };
                progress.finish();
                let tables = match deliver::write(source, &files, &lock, &mut outcome) {
                    Ok(tables) => tables,
                    Err(e) => return fail(&e),
                };
                if output::set::interrupted_while_writing() {
                    eprintln!(
                        "interrupted while writing: the outputs were completed first, as one set"
                    );
                    return ExitCode::from(130);
                }
                let written: Vec<String> =
                    files.iter().map(|f| shown(&f.path)).chain(tables).collect();
                let defused: usize = files.iter().map(|f| f.defused).sum();
                if recipe.json {
                    let mut result = output::json::run(&outcome, &written);
                    result["cells_made_text"] = json!(defused);
                    result["cells_like_formulas"] = files
                        .iter()
                        .filter(|f| f.formula_like > 0)
                        .map(|f| json!({"file": shown(&f.path), "cells": f.formula_like}))
                        .collect();
                    output::json::print(
                        &json!({"format": "assort-result/1", "ok": true, "diagnostics": diagnostics, "result": result}),
                    );
                } else if !recipe.quiet {
                    print!("{}", output::tables::report(&outcome));
                    for w in &written {
                        println!("wrote {w}");
                    }
                    if defused > 0 {
                        println!("{}", defused_note(defused));
                    }
                    for f in files.iter().filter(|f| f.formula_like > 0) {
                        println!("{}", formula_like_warning(f.formula_like, &shown(&f.path)));
                    }
                }
                if recipe.times && !recipe.json {
                    // On standard error, so tables piped elsewhere stay as
                    // they are.
                    eprint!("{}", deliver::stage_lines(&outcome));
                }
                ExitCode::SUCCESS
            })
        }
        Command::Verify(args) => {
            with_plan(&args, "assort-verify/1", |source, plan, diagnostics| {
                verify(&args, source, plan, diagnostics)
            })
        }
        Command::Assign {
            model,
            data,
            out,
            expect_shift,
        } => assign(&model, &data, out.as_deref(), &expect_shift),
        Command::Fmt { check, files } => fmt(check, &files),
        Command::Lsp { allowed } => {
            // Standard error is the editor's log: the folders allowed are
            // noted there.
            let Some(options) = allowed.options(false) else {
                return ExitCode::FAILURE;
            };
            match assort::lsp::serve(options) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => {
                    eprintln!("error: the language server stopped: {e}");
                    ExitCode::FAILURE
                }
            }
        }
        Command::Repl { recipe, allowed } => {
            let Some(options) = allowed.options(false) else {
                return ExitCode::FAILURE;
            };
            let code = assort::repl::run(recipe.as_deref(), options);
            ExitCode::from(u8::try_from(code).unwrap_or(1))
        }
        Command::Compare { old, new, json } => {
            let read = |p: &Path| run::comparison::read_assignments(p, &shown(p));
            let compared = read(&old).and_then(|a| {
                let b = read(&new)?;
                run::comparison::compare(&shown(&old), &a, &shown(&new), &b).map(|c| {
                    let (ka, kb) = (
                        run::comparison::key_name(&old),
                        run::comparison::key_name(&new),
                    );
                    c.with_key_names(ka.as_deref(), kb.as_deref())
                })
            });
            match compared {
                Ok(c) => {
                    if json {
                        output::json::print(
                            &json!({"format": "assort-compare/1", "ok": true, "comparison": output::json::comparison(&c)}),
                        );
                    } else {
                        print!("{}", output::tables::comparison(&c));
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    if json {
                        output::json::print(
                            &json!({"format": "assort-compare/1", "ok": false, "error": output::json::error(&e)}),
                        );
                    } else {
                        eprint!("{}", diagnostic::render_bare(&e, Screen::stderr()));
                    }
                    ExitCode::FAILURE
                }
            }
        }
    }
}

fn assign(model_path: &Path, data: &Path, out: Option<&Path>, expect_shift: &[String]) -> ExitCode {
    let fail = |e: run::RunError| {
        eprint!("{}", diagnostic::render_bare(&e, Screen::stderr()));
        ExitCode::FAILURE
    };
    if let Some(o) = out {
        let real = |p: &Path| check::paths::Sandbox::real_path(p);
        if real(o) == real(data) || real(o) == real(model_path) {
            eprintln!(
                "error: `--out {}` would overwrite one of the inputs\n  help: write the segments to a file of their own, such as `--out scored.csv`",
                o.display()
            );
            return ExitCode::FAILURE;
        }
    }
    let model = match run::model::read_model(model_path) {
        Ok(m) => m,
        Err(e) => return fail(e),
    };
    let expected = match expected_features(&model, expect_shift) {
        Ok(e) => e,
        Err(message) => {
            eprintln!("{message}");
            return ExitCode::FAILURE;
        }
    };
    let table = match run::model::read_for_scoring(data, &shown(data), &model) {
        Ok(t) => t,
        Err(e) => return fail(e),
    };
    let (assignments, summary) = run::model::score(&model, &table, &expected);
    let label = |s: usize| {
        model
            .segments
            .iter()
            .find(|m| m.segment == s)
            .and_then(|m| m.label.clone())
            .unwrap_or_default()
    };
    let output::files::Csv {
        bytes,
        formula_like,
        ..
    } = output::files::assignments_csv(&model.key, &assignments, label);
    match out {
        Some(path) => {
            let file = Rendered {
                formula_like,
                ..Rendered::plain(path.to_path_buf(), shown(path), bytes)
            };
            if let Err(e) = output::files::write_all(std::slice::from_ref(&file)) {
                return fail(e);
            }
        }
        None => {
            use std::io::Write;
            if std::io::stdout().write_all(&bytes).is_err() {
                return ExitCode::FAILURE;
            }
        }
    }
    eprint!("{}", score_summary(&summary));
    if model.keyless {
        eprintln!(
            "  the model was trained on a file without a key: records are keyed by their line in `{}` (column `{}`), which does not identify anyone in another file",
            shown(data),
            model.key
        );
    }
    if formula_like > 0 {
        let file = out.map_or("the assignments".to_string(), shown);
        eprintln!("{}", formula_like_warning(formula_like, &file));
    }
    ExitCode::SUCCESS
}

fn fmt(check_only: bool, files: &[PathBuf]) -> ExitCode {
    let mut failed = false;
    for path in files {
        let source = match RecipeSource::read(path) {
            Ok(s) => s,
            Err(e) => {
                let (message, help) = RecipeSource::unreadable(path, &e);
                eprintln!("error: {message}\n  help: {help}");
                failed = true;
                continue;
            }
        };
        match assort::syntax::format::format(&source.text) {
            Err(errors) => {
                let problems: Vec<check::diagnostic::Problem> =
                    errors.into_iter().map(Into::into).collect();
                eprint!(
                    "{}",
                    diagnostic::render(&problems, &source.name(), &source.text, Screen::stderr())
                );
                eprintln!("`{}` was not formatted: it does not parse", source.name());
                failed = true;
            }
            Ok(formatted) if formatted == source.text => {}
            Ok(_) if check_only => {
                println!("would reformat {}", source.name());
                failed = true;
            }
            Ok(formatted) => {
                let file = Rendered::plain(path.clone(), source.name(), formatted.into_bytes());
                if let Err(e) = output::files::write_all(std::slice::from_ref(&file)) {
                    eprint!("{}", diagnostic::render_bare(&e, Screen::stderr()));
                    failed = true;
                } else {
                    println!("formatted {}", source.name());
                }
            }
        }
    }
    if failed {
        ExitCode::FAILURE
    } else {
        ExitCode::SUCCESS
    }
}

/// What scoring did, in plain words, one line per kind of event.
fn score_summary(s: &run::model::ScoreSummary) -> String {
    let by = |v: &[(String, usize)]| {
        v.iter()
            .filter(|(_, n)| *n > 0)
            .map(|(c, n)| format!("{c} {n}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut out = format!(
        "assigned {} of {}\n",
        plural(s.assigned, "record"),
        assort::text::thousands(s.records)
    );
    let lines = [
        (&s.filled, "values filled with the training fill value"),
        (
            &s.missing,
            "records left out: a missing value (or a blank category) and no rule to fill or keep it in training",
        ),
        (
            &s.not_numbers,
            "records left out: a value that is not a number (or, for an ordered category or a flag, none of its levels)",
        ),
        (
            &s.out_of_range,
            "records left out: a value the transform cannot take",
        ),
        (
            &s.unseen_levels,
            "category values not seen in training (scored as no level)",
        ),
    ];
    for (v, what) in lines {
        let detail = by(v);
        if !detail.is_empty() {
            out.push_str(&format!("  {what}: {detail}\n"));
        }
    }
    if let Some(d) = &s.drift {
        out.push_str(&output::changes::drift_lines(d));
    }
    out
}

/// Runs a plan and renders its files, the run record last; the record is
/// also returned, so `verify` compares it without hashing anything again.
fn verify(
    args: &RecipeArgs,
    source: &RecipeSource,
    plan: &Plan,
    diagnostics: serde_json::Value,
) -> ExitCode {
    let path = record_path(source, plan);
    let report = |ok: bool, differences: Vec<String>, error: Option<serde_json::Value>| {
        output::json::print(
            &json!({"format": "assort-verify/1", "ok": ok, "diagnostics": diagnostics, "differences": differences, "error": error}),
        );
    };
    let recorded: Result<record::RunRecord, (String, &str)> = match std::fs::read(&path) {
        Err(e) => Err((
            e.to_string(),
            "run the recipe once (`assort run`) to write its record, then verify",
        )),
        Ok(b) => serde_json::from_slice(&b).map_err(|e| {
            (
                e.to_string(),
                "the record was edited or damaged; take the committed copy from version control, or run the recipe again to write a new one",
            )
        }),
    };
    let recorded = match recorded {
        Ok(r) => r,
        Err((e, help)) => {
            let message = format!("cannot read the run record `{}`: {e}", shown(&path));
            if args.json {
                report(
                    false,
                    Vec::new(),
                    Some(
                        json!({"code": "assort::record_unreadable", "severity": "error", "message": message, "help": help}),
                    ),
                );
            } else {
                eprintln!("error: {message}\n  help: {help}");
            }
            return ExitCode::FAILURE;
        }
    };
    let progress = Progress::new(args.quiet || args.json);
    // The rerun's record, built as a run builds it, is what is compared.
    let (now, rendered) =
        match deliver::run_and_render(source, plan, &mut run::DataCache::default(), &|step| {
            progress.step(step)
        }) {
            Ok((_, files, rec)) => (rec, files),
            Err(e) => {
                if args.json {
                    report(false, Vec::new(), Some(output::json::error(&e)));
                } else {
                    eprint!("{}", diagnostic::render_bare(&e, Screen::stderr()));
                }
                return ExitCode::FAILURE;
            }
        };
    progress.finish();
    // Every file a run writes, the report's chart files included.
    let on_disk: Vec<(String, Option<String>)> = rendered
        .iter()
        .map(|f| (f.shown.clone(), record::file_sha256(&f.path)))
        .collect();
    let found = record::differences(&recorded, &now, &on_disk);
    let differences: Vec<String> = found.iter().map(ToString::to_string).collect();
    if args.json {
        report(differences.is_empty(), differences.clone(), None);
    } else if differences.is_empty() {
        println!(
            "verified: the rerun of `{}` matches its run record (recipe, {}, {} identical)",
            recipe_shown(source),
            plural(now.inputs.len(), "data file"),
            plural(now.outputs.len(), "output")
        );
    } else {
        eprintln!(
            "not verified: the rerun of `{}` differs from its run record `{}`",
            recipe_shown(source),
            shown(&path)
        );
        for d in &found {
            eprintln!("  - {d}\n    help: {}", d.advice());
        }
    }
    if differences.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::FAILURE
    }
}

/// A progress bar on standard error for long runs: shown only on a
/// terminal, never with `--quiet` or `--json`.
/// Progress of a long run on standard error: a bar on a terminal; when
/// standard error is a pipe or a file (a scheduled job, a log), a plain
/// line at most every [`PROGRESS_EVERY`], so a long run is never silent.
enum Progress {
    Silent,
    Bar(indicatif::ProgressBar),
    Lines {
        started: std::time::Instant,
        last: std::sync::Mutex<std::time::Instant>,
    },
}

/// The least time between two progress lines when not on a terminal.
const PROGRESS_EVERY: std::time::Duration = std::time::Duration::from_secs(5);

impl Progress {
    fn new(silent: bool) -> Progress {
        if silent {
            return Progress::Silent;
        }
        if !std::io::stderr().is_terminal() {
            let now = std::time::Instant::now();
            return Progress::Lines {
                started: now,
                last: std::sync::Mutex::new(now),
            };
        }
        let bar = indicatif::ProgressBar::new(0);
        let style = indicatif::ProgressStyle::with_template("  {msg:<28} [{bar:30}] {pos}/{len}")
            .map(|s| s.progress_chars("=> "));
        if let Ok(style) = style {
            bar.set_style(style);
        }
        Progress::Bar(bar)
    }

    fn step(&self, step: run::Step) {
        match self {
            Progress::Silent => {}
            Progress::Bar(bar) => {
                bar.set_length(step.total as u64);
                bar.set_position(step.done as u64);
                bar.set_message(step.what);
            }
            Progress::Lines { started, last } => {
                // A poisoned lock only means another thread panicked while
                // printing; progress is not worth a second panic.
                let Ok(mut last) = last.lock() else { return };
                if last.elapsed() >= PROGRESS_EVERY {
                    eprintln!(
                        "  {}: {} of {} done ({} s so far)",
                        step.what,
                        step.done,
                        step.total,
                        started.elapsed().as_secs()
                    );
                    *last = std::time::Instant::now();
                }
            }
        }
    }

    fn finish(&self) {
        if let Progress::Bar(bar) = self {
            bar.finish_and_clear();
        }
    }
}

/// The input as a run would read it: the file's path, or the table or
/// query on its connection.
fn input_shown(plan: &Plan) -> String {
    match plan.input.database {
        Some(_) => plan.input.shown(),
        None => shown(&plan.input.resolved),
    }
}

/// Reading in passes says up front, on standard error, what it will hold.
fn say_what_passes_hold(plan: &Plan, quiet: bool) {
    if let (true, false, Ok(held)) = (plan.input.passes, quiet, run::passes::held(plan)) {
        eprintln!("{}", held.words());
    }
}

/// What a run would read and write.
fn dry_run_listing(source: &RecipeSource, plan: &Plan) -> String {
    let mut s = format!(
        "dry run of `{}`: nothing is read beyond the header, nothing is written\n",
        source.name()
    );
    s.push_str(&format!("  would read  {}\n", input_shown(plan)));
    if plan.input.passes {
        // From the footers: what reading in passes will hold.
        match run::passes::held(plan) {
            Ok(held) => s.push_str(&format!("              {}\n", held.words())),
            Err(e) => s.push_str(&format!(
                "              (cannot say what it would hold: {e})\n"
            )),
        }
    }
    if let Some(v) = &plan.validate {
        s.push_str(&format!("  would read  {}\n", shown(&v.resolved)));
    }
    for o in &plan.outputs {
        s.push_str(&format!("  would write {}\n", shown(&o.resolved)));
    }
    if let Some(t) = &plan.table {
        s.push_str(&format!(
            "  would write {} (made again with the assignments)\n",
            t.describe()
        ));
    }
    s.push_str(&format!(
        "  would write {} (the run record)\n",
        shown(&record_path(source, plan))
    ));
    s
}

/// What a run would read and write, as `assort-dry-run/1`.
fn dry_run_json(
    source: &RecipeSource,
    plan: &Plan,
    diagnostics: serde_json::Value,
) -> serde_json::Value {
    let reads: Vec<String> = std::iter::once(input_shown(plan))
        .chain(plan.validate.iter().map(|v| shown(&v.resolved)))
        .collect();
    let writes: Vec<String> = plan
        .outputs
        .iter()
        .map(|o| shown(&o.resolved))
        .chain(plan.table.iter().map(|t| t.describe()))
        .chain(std::iter::once(shown(&record_path(source, plan))))
        .collect();
    json!({"format": "assort-dry-run/1", "ok": true, "diagnostics": diagnostics, "reads": reads, "writes": writes})
}

/// A path as the user would type it from here (no leading `./`).
/// Says how many output cells were written so that a spreadsheet shows
/// them as text instead of running them as formulas.
fn defused_note(n: usize) -> String {
    format!(
        "note: {} that a spreadsheet would run as a formula {} written with a leading `'` so {} as text",
        plural(n, "cell"),
        if n == 1 { "was" } else { "were" },
        if n == 1 { "it shows" } else { "they show" }
    )
}

/// The model's numeric features named by `--expect-shift`, by position;
/// a name that is not one of them is an error naming those it has.
fn expected_features(
    model: &run::model::SegmentModel,
    names: &[String],
) -> Result<Vec<usize>, String> {
    names
        .iter()
        .map(|name| {
            model
                .features
                .iter()
                .position(|f| f.column == *name)
                .ok_or_else(|| {
                    let have: Vec<String> =
                        model.features.iter().map(|f| format!("`{}`", f.column)).collect();
                    format!(
                        "error: `--expect-shift {name}`: the model has no numeric feature `{name}`\n  help: name one of its numeric features: {}",
                        have.join(", ")
                    )
                })
        })
        .collect()
}

/// Says that a machine file holds cells a spreadsheet would run as a
/// formula, written exactly all the same (see `output::files::Cells`).
fn formula_like_warning(n: usize, file: &str) -> String {
    format!(
        "warning: {} in {file} {} like a spreadsheet formula (`=`, `+`, `-`, `@`, a tab); {} written exactly as the data has {}, because a CRM import and the next run match keys as written. Open this file in a spreadsheet through its import step with the columns as text, not by double-clicking it",
        plural(n, "cell"),
        if n == 1 { "begins" } else { "begin" },
        if n == 1 { "it is" } else { "they are" },
        if n == 1 { "it" } else { "them" },
    )
}

/// Refuses `--allow-dir` folders that open the whole disk or a home folder
/// unless `--allow-wide` is given, and says on standard error which
/// folders besides its own the recipe may touch.
fn allowed_folders_ok(allowed: &[PathBuf], wide: bool, quiet: bool) -> bool {
    let home = std::env::var_os("HOME").map(PathBuf::from);
    if let Err(why) = check::paths::judge_allowed(allowed, home.as_deref()) {
        if !wide {
            eprintln!(
                "error: {why}\n  help: name the one folder the recipe needs (its data or its outputs), or add `--allow-wide` if you trust the recipe with all of it"
            );
            return false;
        }
    }
    if !quiet {
        for f in check::paths::real_folders(allowed) {
            eprintln!(
                "note: besides its own folder, this recipe may read and write under `{}`",
                f.display()
            );
        }
    }
    true
}

/// Reads and checks a recipe; prints its problems; calls `then` with the
/// plan when there is no error.
fn with_plan(
    args: &RecipeArgs,
    kind: &str,
    then: impl FnOnce(&RecipeSource, &Plan, serde_json::Value) -> ExitCode,
) -> ExitCode {
    let source = match RecipeSource::read(&args.recipe) {
        Ok(s) => s,
        Err(e) => {
            let (message, help) = RecipeSource::unreadable(&args.recipe, &e);
            if args.json {
                let error = json!({"code": "assort::recipe_unreadable", "severity": "error", "message": message, "help": help});
                output::json::print(
                    &json!({"format": kind, "ok": false, "diagnostics": [], "error": error}),
                );
            } else {
                eprintln!("error: {message}\n  help: {help}");
            }
            return ExitCode::FAILURE;
        }
    };
    let Some(options) = args.allowed.options(args.quiet || args.json) else {
        return ExitCode::FAILURE;
    };
    let checked = check::check_with(&source, &options);
    let diagnostics = output::json::diagnostics(&checked.problems, &source.name(), &source.text);
    if !checked.problems.is_empty() && !args.json {
        eprint!(
            "{}",
            diagnostic::render(
                &checked.problems,
                &source.name(),
                &source.text,
                Screen::stderr()
            )
        );
    }
    match &checked.plan {
        Some(plan) if !checked.has_errors() => then(&source, plan, diagnostics),
        _ => {
            if args.json {
                output::json::print(
                    &json!({"format": kind, "ok": false, "diagnostics": diagnostics}),
                );
            } else {
                let errors = checked.error_count();
                eprintln!(
                    "{} in `{}`; nothing was run",
                    plural(errors, "error"),
                    source.name()
                );
            }
            ExitCode::FAILURE
        }
    }
}

/// `assort plan RECIPE | head -1`: when the reader of standard output
/// goes away, end quietly as other command-line tools do, instead of
/// panicking on the next print. Rust ignores SIGPIPE by default; this
/// restores the system's default action. Outputs are files written as one
/// journalled set, so an end mid-run is recovered like any interruption.
fn quiet_broken_pipe() {
    #[cfg(unix)]
    // SAFETY: called first thing in `main`, before any thread starts;
    // setting a signal's action to its default is async-signal-safe.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
}

fn plural(n: usize, word: &str) -> String {
    assort::text::count(n, word)
}
