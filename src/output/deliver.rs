//! Running a recipe to its outputs: the run, every file it names plus the
//! run record, written as one set under the recipe's lock. `assort run`
//! and the session's `:run save` both come through here, so a set is
//! written the same way whoever asks.

use super::files::{self, Rendered};
use super::{record, set};
use crate::check::RecipeSource;
use crate::plan::Plan;
use crate::run::{self, DataCache, Outcome, RunError, Step};
use std::path::{Path, PathBuf};

/// A path as messages show it (without a leading `./`).
pub fn shown(path: &Path) -> String {
    path.strip_prefix(".").unwrap_or(path).display().to_string()
}

/// The recipe's file name, as the record names it (its folder is where
/// every other path starts).
pub fn recipe_shown(source: &RecipeSource) -> String {
    source
        .path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}

/// Where the run record of a recipe with these outputs goes.
pub fn record_path(source: &RecipeSource, plan: &Plan) -> PathBuf {
    let outputs: Vec<PathBuf> = plan.outputs.iter().map(|o| o.resolved.clone()).collect();
    record::record_path(&source.path, &outputs)
}

/// Runs the plan and renders every output and the run record, writing
/// nothing.
pub fn run_and_render(
    source: &RecipeSource,
    plan: &Plan,
    cache: &mut DataCache,
    progress: &dyn Fn(Step),
) -> Result<(Outcome, Vec<Rendered>, record::RunRecord), RunError> {
    // The input file is hashed on a thread of its own while the run
    // computes (on a large file it is a pass over every byte); each data
    // file is hashed once, and the model, the report and the record all
    // take the digests from here.
    let (outcome, input_sha256) = std::thread::scope(|scope| {
        let hashing = scope.spawn(|| record::file_sha256(&plan.input.resolved));
        let outcome = run::run_with(plan, cache, progress);
        (outcome, hashing.join().ok().flatten())
    });
    let mut outcome = outcome?;
    let input_sha256 = input_sha256.or_else(|| outcome.read_digest.clone());
    let mut clock = run::stages::Clock::start();
    let inputs = record::input_digests_with(&outcome, input_sha256);
    let sources = files::Sources {
        recipe_text: &source.text,
        inputs: &inputs,
    };
    let mut rendered = files::render_all(&outcome, &sources)?;
    let rec = record::build(
        &recipe_shown(source),
        &source.text,
        &outcome,
        inputs.clone(),
        &rendered,
    );
    let path = record_path(source, plan);
    rendered.push(Rendered::plain(
        path.clone(),
        shown(&path),
        record::to_bytes(&rec),
    ));
    clock.lap("render");
    outcome.stages.extend(clock.laps);
    Ok((outcome, rendered, rec))
}

/// Takes the recipe's lock, rolls back a set an earlier run left
/// half-written, and returns the lock with whether it rolled one back.
pub fn lock(source: &RecipeSource) -> Result<(set::RunLock, bool), RunError> {
    let lock = set::RunLock::take(&source.path)?;
    let recovered = set::recover(&set::journal_path(&source.path))?;
    Ok((lock, recovered))
}

/// Writes rendered files as one set (all new or all old), under a lock
/// taken with [`lock`], and the table of `save table` (in a transaction
/// that commits only once the files are written); the time it took joins
/// the outcome's stages. Returns the tables written, in words.
pub fn write(
    source: &RecipeSource,
    rendered: &[Rendered],
    _lock: &set::RunLock,
    outcome: &mut Outcome,
) -> Result<Vec<String>, RunError> {
    let mut clock = run::stages::Clock::start();
    let journal = set::journal_path(&source.path);
    let files = || files::write_all_journalled(rendered, &journal);
    let tables = match &outcome.plan.table {
        Some(table) => {
            // The assignments file's text, when the run saves one, is the
            // table's: not computed (or read from the database) again.
            let saved = (outcome.plan.outputs.iter())
                .find(|o| o.kind == crate::plan::OutputKind::Assignments)
                .and_then(|o| rendered.iter().find(|r| r.path == o.resolved));
            vec![super::table::replace(outcome, table, saved, files)?]
        }
        None => {
            files()?;
            Vec::new()
        }
    };
    clock.lap("write");
    outcome.stages.extend(clock.laps);
    Ok(tables)
}

/// The stage times in lines for a terminal: each stage's seconds and the
/// peak memory when it ended, and the total.
pub fn stage_lines(outcome: &Outcome) -> String {
    use std::fmt::Write;
    let mut s =
        String::from("where the time went (wall seconds; peak memory when the stage ended)\n");
    for t in &outcome.stages {
        let peak = t
            .peak_bytes
            .map(|b| format!("{:.0} MiB", b as f64 / (1024.0 * 1024.0)))
            .unwrap_or_default();
        let _ = writeln!(s, "  {:<8} {:>9.3} s {:>10}", t.stage, t.seconds, peak);
    }
    let total: f64 = outcome.stages.iter().map(|t| t.seconds).sum();
    let _ = writeln!(s, "  {:<8} {:>9.3} s", "total", total);
    s
}

/// The note about a recovered set, as both front ends say it.
pub const RECOVERED_NOTE: &str = "note: an earlier run of this recipe was interrupted while writing; its outputs were put back as they were before it";
