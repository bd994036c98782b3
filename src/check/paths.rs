//! Where a recipe may read and write: inside its own folder, or inside a
//! folder the person running it allowed (`--allow-dir`). Recipes travel
//! between people, so running someone else's recipe must not touch files
//! elsewhere on the machine.
//!
//! A path is judged by where the operating system would really lead it:
//! it is walked one component at a time from the root, every symbolic
//! link met on the way is replaced by its target at once, and `..` steps
//! back from the folder actually reached. Normalising the text first (so
//! that `lnk/../x` became `x`) would be wrong: when `lnk` is a link, the
//! system reads `lnk`'s target's parent, which may be anywhere.

use std::ffi::OsString;
use std::path::{Component, Path, PathBuf};

/// How many links one path may pass through before it is judged a loop
/// (the same order as the limit operating systems use).
const MAX_LINKS: usize = 40;

/// The folders a recipe may touch, in their real (link-free) form.
#[derive(Debug, Clone)]
pub struct Sandbox {
    folder: PathBuf,
    roots: Vec<PathBuf>,
}

impl Sandbox {
    /// The recipe's `folder`, and any folders allowed besides.
    pub fn new(folder: &Path, allowed: &[PathBuf]) -> Sandbox {
        let mut roots: Vec<PathBuf> = real(folder).into_iter().collect();
        roots.extend(allowed.iter().filter_map(|a| real(a)));
        Sandbox {
            folder: folder.to_path_buf(),
            roots,
        }
    }

    /// The path to use for `written` (relative to the recipe's folder, or
    /// absolute), or `None` when it leads outside every allowed folder.
    ///
    /// A path written with `..` comes back in its real form, so reading
    /// and writing go exactly where it was judged to lead; any other path
    /// comes back as written (joined to the folder), which leads to the
    /// same place and reads better in messages.
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
        let target = real(&joined)?;
        if !self.roots.iter().any(|r| target.starts_with(r)) {
            return None;
        }
        let climbs = p.components().any(|c| c == Component::ParentDir);
        Some(if climbs { target } else { joined })
    }

    /// For an absolute path that leads inside the recipe's own folder, the
    /// same place written relative to that folder (parts joined by `/`),
    /// which travels with the recipe; `None` for any other path.
    pub fn relative_form(&self, written: &str) -> Option<String> {
        let p = Path::new(written);
        if !p.is_absolute() {
            return None;
        }
        let rest = real(p)?
            .strip_prefix(real(&self.folder)?)
            .ok()?
            .to_path_buf();
        let parts: Option<Vec<&str>> = rest.components().map(|c| c.as_os_str().to_str()).collect();
        let parts = parts?;
        (!parts.is_empty()).then(|| parts.join("/"))
    }

    /// Where a path really leads, for comparing two paths (the path as
    /// given when it cannot be followed, e.g. through a loop of links).
    pub fn real_path(path: &Path) -> PathBuf {
        real(path).unwrap_or_else(|| path.to_path_buf())
    }
}

/// Why an `--allow-dir` folder is refused: it opens the whole machine
/// or a whole home folder to a recipe that may come from someone else.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WideFolder {
    /// The root of the file system.
    Root(PathBuf),
    /// A home folder, or a folder that holds one.
    Home(PathBuf),
}

impl std::fmt::Display for WideFolder {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            WideFolder::Root(p) => write!(
                f,
                "`--allow-dir {}` would let the recipe read and write anywhere on this machine",
                p.display()
            ),
            WideFolder::Home(p) => write!(
                f,
                "`--allow-dir {}` would let the recipe read and write anywhere in a home folder",
                p.display()
            ),
        }
    }
}

/// Refuses allowed folders that are too wide: the root, a home folder
/// (`$HOME`) or any folder holding it. `home` is passed in so tests need
/// not change the environment.
pub fn judge_allowed(allowed: &[PathBuf], home: Option<&Path>) -> Result<(), WideFolder> {
    let home = home.and_then(real);
    for a in allowed {
        let Some(r) = real(a) else { continue };
        if r.parent().is_none() {
            return Err(WideFolder::Root(a.clone()));
        }
        if home.as_ref().is_some_and(|h| h.starts_with(&r)) {
            return Err(WideFolder::Home(a.clone()));
        }
    }
    Ok(())
}

/// The allowed folders in their real form, for telling the person running
/// a recipe what it may touch.
pub fn real_folders(allowed: &[PathBuf]) -> Vec<PathBuf> {
    allowed.iter().map(|a| Sandbox::real_path(a)).collect()
}

