//! The `assort` command line: a thin front end over check, run and output.

use assort::check::{self, diagnostic, CheckOptions, RecipeSource};
use assort::output::{self, files::Rendered, record};
use assort::plan::Plan;
use assort::run::{self, Outcome};
use clap::{Args, Parser, Subcommand};
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
}

#[derive(Args)]
struct RecipeArgs {
    /// The recipe file.
    recipe: PathBuf,
    /// A folder outside the recipe's own that it may read and write
    /// (repeatable).
    #[arg(long = "allow-dir", value_name = "FOLDER")]
    allow_dirs: Vec<PathBuf>,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli.command {
        Command::Check(args) => with_plan(&args, |_, plan| {
            println!(
                "recipe `{}` checks out: {}, {}, {}",
                plan.name,
                plural(plan.features.len(), "numeric feature"),
                plural(plan.categories.len(), "category column"),
                plan.cut_description()
            );
            ExitCode::SUCCESS
        }),
        Command::Plan(args) => {
            with_plan(&args, |_, plan| match serde_json::to_string_pretty(plan) {
                Ok(json) => {
                    println!("{json}");
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    eprintln!("error: cannot print the plan: {e}");
                    ExitCode::FAILURE
                }
            })
        }
        Command::Run { recipe, dry_run } => with_plan(&recipe, |source, plan| {
            if dry_run {
                print!("{}", dry_run_listing(source, plan));
                return ExitCode::SUCCESS;
            }
            let Some((outcome, files)) = run_and_render(source, plan) else {
                return ExitCode::FAILURE;
            };
            print!("{}", output::tables::report(&outcome));
            if let Err(e) = output::files::write_all(&files) {
                eprint!("{}", diagnostic::render_bare(&e, colour()));
                return ExitCode::FAILURE;
            }
            for f in &files {
                println!("wrote {}", shown(&f.path));
            }
            ExitCode::SUCCESS
        }),
        Command::Verify(args) => with_plan(&args, verify),
    }
}

/// Runs a plan and renders its files, the run record last; reports a run
/// error and returns `None` on failure.
fn run_and_render(source: &RecipeSource, plan: &Plan) -> Option<(Outcome, Vec<Rendered>)> {
    let outcome = match run::run(plan) {
        Ok(o) => o,
        Err(e) => {
            eprint!("{}", diagnostic::render_bare(&e, colour()));
            return None;
        }
    };
    let mut files = output::files::render_all(&outcome);
    let rec = record::build(
        &recipe_shown(source),
        &source.text,
        &outcome,
        record::input_digests(&outcome),
        &files,
    );
    let path = record_path(source, plan);
    files.push(Rendered {
        shown: shown(&path),
        path,
        bytes: record::to_bytes(&rec),
    });
    Some((outcome, files))
}

fn record_path(source: &RecipeSource, plan: &Plan) -> PathBuf {
    let outputs: Vec<PathBuf> = plan.outputs.iter().map(|o| o.resolved.clone()).collect();
    record::record_path(&source.path, &outputs)
}

/// The recipe's file name, as the record names it (its folder is where
/// every other path starts).
fn recipe_shown(source: &RecipeSource) -> String {
    source
        .path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

fn verify(source: &RecipeSource, plan: &Plan) -> ExitCode {
    let path = record_path(source, plan);
    let recorded: record::RunRecord = match std::fs::read(&path)
        .map_err(|e| e.to_string())
        .and_then(|b| serde_json::from_slice(&b).map_err(|e| e.to_string()))
    {
        Ok(r) => r,
        Err(e) => {
            eprintln!("error: cannot read the run record `{}`: {e}", shown(&path));
            eprintln!("  help: run the recipe once (`assort run`) to write its record");
            return ExitCode::FAILURE;
        }
    };
    let Some((outcome, files)) = run_and_render(source, plan) else {
        return ExitCode::FAILURE;
    };
    let now = record::build(
        &recipe_shown(source),
        &source.text,
        &outcome,
        record::input_digests(&outcome),
        &files[..files.len() - 1],
    );
    let on_disk: Vec<(String, Option<String>)> = plan
        .outputs
        .iter()
        .map(|o| (o.path.clone(), record::file_sha256(&o.resolved)))
        .collect();
    let differences = record::differences(&recorded, &now, &on_disk);
    if differences.is_empty() {
        println!(
            "verified: the rerun of `{}` matches its run record (recipe, {}, {} identical)",
            recipe_shown(source),
            plural(now.inputs.len(), "data file"),
            plural(now.outputs.len(), "output")
        );
        return ExitCode::SUCCESS;
    }
    eprintln!(
        "not verified: the rerun of `{}` differs from its run record `{}`",
        recipe_shown(source),
        shown(&path)
    );
    for d in &differences {
        eprintln!("  - {d}");
    }
    ExitCode::FAILURE
}

/// What a run would read and write.
fn dry_run_listing(source: &RecipeSource, plan: &Plan) -> String {
    let mut s = format!(
        "dry run of `{}`: nothing is read beyond the header, nothing is written\n",
        source.name()
    );
    s.push_str(&format!("  would read  {}\n", shown(&plan.input.resolved)));
    if let Some(v) = &plan.validate {
        s.push_str(&format!("  would read  {}\n", shown(&v.resolved)));
    }
    for o in &plan.outputs {
        s.push_str(&format!("  would write {}\n", shown(&o.resolved)));
    }
    s.push_str(&format!(
        "  would write {} (the run record)\n",
        shown(&record_path(source, plan))
    ));
    s
}

/// A path as the user would type it from here (no leading `./`).
fn shown(path: &Path) -> String {
    path.strip_prefix(".").unwrap_or(path).display().to_string()
}

/// Colour on a terminal, unless NO_COLOR is set (any value).
fn colour() -> bool {
    std::env::var_os("NO_COLOR").is_none() && std::io::stderr().is_terminal()
}

/// Reads and checks a recipe; prints its problems; calls `then` with the
/// plan when there is no error.
fn with_plan(args: &RecipeArgs, then: impl FnOnce(&RecipeSource, &Plan) -> ExitCode) -> ExitCode {
    let source = match RecipeSource::read(&args.recipe) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("error: cannot read recipe `{}`: {e}", args.recipe.display());
            return ExitCode::FAILURE;
        }
    };
    let options = CheckOptions {
        allow_dirs: args.allow_dirs.clone(),
    };
    let checked = check::check_with(&source, &options);
    if !checked.problems.is_empty() {
        eprint!(
            "{}",
            diagnostic::render(&checked.problems, &source.name(), &source.text, colour())
        );
    }
    match &checked.plan {
        Some(plan) if !checked.has_errors() => then(&source, plan),
        _ => {
            let errors = checked.problems.iter().filter(|p| p.is_error()).count();
            eprintln!(
                "{} in `{}`; nothing was run",
                plural(errors, "error"),
                source.name()
            );
            ExitCode::FAILURE
        }
    }
}

fn plural(n: usize, word: &str) -> String {
    if n == 1 {
        format!("1 {word}")
    } else {
        format!("{n} {word}s")
    }
}
