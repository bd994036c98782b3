//! Outputs as one set: after a run, every output is the new one or every
//! output is the old one, never a mix, and no temporary is left behind,
//! whatever fails and even when the process is killed.
//!
//! # How
//! A run holds an exclusive lock on its recipe file (`flock`, released by
//! the kernel when the process ends, however it ends), so two runs of one
//! recipe never interleave. Writing a set:
//!
//! 1. a journal beside the recipe (`.RECIPE.assort-journal`, itself written
//!    to a temporary and renamed) lists each target, its temporary sibling
//!    (`NAME.PID.tmp-assort`) and, when the target exists, the backup it
//!    will be moved to (`NAME.PID.old-assort`);
//! 2. every file is written to its temporary;
//! 3. existing targets are renamed to their backups, then every temporary
//!    to its target;
//! 4. the journal is marked committed (rewritten atomically): the commit
//!    point; then the backups are removed, then the journal.
//!
//! A failure in steps 2 or 3 undoes what was done (backups renamed back, new
//! targets removed). A run that finds a journal (its predecessor was
//! killed) first rolls an uncommitted set back the same way, or removes a
//! committed set's remaining backups, and removes leftover temporaries and
//! backups of its own targets. Renames
//! within one folder are atomic on the file systems assort supports.

use crate::run::RunError;
use serde::{Deserialize, Serialize};
use std::fs::File;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

/// Set while a set is being written: an interrupt then waits for the set
/// to be complete (see [`on_interrupt`]).
static WRITING: AtomicBool = AtomicBool::new(false);
/// Set when an interrupt arrived while writing.
static INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// What a command that writes a set does on Ctrl-C (SIGINT) or SIGTERM:
/// before writing, stop at once (nothing was written, no temporary
/// exists); while writing, finish the set first, so the folder holds the
/// whole new set and no temporary. Returns whether a handler is in place.
pub fn on_interrupt() -> bool {
    ctrlc::set_handler(|| {
        if WRITING.load(Ordering::SeqCst) {
            INTERRUPTED.store(true, Ordering::SeqCst);
        } else {
            eprintln!("interrupted: nothing was written");
            std::process::exit(130);
        }
    })
    .is_ok()
}

/// Whether an interrupt arrived while the last set was written.
pub fn interrupted_while_writing() -> bool {
    INTERRUPTED.load(Ordering::SeqCst)
}

/// A test hook: with `ASSORT_TEST_WRITE_PAUSE_MS` set, each step of
/// writing a set is announced on standard error and followed by a pause,
/// so tests can interrupt or kill a run at a known point.
fn step(name: &str) {
    if let Some(ms) = std::env::var("ASSORT_TEST_WRITE_PAUSE_MS")
        .ok()
        .and_then(|v| v.parse::<u64>().ok())
    {
        eprintln!("assort-test: {name}");
        std::thread::sleep(std::time::Duration::from_millis(ms));
    }
}

/// Marks the writing phase for the interrupt handler; cleared on drop.
struct Writing;

impl Writing {
    fn start() -> Writing {
        WRITING.store(true, Ordering::SeqCst);
        Writing
    }
}

impl Drop for Writing {
    fn drop(&mut self) {
        WRITING.store(false, Ordering::SeqCst);
    }
}

/// The exclusive lock of one recipe's runs; released when dropped.
pub struct RunLock {
    _file: File,
}

impl RunLock {
    /// Takes the lock on `recipe`, or says that another run holds it.
    pub fn take(recipe: &Path) -> Result<RunLock, RunError> {
        let busy = |reason: String| RunError::Busy {
            recipe: recipe.display().to_string(),
            reason,
        };
        let file = File::open(recipe).map_err(|e| busy(e.to_string()))?;
        match file.try_lock() {
            Ok(()) => Ok(RunLock { _file: file }),
            Err(std::fs::TryLockError::WouldBlock) => Err(busy(
                "another run of this recipe is writing its outputs".into(),
            )),
            Err(std::fs::TryLockError::Error(e)) => Err(busy(e.to_string())),
        }
    }
}

