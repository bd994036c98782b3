//! The interactive session in a pseudo-terminal, driven as a person at a
//! keyboard would: Ctrl-C on a half-typed line and inside a continued
//! statement keeps the session and its statements, and during a run stops
//! the run (a real SIGINT: the terminal is the session's controlling
//! terminal) and keeps them too; a three-line paste (bracketed, as
//! terminals send it) enters three statements; Tab completes in context
//! and a second Tab lists the candidates; hints are dimmed;
//! leaving with unsaved changes asks, and staying or leaving without saving
//! both work.

#![cfg(unix)]

mod common;

use common::case::Case;
use std::fs::File;
use std::io::{Read, Write};
use std::os::fd::{FromRawFd, OwnedFd};
use std::process::{Child, Command, Stdio};
use std::sync::mpsc::{channel, Receiver};
use std::time::{Duration, Instant};

/// `assort repl RECIPE` on the slave side of a new pseudo-terminal; the
/// master side to type into, and what the session prints.
struct Terminal {
    child: Child,
    keys: File,
    screen: Receiver<Vec<u8>>,
    seen: String,
}

impl Terminal {
    fn start(case: &Case, recipe: &str) -> Terminal {
        Terminal::start_in_colour(case, recipe, false)
    }

    /// As [`Terminal::start`], with `NO_COLOR` unset when `colour`.
    fn start_in_colour(case: &Case, recipe: &str, colour: bool) -> Terminal {
        let (mut master, mut slave) = (0, 0);
        // SAFETY: openpty writes two new descriptors into the locals; null
        // name, termios and window size ask for the defaults.
        let made = unsafe {
            libc::openpty(
                &mut master,
                &mut slave,
                std::ptr::null_mut(),
                std::ptr::null(),
                std::ptr::null(),
            )
        };
        assert_eq!(made, 0, "no pseudo-terminal");
        // SAFETY: both descriptors were just opened and are owned here only.
        let (master, slave) =
            unsafe { (OwnedFd::from_raw_fd(master), OwnedFd::from_raw_fd(slave)) };
        let slave = File::from(slave);
        let mut command = Command::new(env!("CARGO_BIN_EXE_assort"));
        // The terminal becomes the session's controlling terminal, as a
        // shell's would be, so Ctrl-C typed while the line editor is not
        // reading keys (during a run) arrives as SIGINT.
        // SAFETY: setsid and ioctl are async-signal-safe, as pre_exec asks.
        unsafe {
            use std::os::unix::process::CommandExt;
            command.pre_exec(|| {
                if libc::setsid() < 0 || libc::ioctl(0, libc::TIOCSCTTY as _, 0) < 0 {
                    return Err(std::io::Error::last_os_error());
                }
                Ok(())
            });
        }
        command.env_remove("NO_COLOR");
        if !colour {
            command.env("NO_COLOR", "1");
        }
        let child = command
            .args(["repl", recipe])
            .current_dir(case.dir.path())
            .env("HOME", case.dir.path())
            .env("TERM", "xterm")
            .stdin(Stdio::from(slave.try_clone().unwrap()))
            .stdout(Stdio::from(slave.try_clone().unwrap()))
            .stderr(Stdio::from(slave))
            .spawn()
            .unwrap();
        let master = File::from(master);
        let mut reader = master.try_clone().unwrap();
        let (tx, screen) = channel();
        std::thread::spawn(move || {
            let mut buf = [0u8; 4096];
            while let Ok(n) = reader.read(&mut buf) {
                if n == 0 || tx.send(buf[..n].to_vec()).is_err() {
                    break;
                }
            }
        });
        Terminal {
            child,
            keys: master,
            screen,
            seen: String::new(),
        }
    }

    /// Waits until the screen shows `text` (after what was awaited before).
    #[track_caller]
    fn wait_for(&mut self, text: &str) {
        self.text_before(text);
    }

    /// What the screen shows before `text`, once it shows `text`.
    #[track_caller]
    fn text_before(&mut self, text: &str) -> String {
        let deadline = Instant::now() + Duration::from_secs(20);
        loop {
            if let Some(at) = self.seen.find(text) {
                let before = self.seen[..at].to_string();
                self.seen.drain(..at + text.len());
                return before;
            }
            let left = deadline.saturating_duration_since(Instant::now());
            match self.screen.recv_timeout(left) {
                Ok(bytes) => self.seen.push_str(&String::from_utf8_lossy(&bytes)),
                Err(_) => panic!("the session never showed `{text}`:\n{}", self.seen),
            }
        }
    }