/// Where `p` really leads: absolute, free of links, `.` and `..`, walked
/// as the system walks it. Parts that do not exist yet (an output folder
/// still to be made) are appended as written. `None` for a loop of links.
fn real(p: &Path) -> Option<PathBuf> {
    let start = if p.is_absolute() {
        p.to_path_buf()
    } else {
        std::env::current_dir().ok()?.join(p)
    };
    // Components still to walk, the next one last.
    let mut pending: Vec<OsString> = Vec::new();
    let mut out = PathBuf::new();
    push_components(&start, &mut pending, &mut out);
    let mut links = 0;
    while let Some(part) = pending.pop() {
        if part == ".." {
            out.pop();
            continue;
        }
        let next = out.join(&part);
        match std::fs::symlink_metadata(&next) {
            Ok(meta) if meta.file_type().is_symlink() => {
                links += 1;
                if links > MAX_LINKS {
                    return None;
                }
                let target = std::fs::read_link(&next).ok()?;
                push_components(&target, &mut pending, &mut out);
            }
            _ => out = next,
        }
    }
    Some(out)
}

/// Queues `p`'s components to be walked before what is already pending;
/// a rooted `p` (an absolute link target) restarts the walk at its root.
fn push_components(p: &Path, pending: &mut Vec<OsString>, out: &mut PathBuf) {
    if p.has_root() {
        *out = p
            .components()
            .take_while(|c| matches!(c, Component::Prefix(_) | Component::RootDir))
            .collect();
    }
    let parts: Vec<OsString> = p
        .components()
        .filter_map(|c| match c {
            Component::Normal(n) => Some(n.to_os_string()),
            Component::ParentDir => Some(OsString::from("..")),
            _ => None,
        })
        .collect();
    pending.extend(parts.into_iter().rev());
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
        // An absolute path inside the folder is accepted, and has a
        // relative form; one outside has none.
        let inside = dir.path().join("data/x.csv");
        let inside = inside.to_str().unwrap();
        assert!(sandbox.resolve(inside).is_some());
        assert_eq!(sandbox.relative_form(inside).as_deref(), Some("data/x.csv"));
        assert_eq!(sandbox.relative_form("data/x.csv"), None);
        assert_eq!(sandbox.relative_form("/etc/passwd"), None);
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

    /// The escape found by hand: `lnk -> ../outside/deep`, then
    /// `lnk/../secret.csv` names `outside/secret.csv` to the system, while
    /// text normalisation would have made it `secret.csv` in the folder.
    #[cfg(unix)]
    #[test]
    fn a_link_followed_by_parent_steps_is_judged_after_the_link() {
        let top = tempfile::tempdir().unwrap();
        let folder = top.path().join("recipes");
        let deep = top.path().join("outside").join("deep");
        std::fs::create_dir_all(&folder).unwrap();
        std::fs::create_dir_all(&deep).unwrap();
        std::fs::write(top.path().join("outside").join("secret.csv"), "a\n1\n").unwrap();
        std::os::unix::fs::symlink("../outside/deep", folder.join("lnk")).unwrap();
        let sandbox = Sandbox::new(&folder, &[]);
        assert!(sandbox.resolve("lnk/../secret.csv").is_none());
        assert!(sandbox.resolve("lnk/../stolen.csv").is_none());
        assert!(sandbox.resolve("lnk/../../recipes/x.csv").is_some());
        // Allowed, it comes back in its real form, so the file used is the
        // one judged.
        let allowing = Sandbox::new(&folder, &[top.path().join("outside")]);
        let got = allowing.resolve("lnk/../secret.csv").unwrap();
        assert_eq!(
            got,
            Sandbox::real_path(&top.path().join("outside").join("secret.csv"))
        );
    }

    #[cfg(unix)]
    #[test]
    fn a_loop_of_links_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        std::os::unix::fs::symlink("b", dir.path().join("a")).unwrap();
        std::os::unix::fs::symlink("a", dir.path().join("b")).unwrap();
        let sandbox = Sandbox::new(dir.path(), &[]);
        assert!(sandbox.resolve("a/x.csv").is_none());
    }

    #[test]
    fn the_root_and_a_home_folder_are_too_wide_to_allow() {
        let home = tempfile::tempdir().unwrap();
        let inside = home.path().join("projects");
        std::fs::create_dir(&inside).unwrap();
        let h = Some(home.path());
        assert!(matches!(
            judge_allowed(&[PathBuf::from("/")], h),
            Err(WideFolder::Root(_))
        ));
        assert!(matches!(
            judge_allowed(&[home.path().to_path_buf()], h),
            Err(WideFolder::Home(_))
        ));
        let parent = home.path().parent().unwrap().to_path_buf();
        assert!(matches!(
            judge_allowed(&[parent], h),
            Err(WideFolder::Home(_))
        ));
        assert_eq!(judge_allowed(&[inside], h), Ok(()));
    }
}