/// One file of a set in the journal.
#[derive(Debug, Serialize, Deserialize)]
struct Entry {
    target: PathBuf,
    temp: PathBuf,
    backup: Option<PathBuf>,
}

/// A set's journal: its files and whether it was committed.
#[derive(Debug, Serialize, Deserialize)]
struct Journal {
    /// Set once every new file is in place: recovery then only tidies.
    committed: bool,
    entries: Vec<Entry>,
}

/// Writes the journal atomically (a temporary renamed over it).
fn write_journal(path: &Path, journal: &Journal) -> std::io::Result<()> {
    let temp = sibling(path, "tmp");
    let done = serde_json::to_vec(journal)
        .map_err(std::io::Error::other)
        .and_then(|b| std::fs::write(&temp, b))
        .and_then(|()| std::fs::rename(&temp, path));
    if done.is_err() {
        remove(&temp);
    }
    done
}

/// The journal of `recipe`'s output sets.
pub fn journal_path(recipe: &Path) -> PathBuf {
    let name = recipe
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    recipe.with_file_name(format!(".{name}.assort-journal"))
}

/// Rolls back a set a killed run left half-written (see the module
/// documentation); returns whether there was one. Call with the lock held.
pub fn recover(journal: &Path) -> Result<bool, RunError> {
    // A journal's own temporary, from a run killed while writing it.
    clear_leftovers(journal);
    let Ok(bytes) = std::fs::read(journal) else {
        return Ok(false);
    };
    let j: Journal = serde_json::from_slice(&bytes).map_err(|e| RunError::Write {
        path: journal.display().to_string(),
        reason: format!("the journal of an interrupted run cannot be read ({e}); restore the outputs from version control, then remove it"),
    })?;
    if j.committed {
        // Every new file was in place: only the backups remain to go.
        for e in &j.entries {
            if let Some(b) = &e.backup {
                remove(b);
            }
        }
    } else {
        roll_back(&j.entries);
    }
    remove(journal);
    Ok(true)
}

/// Undoes steps 3 of a set: every target back to its backup, or removed
/// when it had none; temporaries removed.
fn roll_back(entries: &[Entry]) {
    for e in entries.iter().rev() {
        match &e.backup {
            Some(b) if b.exists() => {
                let _ = std::fs::rename(b, &e.target);
            }
            Some(_) => {}
            // The target did not exist before the set: whatever is there
            // now came from the set.
            None => {
                if !e.temp.exists() {
                    remove(&e.target);
                }
            }
        }
        remove(&e.temp);
    }
}

fn remove(p: &Path) {
    let _ = std::fs::remove_file(p);
}

/// Leftover temporaries and backups of `target` from killed runs.
fn clear_leftovers(target: &Path) {
    let (Some(dir), Some(name)) = (target.parent(), target.file_name()) else {
        return;
    };
    let dir = if dir.as_os_str().is_empty() {
        Path::new(".")
    } else {
        dir
    };
    let prefix = format!("{}.", name.to_string_lossy());
    let Ok(list) = std::fs::read_dir(dir) else {
        return;
    };
    for e in list.flatten() {
        let n = e.file_name().to_string_lossy().into_owned();
        // A staged file of this process is the set's own.
        let own_stage = n.ends_with(&format!(".{}.stage-assort", std::process::id()));
        let left = [".tmp-assort", ".old-assort", ".stage-assort"]
            .iter()
            .any(|end| n.ends_with(end));
        if n.starts_with(&prefix) && left && !own_stage {
            remove(&e.path());
        }
    }
}

fn sibling(target: &Path, kind: &str) -> PathBuf {
    let mut name = target
        .file_name()
        .map(|n| n.to_os_string())
        .unwrap_or_default();
    name.push(format!(".{}.{kind}-assort", std::process::id()));
    target.with_file_name(name)
}

