//! The bad-input corpus: one folder per case under `tests/corpus/`, each a
//! thing a hostile but realistic user does (a broken data file, an escaping
//! path, an edited model, an absurd limit...), run through the `assort`
//! binary as that user would.
//!
//! A case folder holds the files of the recipe's folder, a `case` file
//! saying what to do, and `expected`: the exit code, standard error and
//! standard output, compared byte for byte (the scratch folder's path
//! shown as `<case>`). Every case also asserts, whatever its golden text:
//!
//! - the exit code is as expected, and a failure is never a crash (101);
//! - a failure names where (a `line`, or a recipe location) and says what
//!   to do (a help line), unless the case says why it cannot;
//! - nothing in the folder changed: outputs of an earlier run byte for
//!   byte as they were, nothing new written, no temporary left.
//!
//! The `case` file, one directive a line (`#` starts a comment):
//!
//! ```text
//! run: check r.assort          the command, after `assort`
//! before: run good.assort      run first (must succeed): makes old outputs
//! link: lnk -> ../outside/deep a symbolic link in the recipe's folder
//! write: data/x.csv a,b\n1,2\n  a file, `\n` for line breaks
//! repeat: data/x.csv 1000 1,2\n append the text so many times
//! remove: out/a.csv            delete a file made by `before`
//! edit: out/a.csv 1 => 2       replace the first `1` in a file by `2`
//! unlocated: why               a failure that has no place to name
//! ```
//!
//! Applied in that order after `link` and `before`: `remove`, `write`,
//! `repeat`, `edit`. Files in `tests/corpus/_shared/` are in every case's folder first;
//! a case's `outside/` folder is put beside the recipe's folder, for paths
//! that try to leave it. To rewrite the expected files after an intended
//! change of wording:
//!
//!     UPDATE_GOLDEN=1 cargo test --release --test corpus
//!
//! then review the diff like code.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

const CORPUS: &str = "tests/corpus";

#[test]
fn every_bad_input_is_named_refused_and_leaves_the_folder_as_it_was() {
    let update = std::env::var_os("UPDATE_GOLDEN").is_some();
    let mut cases: Vec<PathBuf> = std::fs::read_dir(CORPUS)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.join("case").is_file())
        .collect();
    cases.sort();
    assert!(
        cases.len() >= 60,
        "corpus cases went missing: {}",
        cases.len()
    );
    let mut failures = Vec::new();
    for case in &cases {
        if let Err(why) = run_case(case, update) {
            failures.push(format!("--- {}\n{why}", case.display()));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {} corpus cases failed:\n{}",
        failures.len(),
        cases.len(),
        failures.join("\n")
    );
}

/// What a `case` file asks for.
#[derive(Default)]
struct Spec {
    args: Vec<String>,
    before: Vec<Vec<String>>,
    links: Vec<(String, String)>,
    writes: Vec<(String, String)>,
    repeats: Vec<(String, usize, String)>,
    removes: Vec<String>,
    edits: Vec<(String, String, String)>,
    unlocated: Option<String>,
}

fn unescape(text: &str) -> String {
    text.replace("\\n", "\n").replace("\\t", "\t")
}

fn spec(case: &Path) -> Result<Spec, String> {
    let text = std::fs::read_to_string(case.join("case")).map_err(|e| e.to_string())?;
    let mut spec = Spec::default();
    for line in text.lines() {
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let (directive, rest) = line
            .split_once(':')
            .ok_or_else(|| format!("`{line}` is not `directive: value`"))?;
        let rest = rest.trim();
        let words = || {
            rest.split_whitespace()
                .map(String::from)
                .collect::<Vec<_>>()
        };
        match directive {
            "run" => spec.args = words(),
            "before" => spec.before.push(words()),
            "link" => {
                let (from, to) = rest.split_once(" -> ").ok_or("link: `name -> target`")?;
                spec.links.push((from.trim().into(), to.trim().into()));
            }
            "write" => {
                let (path, body) = rest.split_once(' ').unwrap_or((rest, ""));
                spec.writes.push((path.into(), unescape(body)));
            }
            "repeat" => {
                let mut parts = rest.splitn(3, ' ');
                let (path, count, body) = (parts.next(), parts.next(), parts.next());
                let count = count
                    .and_then(|c| c.parse().ok())
                    .ok_or("repeat: a count")?;
                spec.repeats.push((
                    path.unwrap_or("").into(),
                    count,
                    unescape(body.unwrap_or("")),
                ));
            }
            "remove" => spec.removes.push(rest.into()),
            "edit" => {
                let (path, change) = rest.split_once(' ').ok_or("edit: `path old => new`")?;
                let (old, new) = change.split_once(" => ").ok_or("edit: `old => new`")?;
                spec.edits.push((path.into(), unescape(old), unescape(new)));
            }
            "unlocated" => spec.unlocated = Some(rest.into()),
            other => return Err(format!("unknown directive `{other}`")),
        }
    }
    if spec.args.is_empty() {
        return Err("no `run:` line".into());
    }
    Ok(spec)
}