    /// Waits until the line editor is reading keys at `prompt`: the last
    /// bracketed-paste switch it sent turns pasting on (it does so when a
    /// line starts and off when one ends), the prompt follows, and the
    /// screen then stays quiet. Keys sent earlier would meet the terminal's
    /// cooked mode instead.
    #[track_caller]
    fn wait_for_prompt(&mut self, prompt: &str) {
        const ON: &str = "\x1b[?2004h";
        const OFF: &str = "\x1b[?2004l";
        let deadline = Instant::now() + Duration::from_secs(20);
        loop {
            let reading = self.seen.rfind(ON).is_some_and(|on| {
                self.seen.rfind(OFF).is_none_or(|off| off < on) && self.seen[on..].contains(prompt)
            });
            let wait = if reading {
                Duration::from_millis(200)
            } else {
                deadline.saturating_duration_since(Instant::now())
            };
            match self.screen.recv_timeout(wait) {
                Ok(bytes) => self.seen.push_str(&String::from_utf8_lossy(&bytes)),
                Err(_) if reading => break,
                Err(_) => panic!(
                    "the session never waited at `{prompt}`; it showed:\n{}",
                    self.seen
                ),
            }
        }
        self.seen.clear();
    }

    fn type_keys(&mut self, keys: &str) {
        self.keys.write_all(keys.as_bytes()).unwrap();
        self.keys.flush().unwrap();
    }

    /// `:quit`, answered "no" to saving: the session ends well.
    #[track_caller]
    fn leave_without_saving(mut self) {
        self.type_keys(":quit\r");
        self.wait_for_prompt("has unsaved changes");
        self.type_keys("n\r");
        assert!(self.finish().success());
    }

    fn finish(mut self) -> std::process::ExitStatus {
        let deadline = Instant::now() + Duration::from_secs(20);
        loop {
            if let Some(status) = self.child.try_wait().unwrap() {
                return status;
            }
            assert!(
                Instant::now() < deadline,
                "the session did not end:\n{}",
                self.seen
            );
            std::thread::sleep(Duration::from_millis(20));
        }
    }
}

fn case() -> Case {
    let case = Case::empty();
    case.write(
        "data/members.csv",
        "member_id,tenure_months,visits_per_month\nM1,12,4.5\nM2,40,1.2\nM3,3,0.8\nM4,55,9.1\n",
    );
    case
}

#[test]
fn ctrl_c_clears_the_line_and_a_paste_enters_each_statement() {
    let case = case();
    let mut t = Terminal::start(&case, "new.assort");
    t.wait_for_prompt("assort> ");
    t.type_keys("input \"data/members.csv\" key member_id\r");
    t.wait_for_prompt("assort> ");
    // Ctrl-C on a half-typed line.
    t.type_keys("features tenure_mon\x03");
    t.wait_for("Ctrl-C cleared the line");
    t.wait_for_prompt("assort> ");
    // Ctrl-C inside a statement continued after a comma.
    t.type_keys("features tenure_months,\r");
    t.wait_for_prompt("... ");
    t.type_keys("\x03");
    t.wait_for("Ctrl-C cleared the statement");
    t.wait_for_prompt("assort> ");
    // Three lines pasted at once, as a terminal sends a paste.
    t.type_keys("\x1b[200~features tenure_months\nkmeans k 2\nseed 3\x1b[201~\r");
    t.wait_for_prompt("assort> ");
    t.type_keys(":recipe\r");
    t.wait_for("input \"data/members.csv\" key member_id");
    t.wait_for("features tenure_months");
    t.wait_for("kmeans k 2");
    t.wait_for("seed 3");
    t.wait_for_prompt("assort> ");
    // Leaving with unsaved changes asks; anything but y or n stays.
    t.type_keys("\x04");
    t.wait_for_prompt("has unsaved changes");
    t.type_keys("c\r");
    t.wait_for("still here");
    t.wait_for_prompt("assort> ");
    // `y` saves, then leaves.
    t.type_keys(":quit\r");
    t.wait_for_prompt("has unsaved changes");
    t.type_keys("y\r");
    t.wait_for("saved new.assort");
    assert!(t.finish().success());
    let saved = case.read("new.assort");
    for line in [
        "input \"data/members.csv\" key member_id",
        "features tenure_months",
        "kmeans k 2",
        "seed 3",
    ] {
        assert!(saved.contains(line), "`{line}` not saved:\n{saved}");
    }
    assert!(
        !saved.contains("tenure_mon\n"),
        "a cleared line was kept:\n{saved}"
    );
}