/// What a file of a set holds: bytes to write, or a file already written
/// beside its target ([`staged_path`]) that the set renames into place.
#[derive(Debug, Clone, Copy)]
pub enum Content<'a> {
    Bytes(&'a [u8]),
    Staged(&'a Path),
}

impl Content<'_> {
    /// Writes the content at `temp`.
    fn put(self, temp: &Path) -> std::io::Result<()> {
        match self {
            Content::Bytes(bytes) => std::fs::write(temp, bytes),
            Content::Staged(staged) => std::fs::rename(staged, temp),
        }
    }
}

/// Where an output too large to hold in memory is written before its set
/// (a streamed output): beside `target`, named for this process, so that
/// a run killed while writing it leaves a file the next set removes.
pub fn staged_path(target: &Path) -> PathBuf {
    sibling(target, "stage")
}

/// Writes `files` (target, shown name, content) as one set, journalled in
/// `journal`. On error every target is as it was and nothing is left over.
pub fn write_set(files: &[(&Path, &str, Content<'_>)], journal: &Path) -> Result<(), RunError> {
    let fail = |shown: &str, e: std::io::Error| RunError::Write {
        path: shown.to_string(),
        reason: e.to_string(),
    };
    let _writing = Writing::start();
    // 1. The plan: each target's temporary and, when it exists, its backup.
    let mut entries: Vec<Entry> = Vec::with_capacity(files.len());
    for (target, shown, _) in files {
        if target.is_dir() {
            return Err(fail(
                shown,
                std::io::Error::other("a folder of that name is in the way"),
            ));
        }
        // A file where a folder should be (`data/members.csv/a.csv`).
        let in_the_way = target
            .ancestors()
            .skip(1)
            .zip(Path::new(shown).ancestors().skip(1))
            .find(|(real, named)| !named.as_os_str().is_empty() && real.is_file());
        if let Some((_, named)) = in_the_way {
            return Err(fail(
                shown,
                std::io::Error::other(format!(
                    "`{}` is a file, so it cannot hold another",
                    named.display()
                )),
            ));
        }
        clear_leftovers(target);
        // Absolute, so the journal means the same from any folder.
        let target = std::path::absolute(target).map_err(|e| fail(shown, e))?;
        entries.push(Entry {
            temp: sibling(&target, "tmp"),
            backup: target.exists().then(|| sibling(&target, "old")),
            target,
        });
    }
    // 2. The journal, before anything else is written, so a run killed
    // from here on is rolled back by the next.
    let mut j = Journal {
        committed: false,
        entries,
    };
    if let Err(e) = write_journal(journal, &j) {
        return Err(fail(&journal.display().to_string(), e));
    }
    let entries = &j.entries;
    step("journal");
    // 3. Temporaries.
    for (e, (_, shown, content)) in entries.iter().zip(files) {
        let written = (|| {
            if let Some(dir) = e.target.parent().filter(|d| !d.as_os_str().is_empty()) {
                std::fs::create_dir_all(dir)?;
            }
            content.put(&e.temp)
        })();
        if let Err(err) = written {
            roll_back(entries);
            remove(journal);
            return Err(fail(shown, err));
        }
    }
    step("temporaries");
    // 4. Backups, then the new files.
    let moved = (|| {
        for (i, (e, (_, shown, _))) in entries.iter().zip(files).enumerate() {
            if let Some(b) = &e.backup {
                std::fs::rename(&e.target, b).map_err(|err| (shown.to_string(), err))?;
                step(&format!("backup {i}"));
            }
        }
        for (i, (e, (_, shown, _))) in entries.iter().zip(files).enumerate() {
            std::fs::rename(&e.temp, &e.target).map_err(|err| (shown.to_string(), err))?;
            step(&format!("rename {i}"));
        }
        Ok::<(), (String, std::io::Error)>(())
    })();
    if let Err((shown, e)) = moved {
        roll_back(entries);
        remove(journal);
        return Err(fail(&shown, e));
    }
    // 5. Commit (the journal says so), then tidy.
    j.committed = true;
    if write_journal(journal, &j).is_err() {
        // Every new file is in place; without the mark a recovery would put
        // the old set back, so finish the tidying here and now.
        remove(journal);
    }
    step("committed");
    for e in &j.entries {
        if let Some(b) = &e.backup {
            remove(b);
        }
    }
    remove(journal);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(p: &Path) -> String {
        std::fs::read_to_string(p).unwrap()
    }

    #[test]
    fn a_set_replaces_every_file_and_leaves_nothing_else() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.csv"), dir.path().join("sub/b.csv"));
        std::fs::write(&a, "old a").unwrap();
        let journal = dir.path().join(".r.assort-journal");
        write_set(
            &[
                (&a, "a.csv", Content::Bytes(b"new a")),
                (&b, "sub/b.csv", Content::Bytes(b"new b")),
            ],
            &journal,
        )
        .unwrap();
        assert_eq!((read(&a), read(&b)), ("new a".into(), "new b".into()));
        let names: Vec<String> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert!(
            names.iter().all(|n| n == "a.csv" || n == "sub"),
            "{names:?}"
        );
    }

    #[test]
    fn a_folder_in_the_way_leaves_every_file_as_it_was() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b) = (dir.path().join("a.csv"), dir.path().join("b.csv"));
        std::fs::write(&a, "old a").unwrap();
        std::fs::create_dir(&b).unwrap();
        let journal = dir.path().join(".r.assort-journal");
        let e = write_set(
            &[
                (&a, "a.csv", Content::Bytes(b"new a")),
                (&b, "b.csv", Content::Bytes(b"new b")),
            ],
            &journal,
        );
        assert!(e.is_err());
        assert_eq!(read(&a), "old a");
        assert_eq!(
            std::fs::read_dir(dir.path()).unwrap().count(),
            2,
            "a.csv and the folder only"
        );
    }

    #[test]
    fn a_set_killed_halfway_is_rolled_back_by_the_next_run() {
        // The state a run killed in step 3 leaves: `a` already new with its
        // old version in its backup, `b` new with no old version, `c` not
        // yet renamed from its temporary.
        let dir = tempfile::tempdir().unwrap();
        let p = |n: &str| dir.path().join(n);
        std::fs::write(p("a.csv"), "new a").unwrap();
        std::fs::write(p("a.csv.7.old-assort"), "old a").unwrap();
        std::fs::write(p("b.csv"), "new b").unwrap();
        std::fs::write(p("c.csv"), "old c").unwrap();
        std::fs::write(p("c.csv.7.tmp-assort"), "new c").unwrap();
        let entries = vec![
            Entry {
                target: p("a.csv"),
                temp: p("a.csv.7.tmp-assort"),
                backup: Some(p("a.csv.7.old-assort")),
            },
            Entry {
                target: p("b.csv"),
                temp: p("b.csv.7.tmp-assort"),
                backup: None,
            },
            Entry {
                target: p("c.csv"),
                temp: p("c.csv.7.tmp-assort"),
                backup: Some(p("c.csv.7.old-assort")),
            },
        ];
        let journal = p(".r.assort-journal");
        let j = Journal {
            committed: false,
            entries,
        };
        std::fs::write(&journal, serde_json::to_vec(&j).unwrap()).unwrap();
        assert!(recover(&journal).unwrap());
        assert_eq!(read(&p("a.csv")), "old a");
        assert!(!p("b.csv").exists(), "b did not exist before the set");
        assert_eq!(read(&p("c.csv")), "old c");
        let mut names: Vec<String> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(names, ["a.csv", "c.csv"]);
        assert!(!recover(&journal).unwrap(), "nothing left to recover");
    }

    #[test]
    fn a_second_run_of_the_same_recipe_is_refused_while_the_first_holds_the_lock() {
        let dir = tempfile::tempdir().unwrap();
        let recipe = dir.path().join("r.assort");
        std::fs::write(&recipe, "").unwrap();
        let first = RunLock::take(&recipe).unwrap();
        assert!(matches!(RunLock::take(&recipe), Err(RunError::Busy { .. })));
        drop(first);
        assert!(RunLock::take(&recipe).is_ok());
    }
}
