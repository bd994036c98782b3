//! A recipe under construction: the one session API the interactive
//! session and the language server are thin front ends over. It reaches
//! the language only through the checker and the data only through the
//! interpreter.
//!
//! Entering a statement checks the whole recipe with the same checker as
//! `assort check`. A statement that may appear once (`kmeans`, `scale`...)
//! replaces the one before, so trying a variation is one line; others are
//! added. A statement with an error in it is not kept. Runs reuse the data
//! already read while the file and the columns asked for are unchanged, so
//! changing k does not read the file again.

use crate::check::diagnostic::{self, Screen};
use crate::check::Span;
use crate::check::{self, vocab, CheckOptions, Checked, RecipeSource};
use crate::output::{deliver, tables};
use crate::run::{self, DataCache, Outcome};
use crate::text;
use miette::Diagnostic;
use std::path::{Path, PathBuf};

/// The session: statements in recipe order, and what a run left.
pub struct Session {
    /// Where the recipe lives; paths in it are relative to its folder.
    path: PathBuf,
    statements: Vec<String>,
    undo: Vec<Undo>,
    cache: DataCache,
    options: CheckOptions,
    last: Option<Outcome>,
    /// The recipe as last read or saved (canonical layout), to tell
    /// whether there is work to lose.
    saved: String,
}

enum Undo {
    Added(usize),
    Replaced { at: usize, old: String },
    Dropped { at: usize, old: String },
}

/// What entering a statement did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Entered {
    Added,
    /// It replaced an earlier statement of the same kind.
    Replaced(String),
    /// It had an error and was not kept.
    Rejected,
    /// A blank or comment line: nothing to do.
    Nothing,
    /// The same statement, word for word, is in the recipe already (a
    /// paste recalled from the history): nothing changed.
    Unchanged,
}

impl Session {
    /// An empty session for a recipe that will live at `path`.
    pub fn new(path: &Path, options: CheckOptions) -> Session {
        Session {
            path: path.to_path_buf(),
            statements: Vec::new(),
            undo: Vec::new(),
            cache: DataCache::default(),
            options,
            last: None,
            saved: String::new(),
        }
    }

    /// A session holding a recipe file's statements.
    pub fn open(path: &Path, options: CheckOptions) -> std::io::Result<Session> {
        let source = RecipeSource::read(path)?;
        let mut s = Session::new(path, options);
        s.statements = check::shape::statements_of(&source.text);
        s.saved = s.formatted();
        Ok(s)
    }

    /// Whether the recipe differs from the file it was read from or last
    /// saved to (an empty new session has nothing to lose).
    pub fn unsaved(&self) -> bool {
        let now = self.formatted();
        now != self.saved && !(self.saved.is_empty() && now.trim().is_empty())
    }

    /// The recipe file the session reads and saves by default.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The recipe as text, one statement per line.
    pub fn text(&self) -> String {
        let mut t = self.statements.join("\n");
        t.push('\n');
        t
    }

    fn source(&self) -> RecipeSource {
        RecipeSource {
            path: self.path.clone(),
            text: self.text(),
        }
    }

    /// Checks the recipe as it stands.
    pub fn check(&self) -> Checked {
        check::check_with(&self.source(), &self.options)
    }

    /// Problems of the whole recipe, rendered.
    pub fn problems(&self, screen: Screen) -> String {
        let source = self.source();
        diagnostic::render(&self.check().problems, &source.name(), &source.text, screen)
    }

