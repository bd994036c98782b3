//! A scratch folder holding a recipe and its data, and a way to run the
//! `assort` binary on it: the harness of the end-to-end tests.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A scratch folder holding a recipe and its data, and a way to run
/// `assort` on it.
pub struct Case {
    pub dir: tempfile::TempDir,
}

impl Case {
    /// A copy of the shipped demo (recipe and data).
    pub fn demo() -> Case {
        let case = Case::empty();
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes");
        case.copy(&root.join("coop-members.assort"), "coop-members.assort");
        for f in ["coop_members.csv", "coop_members_planted.csv"] {
            case.copy(&root.join("data").join(f), &format!("data/{f}"));
        }
        case
    }

    /// Every file under `out/` but the run record, sorted by name, each
    /// text in `swaps` replaced by its pair (an input's name and digest
    /// put back to another run's, say).
    pub fn outputs<S: AsRef<str>>(&self, swaps: &[(S, S)]) -> Vec<(String, String)> {
        let mut files: Vec<(String, String)> = std::fs::read_dir(self.path("out"))
            .unwrap()
            .map(|e| e.unwrap().path())
            .filter(|p| p.is_file() && !p.to_string_lossy().ends_with(".run.json"))
            .map(|p| {
                let mut text = std::fs::read_to_string(&p).unwrap();
                for (from, to) in swaps {
                    text = text.replace(from.as_ref(), to.as_ref());
                }
                (p.file_name().unwrap().to_string_lossy().into_owned(), text)
            })
            .collect();
        files.sort();
        files
    }

    pub fn empty() -> Case {
        Case {
            dir: tempfile::tempdir().unwrap(),
        }
    }

    pub fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }

    pub fn copy(&self, from: &Path, to: &str) {
        let to = self.path(to);
        std::fs::create_dir_all(to.parent().unwrap()).unwrap();
        std::fs::copy(from, to).unwrap();
    }

    pub fn write(&self, rel: &str, text: &str) -> &Case {
        let p = self.path(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
        self
    }

    pub fn read(&self, rel: &str) -> String {
        std::fs::read_to_string(self.path(rel)).unwrap()
    }

    /// An assignments file (plain keys, no quoting) as key -> segment.
    pub fn segments_by_key(&self, rel: &str) -> std::collections::HashMap<String, String> {
        self.read(rel)
            .lines()
            .skip(1)
            .map(|l| {
                let c: Vec<&str> = l.split(',').collect();
                (c[0].to_string(), c[1].to_string())
            })
            .collect()
    }

    /// Replaces the first occurrence of `from` in a file.
    pub fn edit(&self, rel: &str, from: &str, to: &str) -> &Case {
        let text = self.read(rel);
        assert!(text.contains(from), "`{from}` not in {rel}");
        self.write(rel, &text.replacen(from, to, 1))
    }

    pub fn assort(&self, args: &[&str], env: &[(&str, &str)]) -> Run {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_assort"));
        cmd.args(args)
            .current_dir(self.dir.path())
            .env("NO_COLOR", "1");
        for (k, v) in env {
            cmd.env(k, v);
        }
        Run(cmd.output().unwrap())
    }

    /// `assort assign MODEL DATA --out OUT`.
    pub fn assign(&self, model: &str, data: &str, out: &str) -> Run {
        self.assort(&["assign", model, data, "--out", out], &[])
    }

    pub fn run(&self, recipe: &str) -> Run {
        self.assort(&["run", recipe], &[])
    }
}

pub struct Run(pub Output);

impl Run {
    pub fn stdout(&self) -> String {
        String::from_utf8_lossy(&self.0.stdout).into_owned()
    }

    pub fn stderr(&self) -> String {
        String::from_utf8_lossy(&self.0.stderr).into_owned()
    }

    #[track_caller]
    pub fn ok(self) -> Run {
        assert!(
            self.0.status.success(),
            "expected success, got {:?}\nstdout:\n{}\nstderr:\n{}",
            self.0.status,
            self.stdout(),
            self.stderr()
        );
        self
    }

    #[track_caller]
    pub fn fails(self) -> Run {
        assert!(
            !self.0.status.success(),
            "expected failure\nstdout:\n{}",
            self.stdout()
        );
        self
    }

    #[track_caller]
    pub fn stderr_has(self, text: &str) -> Run {
        assert!(
            self.stderr().contains(text) || unwrapped(&self.stderr()).contains(text),
            "stderr lacks `{text}`:\n{}",
            self.stderr()
        );
        self
    }

    #[track_caller]
    pub fn stdout_has(self, text: &str) -> Run {
        assert!(
            self.stdout().contains(text),
            "stdout lacks `{text}`:\n{}",
            self.stdout()
        );
        self
    }
}

/// Diagnostic text with the renderer's line wrapping undone: a break and
/// the indent or frame (`│`) that follows it read as one space.
pub fn unwrapped(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for (i, line) in text.lines().enumerate() {
        let line = line.trim_start().trim_start_matches('│').trim();
        if i > 0 {
            out.push(' ');
        }
        out.push_str(line);
    }
    out
}