#[test]
fn leaving_a_saved_session_asks_nothing_and_no_leaves_without_saving() {
    let case = case();
    case.write("kept.assort", "input \"data/members.csv\" key member_id\n");
    let mut t = Terminal::start(&case, "kept.assort");
    t.wait_for_prompt("assort> ");
    t.type_keys(":quit\r");
    assert!(t.finish().success(), "a session with nothing to lose asked");

    let mut t = Terminal::start(&case, "kept.assort");
    t.wait_for_prompt("assort> ");
    t.type_keys("features tenure_months\r");
    t.wait_for_prompt("assort> ");
    t.leave_without_saving();
    assert_eq!(
        case.read("kept.assort"),
        "input \"data/members.csv\" key member_id\n"
    );
}

#[test]
fn ctrl_c_during_a_run_stops_the_run_and_keeps_the_session() {
    let case = Case::demo();
    // Seventy thousand k-means fits of 6,000 members: far longer than the
    // test waits before pressing Ctrl-C.
    case.edit(
        "coop-members.assort",
        "kmeans k 2..8 restarts 50",
        "kmeans k 2..8 restarts 10000",
    );
    let mut t = Terminal::start(&case, "coop-members.assort");
    t.wait_for_prompt("assort> ");
    t.type_keys(":run write\r");
    t.wait_for("running (Ctrl-C stops the run)");
    std::thread::sleep(Duration::from_millis(300));
    t.type_keys("\x03");
    // The terminal echoes `^C`; what the session says starts on a line of
    // its own after it.
    t.wait_for("^C");
    let between = t.text_before("the run was stopped (Ctrl-C)");
    assert!(
        between.starts_with("\r\n") || between.starts_with('\n'),
        "the message follows `^C` on its line: {between:?}"
    );
    t.wait_for_prompt("assort> ");
    // The session and its statements are all still there.
    t.type_keys(":recipe\r");
    t.wait_for("kmeans k 2..8 restarts 10000");
    t.wait_for("label 5 \"occasional newcomers\"");
    t.wait_for_prompt("assort> ");
    // A run that is not stopped goes to its end.
    t.type_keys("kmeans k 5..6 restarts 5\r");
    t.wait_for_prompt("assort> ");
    t.type_keys(":run\r");
    t.wait_for("not written: the 9 files the recipe saves");
    t.wait_for_prompt("assort> ");
    // Tab completes what the checker accepts: the one text column.
    t.type_keys("categories \t");
    t.wait_for("categories home_branch");
    t.type_keys("\x03");
    t.wait_for("Ctrl-C cleared the line");
    t.wait_for_prompt("assort> ");
    t.leave_without_saving();
    assert!(!case.path("out").exists(), "the stopped run wrote outputs");
}

#[test]
fn an_ordered_column_entered_again_replaces_its_levels_and_is_saved() {
    let case = Case::empty();
    case.write(
        "data/members.csv",
        "member_id,visits,tier,news\nM1,1,low,yes\nM2,2,high,no\nM3,3,mid,Y\nM4,4,low,N\nM5,9,high,yes\nM6,8,mid,no\n",
    );
    let mut t = Terminal::start(&case, "kinds.assort");
    t.wait_for_prompt("assort> ");
    for line in [
        "input \"data/members.csv\" key member_id",
        "features visits",
        "ordered tier \"high\" < \"mid\" < \"low\"",
        "flags news",
        "kmeans k 2 restarts 3",
    ] {
        t.type_keys(&format!("{line}\r"));
        t.wait_for_prompt("assort> ");
    }
    // The same column's levels again, in another order: one statement.
    t.type_keys("ordered tier \"low\" < \"mid\" < \"high\"\r");
    t.wait_for("replaced the earlier `ordered tier \"high\" < \"mid\" < \"low\"`");
    t.wait_for_prompt("assort> ");
    t.type_keys(":run\r");
    t.wait_for("tier (rank)");
    t.wait_for("news (share set)");
    t.wait_for_prompt("assort> ");
    t.type_keys(":quit\r");
    t.wait_for_prompt("has unsaved changes");
    t.type_keys("y\r");
    t.wait_for("saved kinds.assort");
    assert!(t.finish().success());
    let saved = case.read("kinds.assort");
    assert!(
        saved.contains("ordered tier \"low\" < \"mid\" < \"high\""),
        "{saved}"
    );
    assert!(!saved.contains("\"high\" < \"mid\""), "{saved}");
    assert!(saved.contains("flags news"), "{saved}");
}