    /// Enters a statement; returns what happened and the problems found in
    /// that statement, rendered (empty when there are none).
    pub fn enter(&mut self, statement: &str, screen: Screen) -> (Entered, String) {
        let statement = statement.trim();
        if statement.is_empty() || statement.starts_with('#') {
            return (Entered::Nothing, String::new());
        }
        let word = statement.split_whitespace().next().unwrap_or("");
        if (self.statements.iter()).any(|s| statement_words(s) == statement_words(statement)) {
            return (Entered::Unchanged, String::new());
        }
        // Warnings already standing are not news; new ones elsewhere are.
        let standing: Vec<String> = self.check().problems.iter().map(problem_key).collect();
        // A statement given once per recipe, per segment (`label 3`) or per
        // column (`weight`, `transform`, `missing ... for`) replaces the
        // one already there for the same segment or columns.
        let existing = check::shape::slot(statement).and_then(|new| {
            self.statements
                .iter()
                .position(|s| check::shape::slot(s).is_some_and(|old| old.taken_by(&new)))
        });
        let at = match existing {
            Some(i) => {
                let entry = replacing(&self.statements[i], statement);
                let old = std::mem::replace(&mut self.statements[i], entry);
                self.undo.push(Undo::Replaced { at: i, old });
                i
            }
            None => {
                self.statements.push(statement.to_string());
                self.undo.push(Undo::Added(self.statements.len() - 1));
                self.statements.len() - 1
            }
        };
        let source = self.source();
        let range = self.range_of(at);
        let checked = check::check_with(&source, &self.options);
        let (mine, others): (Vec<_>, Vec<_>) = checked
            .problems
            .into_iter()
            .filter(|p| !p.is_incomplete())
            .partition(|p| touches(p, range));
        if mine.iter().any(diagnostic::Problem::is_error) {
            let rendered = diagnostic::render(&mine, &source.name(), &source.text, screen);
            self.undo();
            return (Entered::Rejected, rendered);
        }
        // A change can raise a problem at another statement (`choose` with
        // one k left to fit, columns a new `input` lacks): shown as
        // `check` would show it, and an error there said plainly.
        let caused: Vec<diagnostic::Problem> = others
            .into_iter()
            .filter(|p| !standing.contains(&problem_key(p)))
            .collect();
        let broke = caused.iter().any(diagnostic::Problem::is_error);
        let shown: Vec<diagnostic::Problem> = mine.into_iter().chain(caused).collect();
        let mut rendered = diagnostic::render(&shown, &source.name(), &source.text, screen);
        if broke {
            rendered.push_str(
                "note: this statement is kept, but it leaves errors at other statements (above); `:undo` takes it back\n",
            );
        }
        let what = match (existing, &self.undo.last()) {
            (Some(_), Some(Undo::Replaced { old, .. })) if !check::single_statement(word) => {
                Entered::Replaced(code_of(old).to_string())
            }
            (Some(_), _) => Entered::Replaced(word.to_string()),
            (None, _) => Entered::Added,
        };
        (what, rendered)
    }

    /// The byte range of statement `i` in [`Session::text`].
    fn range_of(&self, i: usize) -> Span {
        let start: usize = self.statements[..i].iter().map(|s| s.len() + 1).sum();
        Span::new(start, start + self.statements[i].len())
    }

    /// Removes the one statement that begins with `start`, word for word
    /// (`label 3`, `transform basket_value`); says what was removed, or
    /// why nothing was.
    pub fn drop_statement(&mut self, start: &str) -> Result<String, String> {
        let want: Vec<&str> = words_of(start).collect();
        if want.is_empty() {
            return Err("`:drop` takes the start of a statement, such as `:drop label 3`".into());
        }
        let found: Vec<usize> = (0..self.statements.len())
            .filter(|&i| {
                let have: Vec<&str> = words_of(code_of(&self.statements[i])).collect();
                have.len() >= want.len() && have[..want.len()] == want[..]
            })
            .collect();
        match found[..] {
            [at] => {
                let old = self.statements.remove(at);
                let shown = code_of(&old).to_string();
                self.undo.push(Undo::Dropped { at, old });
                Ok(format!("removed `{shown}`"))
            }
            [] => Err(format!(
                "no statement begins `{start}`; `:recipe` shows them"
            )),
            _ => Err(format!(
                "{} statements begin `{start}`: {}; say more of the one to remove",
                found.len(),
                found
                    .iter()
                    .map(|&i| format!("`{}`", code_of(&self.statements[i])))
                    .collect::<Vec<_>>()
                    .join(", ")
            )),
        }
    }

    /// Takes back the last statement entered; says what was undone.
    pub fn undo(&mut self) -> Option<String> {
        match self.undo.pop()? {
            Undo::Dropped { at, old } => {
                let shown = code_of(&old).to_string();
                self.statements.insert(at.min(self.statements.len()), old);
                Some(format!("put back `{shown}`"))
            }
            Undo::Added(i) => Some(format!("removed `{}`", self.statements.remove(i))),
            Undo::Replaced { at, old } => {
                let new = std::mem::replace(&mut self.statements[at], old.clone());
                Some(format!("put back `{old}` in place of `{new}`"))
            }
        }
    }

