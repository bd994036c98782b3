//! Where a recipe may read and write: inside its own folder, or inside a
//! folder the person running it allowed (`--allow-dir`). Recipes travel
//! between people, so running someone else's recipe must not touch files
//! elsewhere on the machine.
//!
//! A path is judged by where it really leads: `.` and `..` are resolved,
//! and the longest part of it that exists is resolved through symbolic
//! links, so a link inside the folder that points outside is caught.

use std::path::{Component, Path, PathBuf};

/// The folders a recipe may touch, in their real (link-free) form.
#[derive(Debug, Clone)]
pub struct Sandbox {
    folder: PathBuf,
    roots: Vec<PathBuf>,
}

impl Sandbox {
    /// The recipe's `folder`, and any folders allowed besides.
    pub fn new(folder: &Path, allowed: &[PathBuf]) -> Sandbox {
        let mut roots = vec![real(&absolute(folder))];
        roots.extend(allowed.iter().map(|a| real(&absolute(a))));
        Sandbox {
            folder: folder.to_path_buf(),
            roots,
        }
    }

    /// The path to use for `written` (relative to the recipe's folder, or
    /// absolute), or `None` when it leads outside every allowed folder.
    pub fn resolve(&self, written: &str) -> Option<PathBuf> {
        if written.is_empty() {
            return None;
        }
        let p = Path::new(written);
        let joined = if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.folder.join(p)
        };
        let target = real(&absolute(&joined));
        self.roots
            .iter()
            .any(|r| target.starts_with(r))
            .then_some(joined)
    }

    /// Where a path really leads, for comparing two paths.
    pub fn real_path(path: &Path) -> PathBuf {
        real(&absolute(path))
    }
}

/// The path made absolute against the current folder, `.` and `..`
/// resolved lexically.
fn absolute(p: &Path) -> PathBuf {
    let base = if p.is_absolute() {
        PathBuf::new()
    } else {
        std::env::current_dir().unwrap_or_default()
    };
    let mut out = PathBuf::new();
    for c in base.join(p).components() {
        match c {
            Component::ParentDir => {
                out.pop();
            }
            Component::CurDir => {}
            other => out.push(other.as_os_str()),
        }
    }
    out
}

/// The longest existing ancestor resolved through links, the rest
/// appended as written.
fn real(p: &Path) -> PathBuf {
    let mut existing = p.to_path_buf();
    let mut rest: Vec<std::ffi::OsString> = Vec::new();
    loop {
        if let Ok(c) = existing.canonicalize() {
            let mut out = c;
            for part in rest.iter().rev() {
                out.push(part);
            }
            return out;
        }
        match (
            existing.file_name().map(|f| f.to_os_string()),
            existing.parent(),
        ) {
            (Some(name), Some(parent)) => {
                rest.push(name);
                existing = parent.to_path_buf();
            }
            _ => return p.to_path_buf(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_inside_pass_and_escapes_fail() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir(dir.path().join("data")).unwrap();
        let sandbox = Sandbox::new(dir.path(), &[]);
        assert!(sandbox.resolve("data/x.csv").is_some());
        assert!(sandbox.resolve("out/new/x.csv").is_some());
        assert!(sandbox.resolve("data/../data/x.csv").is_some());
        assert!(sandbox.resolve("../x.csv").is_none());
        assert!(sandbox.resolve("/etc/passwd").is_none());
        assert!(sandbox.resolve("").is_none());
    }

    #[cfg(unix)]
    #[test]
    fn a_link_that_leads_outside_is_caught() {
        let outside = tempfile::tempdir().unwrap();
        let dir = tempfile::tempdir().unwrap();
        std::os::unix::fs::symlink(outside.path(), dir.path().join("elsewhere")).unwrap();
        let sandbox = Sandbox::new(dir.path(), &[]);
        assert!(sandbox.resolve("elsewhere/x.csv").is_none());
        let allowing = Sandbox::new(dir.path(), &[outside.path().to_path_buf()]);
        assert!(allowing.resolve("elsewhere/x.csv").is_some());
    }
}
