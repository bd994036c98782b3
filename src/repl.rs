//! The interactive session (`assort repl`): a thin front end over
//! [`crate::session`]. Statements are checked as they are entered; commands
//! start with `:`. With a terminal it edits lines (rustyline: completion,
//! hints, history); piped, it reads lines as they come, so it can be
//! scripted and tested.

use crate::check::diagnostic::Screen;
use crate::check::{complete, vocab, CheckOptions};
use crate::session::{help, Entered, Session};
use rustyline::completion::Completer;
use rustyline::highlight::Highlighter;
use rustyline::hint::Hinter;
use rustyline::validate::Validator;
use rustyline::{Context, Helper};
use std::io::{BufRead, IsTerminal, Write};
use std::path::{Path, PathBuf};

/// Session commands with a line of help each.
pub const COMMANDS: &[(&str, &str)] = &[
    (":recipe", "show the recipe as it stands, formatted"),
    (":check", "show every problem of the recipe as it stands"),
    (":plan", "show the checked plan (JSON)"),
    (
        ":run",
        "run the recipe and show the sweep and profiles; `:run write` also writes its outputs (Ctrl-C stops a run)",
    ),
    (
        ":again",
        "show a table of the last run again: `:again sweep`, `profiles` or `comparison`",
    ),
    (":undo", "take back the last statement entered or removed"),
    (
        ":drop",
        "remove the statement that begins so: `:drop label 3`, `:drop transform basket_value`",
    ),
    (
        ":save",
        "save the recipe, formatted: `:save` (to the file opened) or `:save FILE`",
    ),
    (":open", "start over from a recipe file: `:open FILE`"),
    (":help", "list statements, or explain one: `:help kmeans`"),
    (":quit", "leave"),
];

/// Runs a session over `recipe` (opened when it exists); returns the exit
/// code: 0, or 1 when the input ended inside a statement.
pub fn run(recipe: Option<&Path>, options: CheckOptions) -> i32 {
    let path = recipe
        .map(Path::to_path_buf)
        .unwrap_or_else(|| PathBuf::from("session.assort"));
    let mut session = if path.exists() {
        match Session::open(&path, options.clone()) {
            Ok(s) => s,
            Err(e) => {
                eprintln!("error: cannot read recipe `{}`: {e}", path.display());
                return 1;
            }
        }
    } else {
        Session::new(&path, options.clone())
    };
    if std::io::stdin().is_terminal() {
        interactive(&mut session, &path, &options)
    } else {
        piped(&mut session, &path, &options)
    }
}

/// Reads statements (continued after a trailing comma) and commands from
/// standard input.
fn piped(session: &mut Session, path: &Path, options: &CheckOptions) -> i32 {
    let stdin = std::io::stdin();
    let mut pending = String::new();
    let mut path = path.to_path_buf();
    for line in stdin.lock().lines() {
        let Ok(line) = line else { break };
        if let Some(done) = gather(&mut pending, &line) {
            // Piped input cannot be asked whether to let changes go.
            if let (Some(target), true) = (opening(&done), session.unsaved()) {
                println!(
                    "not opened `{target}`: `{}` has unsaved changes; `:save` them first",
                    session.path().display()
                );
                continue;
            }
            if !handle(session, &mut path, &done, options) {
                warn_unsaved(session);
                return 0;
            }
        }
    }
    warn_unsaved(session);
    i32::from(!pending.trim().is_empty())
}

/// Piped input never waits for an answer: leaving with unsaved changes
/// is said on standard error instead.
fn warn_unsaved(session: &Session) {
    if session.unsaved() {
        eprintln!(
            "note: left with unsaved changes to `{}` (`:save` keeps them)",
            session.path().display()
        );
    }
}

type LineEditor = rustyline::Editor<Assist, rustyline::history::DefaultHistory>;

/// The line editor: Tab completes what all candidates share, a second
/// Tab lists them.
fn line_editor() -> Option<LineEditor> {
    let config = rustyline::Config::builder()
        .completion_type(rustyline::CompletionType::List)
        .build();
    LineEditor::with_config(config).ok()
}