    /// Runs the recipe: the report, or the problems that stop it. With
    /// `write`, the recipe's outputs and its run record are written as one
    /// set, as `assort run` writes them; without, the report says that
    /// nothing was written. A stop asked for (Ctrl-C, see
    /// [`crate::engine::stop`]) ends the run with nothing written and the
    /// session's statements as they were.
    pub fn run(&mut self, screen: Screen, write: bool) -> Result<String, String> {
        let checked = self.check();
        let Some(plan) = checked
            .plan
            .filter(|_| !checked.problems.iter().any(diagnostic::Problem::is_error))
        else {
            return Err(self.problems(screen));
        };
        let failed = |e: &dyn Diagnostic| diagnostic::render_bare(e, screen);
        if !write {
            let outcome = run::run_cached(&plan, &mut self.cache).map_err(|e| failed(&e))?;
            let mut report = tables::report(&outcome);
            self.last = Some(outcome);
            report.push_str(&match plan.outputs.len() {
                0 => "nothing to write: the recipe has no `save` statement\n".to_string(),
                n => format!(
                    "not written: the {} the recipe saves (`:run write` writes them and the run record)\n",
                    text::count(n, "file")
                ),
            });
            return Ok(report);
        }
        let source = self.source();
        let (lock, recovered) = deliver::lock(&source).map_err(|e| failed(&e))?;
        let (mut outcome, files, _) =
            deliver::run_and_render(&source, &plan, &mut self.cache, &|_| {})
                .map_err(|e| failed(&e))?;
        let tables =
            deliver::write(&source, &files, &lock, &mut outcome).map_err(|e| failed(&e))?;
        let mut report = tables::report(&outcome);
        self.last = Some(outcome);
        if recovered {
            report.push_str(deliver::RECOVERED_NOTE);
            report.push('\n');
        }
        for f in &files {
            report.push_str(&format!("wrote {}\n", deliver::shown(&f.path)));
        }
        for t in &tables {
            report.push_str(&format!("wrote {t}\n"));
        }
        if self.unsaved() {
            report.push_str(
                "note: the recipe has unsaved changes; the run record holds the recipe as run, so `:save` it for `assort verify` to agree\n",
            );
        }
        Ok(report)
    }

    /// A table of the last run again: `sweep` or `profiles`.
    pub fn table(&self, which: &str) -> Option<String> {
        let o = self.last.as_ref()?;
        match which {
            "sweep" => Some(tables::sweep_report(o)),
            "profiles" => Some(tables::profiles_report(o)),
            "comparison" => o.comparison.as_ref().map(tables::comparison),
            _ => None,
        }
    }

    /// The last run's outcome.
    pub fn last(&self) -> Option<&Outcome> {
        self.last.as_ref()
    }

    /// How many times the session read a data file.
    pub fn data_loads(&self) -> usize {
        self.cache.loads
    }

    /// The recipe in canonical layout, as `save` writes it.
    pub fn formatted(&self) -> String {
        check::format(&self.text()).unwrap_or_else(|| self.text())
    }

    /// Saves the recipe, formatted, to `path`. Paths inside it stay
    /// relative to the session's folder, so saving elsewhere is refused.
    pub fn save(&mut self, path: &Path) -> Result<(), String> {
        let folder =
            |p: &Path| check::paths::Sandbox::real_path(p.parent().unwrap_or(Path::new(".")));
        if folder(path) != folder(&self.path) {
            let here = self.path.parent().filter(|p| !p.as_os_str().is_empty());
            return Err(format!(
                "the recipe's paths are relative to its folder (`{}`); save it in that folder",
                here.unwrap_or(Path::new(".")).display()
            ));
        }
        let file = crate::output::files::Rendered::plain(
            path.to_path_buf(),
            path.display().to_string(),
            self.formatted().into_bytes(),
        );
        crate::output::files::write_all(std::slice::from_ref(&file)).map_err(|e| e.to_string())?;
        if check::paths::Sandbox::real_path(path) == check::paths::Sandbox::real_path(&self.path) {
            self.saved = self.formatted();
        }
        Ok(())
    }

