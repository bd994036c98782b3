//! The `assort` command line: a thin front end over check, run and output.

use assort::check::{self, diagnostic, RecipeSource};
use assort::{output, run};
use clap::{Parser, Subcommand};
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
    Check { recipe: PathBuf },
    /// Print the checked plan, with every default written out, as JSON.
    Plan { recipe: PathBuf },
    /// Run a recipe: sweep k, choose, profile, and write the outputs.
    Run { recipe: PathBuf },
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli.command {
        Command::Check { recipe } => with_plan(&recipe, |plan| {
            println!(
                "recipe `{}` checks out: {}, {}, {}",
                plan.name,
                plural(plan.features.len(), "numeric feature"),
                plural(plan.categories.len(), "category column"),
                plan.cut_description()
            );
            ExitCode::SUCCESS
        }),
        Command::Plan { recipe } => {
            with_plan(&recipe, |plan| match serde_json::to_string_pretty(plan) {
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
        Command::Run { recipe } => with_plan(&recipe, |plan| {
            let outcome = match run::run(plan) {
                Ok(o) => o,
                Err(e) => {
                    eprint!("{}", diagnostic::render_bare(&e, colour()));
                    return ExitCode::FAILURE;
                }
            };
            print!("{}", output::tables::report(&outcome));
            let files = output::files::render_all(&outcome);
            if let Err(e) = output::files::write_all(&files) {
                eprint!("{}", diagnostic::render_bare(&e, colour()));
                return ExitCode::FAILURE;
            }
            for f in &files {
                let shown = f.path.strip_prefix(".").unwrap_or(&f.path);
                println!("wrote {}", shown.display());
            }
            ExitCode::SUCCESS
        }),
    }
}

/// Colour on a terminal, unless NO_COLOR is set (any value).
fn colour() -> bool {
    std::env::var_os("NO_COLOR").is_none() && std::io::stderr().is_terminal()
}

/// Reads and checks a recipe; prints its problems; calls `then` with the
/// plan when there is no error.
fn with_plan(path: &Path, then: impl FnOnce(&assort::plan::Plan) -> ExitCode) -> ExitCode {
    let source = match RecipeSource::read(path) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("error: cannot read recipe `{}`: {e}", path.display());
            return ExitCode::FAILURE;
        }
    };
    let checked = check::check(&source);
    if !checked.problems.is_empty() {
        eprint!(
            "{}",
            diagnostic::render(&checked.problems, &source.name(), &source.text, colour())
        );
    }
    match &checked.plan {
        Some(plan) if !checked.has_errors() => then(plan),
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