#[test]
fn lines_that_arrive_together_are_each_entered_without_bracketed_paste() {
    let case = case();
    let mut t = Terminal::start(&case, "new.assort");
    t.wait_for_prompt("assort> ");
    // Four statements in one write, as `tmux paste-buffer` without `-p`,
    // GNU screen, a serial console or a typing tool sends them.
    t.type_keys(
        "input \"data/members.csv\" key member_id\rfeatures tenure_months\rkmeans k 2\rseed 3\r",
    );
    // Then keys typed ahead while the session is busy with those, each
    // written without waiting for a prompt.
    t.type_keys("scale none\r");
    t.type_keys("choose k by silhouette\r");
    t.type_keys(":save\r");
    t.wait_for("saved new.assort");
    t.wait_for_prompt("assort> ");
    t.type_keys(":quit\r");
    assert!(t.finish().success());
    let saved = case.read("new.assort");
    for line in [
        "input \"data/members.csv\" key member_id",
        "features tenure_months",
        "kmeans k 2",
        "seed 3",
        "scale none",
        "choose k by silhouette",
    ] {
        assert!(saved.contains(line), "`{line}` was lost:\n{saved}");
    }
}

#[test]
fn opening_another_recipe_with_unsaved_changes_asks_first() {
    let case = case();
    case.write(
        "other.assort",
        "input \"data/members.csv\" key member_id\nseed 9\n",
    );
    let mut t = Terminal::start(&case, "new.assort");
    t.wait_for_prompt("assort> ");
    t.type_keys("input \"data/members.csv\" key member_id\r");
    t.wait_for_prompt("assort> ");
    t.type_keys("features tenure_months\r");
    t.wait_for_prompt("assort> ");
    // Anything but y or n stays, with the statements.
    t.type_keys(":open other.assort\r");
    t.wait_for_prompt("save them before opening `other.assort`?");
    t.type_keys("c\r");
    t.wait_for("still here");
    t.wait_for_prompt("assort> ");
    // `y` saves them, then opens.
    t.type_keys(":open other.assort\r");
    t.wait_for_prompt("save them before opening `other.assort`?");
    t.type_keys("y\r");
    t.wait_for("saved new.assort");
    t.wait_for("opened other.assort");
    t.wait_for_prompt("assort> ");
    // The recipe opened has nothing unsaved: leaving asks nothing.
    t.type_keys(":quit\r");
    assert!(t.finish().success());
    let saved = case.read("new.assort");
    assert!(
        saved.contains("features tenure_months"),
        "not saved:\n{saved}"
    );
    assert_eq!(
        case.read("other.assort"),
        "input \"data/members.csv\" key member_id\nseed 9\n"
    );
}

/// Tab completes what every candidate shares and a second Tab lists them
/// all on one line (it used to cycle through them one at a time); the
/// hint after a statement word is dimmed, so it does not pass for typed
/// text.
#[test]
fn a_second_tab_lists_the_candidates_and_hints_are_dimmed() {
    let case = case();
    let mut t = Terminal::start_in_colour(&case, "session.assort", true);
    t.wait_for_prompt("assort> ");
    t.type_keys("input \"data/members.csv\" key member_id\r");
    t.wait_for_prompt("assort> ");
    t.type_keys("features \t");
    std::thread::sleep(Duration::from_millis(300));
    t.type_keys("\t");
    std::thread::sleep(Duration::from_millis(300));
    t.type_keys("\x03");
    let shown = t.text_before("Ctrl-C cleared the line");
    let listed = shown.lines().any(|l| {
        let words: Vec<&str> = l.split_whitespace().collect();
        words.contains(&"tenure_months") && words.contains(&"visits_per_month")
    });
    assert!(listed, "no line lists both columns:\n{shown:?}");
    t.wait_for_prompt("assort> ");
    t.type_keys("scale ");
    t.wait_for("\x1b[2mzscore");
    t.type_keys("\x03");
    t.wait_for("Ctrl-C cleared the line");
    t.wait_for_prompt("assort> ");
    t.leave_without_saving();
}