fn interactive(session: &mut Session, path: &Path, options: &CheckOptions) -> i32 {
    let Some(mut editor) = line_editor() else {
        return piped(session, path, options);
    };
    editor.set_helper(Some(Assist::of(session, "")));
    let history = std::env::var_os("HOME").map(|h| PathBuf::from(h).join(".assort_history"));
    if let Some(h) = &history {
        let _ = editor.load_history(h);
    }
    println!(
        "assort session on `{}`: enter statements, or `:help`",
        path.display()
    );
    let mut pending = String::new();
    let mut path = path.to_path_buf();
    loop {
        let prompt = if pending.is_empty() {
            "assort> "
        } else {
            "    ... "
        };
        let line = match editor.readline(prompt) {
            Ok(line) => line,
            // Ctrl-C clears the line or the statement being continued;
            // the session and its statements stay.
            Err(rustyline::error::ReadlineError::Interrupted) => {
                let what = if pending.is_empty() {
                    "line"
                } else {
                    "statement"
                };
                pending.clear();
                if let Some(h) = editor.helper_mut() {
                    h.pending.clear();
                }
                println!("(Ctrl-C cleared the {what}; `:quit` or Ctrl-D leaves)");
                continue;
            }
            Err(_) => {
                if let_go_asking(&mut editor, session, "leaving") {
                    break;
                }
                continue;
            }
        };
        let _ = editor.add_history_entry(line.as_str());
        // A paste arrives as one entry with line breaks: each line is
        // entered in turn, as if typed.
        let mut leaving = false;
        for part in line.split('\n') {
            let part = part.strip_suffix('\r').unwrap_or(part);
            if let Some(done) = gather(&mut pending, part) {
                if let Some(target) = opening(&done) {
                    let what = format!("opening `{target}`");
                    if !let_go_asking(&mut editor, session, &what) {
                        continue;
                    }
                }
                if !handle(session, &mut path, &done, options)
                    && let_go_asking(&mut editor, session, "leaving")
                {
                    leaving = true;
                    break;
                }
            }
        }
        if let Some(h) = editor.helper_mut() {
            *h = Assist::of(session, &pending);
        }
        if leaving {
            break;
        }
    }
    if let Some(h) = &history {
        let _ = editor.save_history(h);
    }
    0
}

/// `:help WORD`, or the general help with the session's commands.
fn help_with_commands(word: Option<&str>) -> String {
    if word.is_some() {
        return help(word);
    }
    let mut s = help(None);
    s.push_str("commands:\n");
    for (c, h) in COMMANDS {
        s.push_str(&format!("  {c:<12} {h}\n"));
    }
    s
}

/// `:save`: the recipe written to `target`, said plainly when it has
/// errors.
fn save(session: &mut Session, target: PathBuf) -> String {
    match session.save(&target) {
        Ok(()) if session.check().has_errors() => format!(
            "saved {}; it has errors, which `:check` lists and `assort run` would refuse\n",
            target.display()
        ),
        Ok(()) => format!("saved {}\n", target.display()),
        Err(e) => format!("not saved: {e}\n"),
    }
}

/// `:open`: the session starts over from the recipe at `p` (asked about
/// unsaved changes before).
fn open(session: &mut Session, path: &mut PathBuf, p: &str, options: &CheckOptions) -> String {
    match Session::open(Path::new(p), options.clone()) {
        Ok(s) => {
            *session = s;
            *path = PathBuf::from(p);
            format!("opened {p}\n")
        }
        Err(e) => format!("cannot open `{p}`: {e}\n"),
    }
}

/// The file a `:open` command names, if the input is one.
fn opening(input: &str) -> Option<String> {
    let command = input.trim().strip_prefix(':')?;
    (command.split_whitespace().next() == Some("open"))
        .then(|| path_argument(command))
        .flatten()
}

/// The path after a command's name (`save`, `open`): the rest of the line,
/// spaces and all, without the quotes it may be written in.
fn path_argument(command: &str) -> Option<String> {
    let name = command.split_whitespace().next()?;
    let rest = command.trim_start()[name.len()..].trim();
    let quoted = rest.len() >= 2 && rest.starts_with('"') && rest.ends_with('"');
    let rest = if quoted {
        &rest[1..rest.len() - 1]
    } else {
        rest
    };
    (!rest.is_empty()).then(|| rest.to_string())
}

/// Whether to go on with `what` (leaving, opening another recipe), which
/// lets the session's statements go: at once when nothing would be lost,
/// else after asking whether to save (`y`), go on without saving (`n`) or
/// stay.
fn let_go_asking(editor: &mut LineEditor, session: &mut Session, what: &str) -> bool {
    if !session.unsaved() {
        return true;
    }
    let path = session.path().to_path_buf();
    let question = format!(
        "`{}` has unsaved changes: save them before {what}? [y]es, [n]o, anything else stays: ",
        path.display()
    );
    match editor
        .readline(&question)
        .map(|a| a.trim().to_ascii_lowercase())
    {
        Ok(a) if a == "y" || a == "yes" => match session.save(&path) {
            Ok(()) => {
                println!("saved {}", path.display());
                true
            }
            Err(e) => {
                println!("not saved: {e}; still here");
                false
            }
        },
        Ok(a) if a == "n" || a == "no" => true,
        _ => {
            println!("still here");
            false
        }
    }
}