/// Copies a folder's files (not `case`, `expected` or `outside/`).
fn copy_into(from: &Path, to: &Path, skip_case_files: bool) {
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let name = entry.file_name();
        let name = name.to_string_lossy();
        if skip_case_files && matches!(name.as_ref(), "case" | "expected" | "outside") {
            continue;
        }
        let target = to.join(name.as_ref());
        if entry.file_type().unwrap().is_dir() {
            std::fs::create_dir_all(&target).unwrap();
            copy_into(&entry.path(), &target, false);
        } else {
            std::fs::copy(entry.path(), &target).unwrap();
        }
    }
}

/// Every entry under `dir`: files by their bytes, links by their target,
/// folders as such.
fn snapshot(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    fn walk(root: &Path, dir: &Path, out: &mut BTreeMap<String, Vec<u8>>) {
        let Ok(entries) = std::fs::read_dir(dir) else {
            return;
        };
        for entry in entries {
            let entry = entry.unwrap();
            let path = entry.path();
            let rel = path.strip_prefix(root).unwrap().display().to_string();
            let kind = entry.file_type().unwrap();
            if kind.is_symlink() {
                let target = std::fs::read_link(&path).unwrap();
                out.insert(rel, format!("-> {}", target.display()).into_bytes());
            } else if kind.is_dir() {
                out.insert(format!("{rel}/"), Vec::new());
                walk(root, &path, out);
            } else {
                out.insert(rel, std::fs::read(&path).unwrap());
            }
        }
    }
    let mut out = BTreeMap::new();
    walk(dir, dir, &mut out);
    out
}

fn assort(args: &[String], dir: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_assort"))
        .args(args)
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .env("COLUMNS", "100")
        .output()
        .unwrap()
}

fn run_case(case: &Path, update: bool) -> Result<(), String> {
    let spec = spec(case)?;
    let scratch = tempfile::tempdir().map_err(|e| e.to_string())?;
    let root = scratch.path().canonicalize().map_err(|e| e.to_string())?;
    let work = root.join("work");
    std::fs::create_dir_all(&work).unwrap();
    copy_into(&Path::new(CORPUS).join("_shared"), &work, false);
    copy_into(case, &work, true);
    if case.join("outside").is_dir() {
        std::fs::create_dir_all(root.join("outside")).unwrap();
        copy_into(&case.join("outside"), &root.join("outside"), false);
    }
    for (name, target) in &spec.links {
        std::os::unix::fs::symlink(target, work.join(name)).map_err(|e| e.to_string())?;
    }
    for args in &spec.before {
        let out = assort(args, &work);
        if !out.status.success() {
            return Err(format!(
                "`before: {}` failed:\n{}",
                args.join(" "),
                String::from_utf8_lossy(&out.stderr)
            ));
        }
    }
    for path in &spec.removes {
        std::fs::remove_file(work.join(path)).map_err(|e| format!("remove {path}: {e}"))?;
    }
    for (path, body) in &spec.writes {
        let p = work.join(path);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, body).unwrap();
    }
    for (path, count, body) in &spec.repeats {
        use std::io::Write;
        let mut f = std::fs::OpenOptions::new()
            .append(true)
            .create(true)
            .open(work.join(path))
            .unwrap();
        for _ in 0..*count {
            f.write_all(body.as_bytes()).unwrap();
        }
    }
    for (path, old, new) in &spec.edits {
        let p = work.join(path);
        let text = std::fs::read_to_string(&p).map_err(|e| format!("edit {path}: {e}"))?;
        if !text.contains(old.as_str()) {
            return Err(format!("edit: `{old}` is not in {path}"));
        }
        std::fs::write(&p, text.replacen(old.as_str(), new, 1)).unwrap();
    }

    let before = snapshot(&root);
    let out = assort(&spec.args, &work);
    let after = snapshot(&root);

    let shown = |bytes: &[u8]| {
        String::from_utf8_lossy(bytes)
            .replace(&root.display().to_string(), "<case>")
            .replace(env!("CARGO_PKG_VERSION"), "<version>")
    };
    let code = out.status.code().unwrap_or(-1);
    let (stderr, stdout) = (shown(&out.stderr), shown(&out.stdout));
    let got = format!("exit {code}\n--- stderr\n{stderr}--- stdout\n{stdout}");

    let mut problems = Vec::new();
    if code == 101 || stderr.contains("panicked") {
        problems.push("assort panicked".to_string());
    }
    if code != 0 {
        let all = format!("{stderr}{stdout}");
        if !all.contains("help") {
            problems.push("the failure says nothing about what to do (no help)".into());
        }
        let located = all.contains("line ") || all.contains("─[") || all.contains("\"line\"");
        if !located && spec.unlocated.is_none() {
            problems.push("the failure names no line or recipe location".into());
        }
    }
    if before != after {
        let changed: Vec<&String> = before
            .keys()
            .chain(after.keys())
            .filter(|k| before.get(*k) != after.get(*k))
            .collect();
        problems.push(format!("the folder changed: {changed:?}"));
    }

    let expected_path = case.join("expected");
    if update {
        std::fs::write(&expected_path, &got).unwrap();
    } else {
        let expected = std::fs::read_to_string(&expected_path).unwrap_or_default();
        if got != expected {
            problems.push(format!("output differs from `expected`:\n{got}"));
        }
    }
    if problems.is_empty() {
        Ok(())
    } else {
        Err(problems.join("\n"))
    }
}