    /// Completions for the statement being typed, `before` being its text
    /// up to the cursor.
    pub fn complete(&self, before: &str) -> check::complete::Completion {
        let checked = self.check();
        let facts = check::complete::Facts::of(&self.text());
        let folder = self.path.parent().unwrap_or(Path::new("."));
        let data = check::complete::DataView {
            columns: &checked.column_info,
            sampled: checked.sampled,
            key: facts.key.as_deref(),
            elsewhere: &facts.elsewhere,
            folder: if folder.as_os_str().is_empty() {
                Path::new(".")
            } else {
                folder
            },
        };
        check::complete::complete(before, &data)
    }
}

/// An entry's statement without the comments and blank lines before it.
fn code_of(entry: &str) -> &str {
    entry
        .lines()
        .find(|l| !l.trim().is_empty() && !l.trim().starts_with('#'))
        .map_or("", str::trim)
}

/// The words of a statement, commas and a trailing comment aside.
fn words_of(statement: &str) -> impl Iterator<Item = &str> {
    statement
        .split('#')
        .next()
        .unwrap_or("")
        .split(|c: char| c.is_whitespace() || c == ',')
        .filter(|w| !w.is_empty())
}

/// The entry that replaces `old` with `statement`: the blank and comment
/// lines above the old one stay above the new one, and so does the old
/// one's trailing comment when it was one line and the new one has none.
fn replacing(old: &str, statement: &str) -> String {
    let mut entry = String::new();
    let mut code = Vec::new();
    for line in old.lines() {
        let t = line.trim();
        if code.is_empty() && (t.is_empty() || t.starts_with('#')) {
            entry.push_str(line);
            entry.push('\n');
        } else {
            code.push(line);
        }
    }
    entry.push_str(statement);
    if let ([one], None) = (code.as_slice(), trailing_comment(statement)) {
        if let Some(comment) = trailing_comment(one) {
            entry.push_str("  ");
            entry.push_str(comment);
        }
    }
    entry
}

/// The comment at the end of a line of code (from a `#` outside quotes).
fn trailing_comment(line: &str) -> Option<&str> {
    let mut quoted = false;
    let mut escaped = false;
    for (i, c) in line.char_indices() {
        match c {
            _ if escaped => escaped = false,
            '\\' if quoted => escaped = true,
            '"' => quoted = !quoted,
            '#' if !quoted => return Some(line[i..].trim_end()),
            _ => {}
        }
    }
    None
}

/// The words of a statement entry over all its lines, comment lines and
/// trailing comments aside.
fn statement_words(entry: &str) -> Vec<&str> {
    (entry.lines())
        .filter(|l| !l.trim_start().starts_with('#'))
        .flat_map(words_of)
        .collect()
}

/// A problem by its code and message, to tell standing ones from new.
fn problem_key(p: &diagnostic::Problem) -> String {
    use miette::Diagnostic;
    format!(
        "{}: {p}",
        p.code().map(|c| c.to_string()).unwrap_or_default()
    )
}

/// Whether a problem points into `range`.
fn touches(p: &diagnostic::Problem, range: Span) -> bool {
    p.labels().into_iter().flatten().any(|l| {
        let start = l.offset();
        start >= range.start && start <= range.end
    })
}

/// Help on a statement word, or the list of statements.
/// Asks a run in progress to stop (safe to call from a signal handler:
/// it stores to an atomic). The run ends with nothing written.
pub fn request_stop() {
    crate::engine::stop::request();
}

/// Forgets a stop request, before and after a run.
pub fn clear_stop() {
    crate::engine::stop::clear();
}

pub fn help(word: Option<&str>) -> String {
    let Some(word) = word else {
        let mut s = String::from("statements:\n");
        for d in vocab::STATEMENTS {
            s.push_str(&format!("  {:<12} {}\n", d.word, d.summary));
        }
        return s;
    };
    let Some(doc) = vocab::statement(word) else {
        return format!("no statement `{word}`; `:help` lists them\n");
    };
    let mut s = format!(
        "{}: {}\n  for example: {}\n",
        doc.word, doc.summary, doc.example
    );
    for o in vocab::options_for(word) {
        s.push_str(&format!("  {:<10} {} ({})\n", o.name, o.summary, o.takes));
    }
    s
}