/// Adds a line to a statement being gathered; returns the whole statement
/// once it does not end in a comma (a comment after the comma counts as the
/// line's end).
fn gather(pending: &mut String, line: &str) -> Option<String> {
    if !pending.is_empty() {
        pending.push('\n');
    }
    pending.push_str(line);
    let code = line.split('#').next().unwrap_or("").trim_end();
    if code.ends_with(',') && !line.trim_start().starts_with(':') {
        return None;
    }
    Some(std::mem::take(pending))
}

/// Handles one statement or command; `false` to leave.
fn handle(session: &mut Session, path: &mut PathBuf, input: &str, options: &CheckOptions) -> bool {
    // Asked each time: the terminal may have been resized.
    let screen = Screen::stdout();
    let trimmed = input.trim();
    let out = &mut std::io::stdout();
    if let Some(command) = trimmed.strip_prefix(':') {
        let mut words = command.split_whitespace();
        let name = words.next().unwrap_or("");
        let arg = words.next();
        let text = match name {
            "quit" | "q" => return false,
            "recipe" => session.formatted(),
            "check" => {
                let p = session.problems(screen);
                if p.is_empty() {
                    "no problems\n".into()
                } else {
                    p
                }
            }
            "plan" => match session.check().plan {
                Some(plan) => serde_json::to_string_pretty(&plan).unwrap_or_default() + "\n",
                None => session.problems(screen),
            },
            "run" => match arg {
                None => run_stoppable(session, screen, false),
                Some("write") => run_stoppable(session, screen, true),
                Some(other) => format!("`:run` or `:run write`, not `:run {other}`\n"),
            },
            "again" => session
                .table(arg.unwrap_or("sweep"))
                .unwrap_or_else(|| "nothing to show: `:run` first, then `:again sweep`, `profiles` or `comparison`\n".into()),
            "drop" => {
                let start = command.trim_start().strip_prefix("drop").unwrap_or("");
                match session.drop_statement(start) {
                    Ok(done) | Err(done) => done + "\n",
                }
            }
            "undo" => session.undo().map(|u| u + "\n").unwrap_or_else(|| "nothing to undo\n".into()),
            "save" => save(session, path_argument(command).map_or_else(|| path.clone(), PathBuf::from)),
            "open" => match path_argument(command) {
                Some(p) => open(session, path, &p, options),
                None => "`:open FILE`\n".into(),
            },
            "help" => help_with_commands(arg),
            other => {
                let names: Vec<&str> = COMMANDS.iter().map(|(c, _)| &c[1..]).collect();
                match crate::check::suggest::nearest(other, names) {
                    Some(s) => format!("unknown command `:{other}`; did you mean `:{s}`?\n"),
                    None => format!("unknown command `:{other}`; `:help` lists them\n"),
                }
            }
        };
        let _ = write!(out, "{text}");
        return true;
    }
    let (what, problems) = session.enter(trimmed, screen);
    let _ = write!(out, "{problems}");
    let word = trimmed.split_whitespace().next().unwrap_or("");
    let note = match what {
        Entered::Added | Entered::Nothing => None,
        Entered::Unchanged => Some(format!(
            "the same `{word}` is in the recipe already; nothing changed"
        )),
        Entered::Replaced(w) => Some(format!("replaced the earlier `{w}`")),
        Entered::Rejected => Some(format!("not kept: the `{word}` statement has an error")),
    };
    if let Some(n) = note {
        let _ = writeln!(out, "{n}");
    }
    true
}

/// Runs the recipe so that Ctrl-C stops the run, not the session: the
/// interrupt handler (installed once, shared with writing sets) asks the
/// engine to stop, and the run ends with nothing written.
fn run_stoppable(session: &mut Session, screen: Screen, write: bool) -> String {
    crate::session::clear_stop();
    let previous = stop_on_interrupt();
    if previous.is_some() {
        println!("running (Ctrl-C stops the run)");
        let _ = std::io::stdout().flush();
    }
    let mut shown = session.run(screen, write).unwrap_or_else(|e| e);
    restore_interrupt(previous);
    // The terminal echoed `^C` where the cursor was: what the run says
    // starts on a line of its own.
    if crate::engine::stop::requested() {
        shown.insert(0, '\n');
    }
    crate::session::clear_stop();
    shown
}

/// While a run lasts, SIGINT asks the engine to stop instead of ending the
/// process (a set being written is finished first: writing does not look
/// at the request). Returns the action to put back.
#[cfg(unix)]
fn stop_on_interrupt() -> Option<libc::sigaction> {
    extern "C" fn asked(_: libc::c_int) {
        crate::session::request_stop();
    }
    // SAFETY: sigaction with a zeroed, then filled, action struct; the
    // handler only stores to an atomic, which is async-signal-safe.
    unsafe {
        let mut action: libc::sigaction = std::mem::zeroed();
        action.sa_sigaction = asked as extern "C" fn(libc::c_int) as libc::sighandler_t;
        libc::sigemptyset(&mut action.sa_mask);
        let mut old: libc::sigaction = std::mem::zeroed();
        (libc::sigaction(libc::SIGINT, &action, &mut old) == 0).then_some(old)
    }
}

#[cfg(unix)]
fn restore_interrupt(previous: Option<libc::sigaction>) {
    if let Some(old) = previous {
        // SAFETY: puts back the action `stop_on_interrupt` saved.
        unsafe {
            libc::sigaction(libc::SIGINT, &old, std::ptr::null_mut());
        }
    }
}

#[cfg(not(unix))]
fn stop_on_interrupt() -> Option<()> {
    None
}

#[cfg(not(unix))]
fn restore_interrupt(_: Option<()>) {}

/// Completion and hints for the line editor: a snapshot of what
/// completion needs, taken after each entry (the editor's helper cannot
/// borrow the session while the session changes).
struct Assist {
    columns: Vec<crate::check::probe::ColumnInfo>,
    sampled: usize,
    key: Option<String>,
    elsewhere: Vec<String>,
    folder: PathBuf,
    /// The lines of a statement being continued, before this one.
    pending: String,
    /// Whether hints are shown dimmed (a terminal, `NO_COLOR` unset).
    dim: bool,
}

impl Assist {
    fn of(session: &Session, pending: &str) -> Assist {
        let checked = session.check();
        let folder = session
            .path()
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        let facts = complete::Facts::of(&session.text());
        Assist {
            columns: checked.column_info,
            sampled: checked.sampled,
            key: facts.key,
            elsewhere: facts.elsewhere,
            folder: folder.to_path_buf(),
            pending: pending.to_string(),
            dim: Screen::stdout().colour,
        }
    }
}

impl Completer for Assist {
    type Candidate = rustyline::completion::Pair;

    fn complete(
        &self,
        line: &str,
        pos: usize,
        _: &Context<'_>,
    ) -> rustyline::Result<(usize, Vec<rustyline::completion::Pair>)> {
        // A continued statement is completed as a whole.
        let lead = if self.pending.is_empty() {
            String::new()
        } else {
            format!("{}\n", self.pending)
        };
        let before = format!("{lead}{}", &line[..pos]);
        let data = complete::DataView {
            columns: &self.columns,
            sampled: self.sampled,
            key: self.key.as_deref(),
            folder: &self.folder,
            elsewhere: &self.elsewhere,
        };
        let found = complete::complete(&before, &data);
        let start = found.start.saturating_sub(lead.len());
        let pairs = found
            .items
            .into_iter()
            .map(|i| rustyline::completion::Pair {
                display: i.label,
                replacement: i.insert,
            })
            .collect();
        Ok((start, pairs))
    }
}

impl Hinter for Assist {
    type Hint = String;

    /// After a statement word and a space, the statement's example.
    fn hint(&self, line: &str, pos: usize, _: &Context<'_>) -> Option<String> {
        let word = line.strip_suffix(' ')?;
        if pos != line.len() || word.contains(' ') {
            return None;
        }
        let doc = vocab::statement(word)?;
        doc.example
            .strip_prefix(word)
            .map(|rest| rest.trim_start().to_string())
    }
}

impl Highlighter for Assist {
    /// A hint is an example, not typed text: dimmed, so Enter on it is
    /// not mistaken for entering it (Right arrow takes it).
    fn highlight_hint<'h>(&self, hint: &'h str) -> std::borrow::Cow<'h, str> {
        if self.dim {
            format!("\x1b[2m{hint}\x1b[0m").into()
        } else {
            hint.into()
        }
    }
}
impl Validator for Assist {}
impl Helper for Assist {}
