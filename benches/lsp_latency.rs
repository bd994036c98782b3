//! The language server's answer time, measured from a client's side:
//! `cargo bench --bench lsp_latency`. Two recipes: the demo, and a wide
//! one of about 300 lines over a 120-column file (a generated copy under
//! the system's temporary folder), as an analyst's long-lived recipe is.
//! The aim is every answer within 10 ms at the 95th percentile. Each
//! request is sent and its answer awaited before the next; the figures are
//! the median, the 95th percentile and the slowest of `BENCH_ROUNDS` (100)
//! rounds of hover, completion, formatting, quick fixes over the whole
//! recipe, semantic tokens and a change that is answered by fresh
//! diagnostics.

use serde_json::{json, Value};
use std::io::{BufRead, BufReader, Read, Write};
use std::path::Path;
use std::process::{ChildStdin, ChildStdout, Command, Stdio};
use std::time::{Duration, Instant};

/// The protocol's framing over a server's pipes.
struct Client {
    stdin: ChildStdin,
    stdout: BufReader<ChildStdout>,
    id: i64,
}

impl Client {
    fn send(&mut self, msg: Value) {
        let body = msg.to_string();
        write!(self.stdin, "Content-Length: {}\r\n\r\n{}", body.len(), body).expect("write");
        self.stdin.flush().expect("flush");
    }

    fn recv(&mut self) -> Value {
        let mut length = 0;
        loop {
            let mut line = String::new();
            self.stdout.read_line(&mut line).expect("read");
            let line = line.trim_end();
            if line.is_empty() {
                break;
            }
            if let Some(v) = line.strip_prefix("Content-Length: ") {
                length = v.parse().expect("length");
            }
        }
        let mut body = vec![0; length];
        self.stdout.read_exact(&mut body).expect("body");
        serde_json::from_slice(&body).expect("json")
    }

    /// Sends a request and waits for its answer; how long that took.
    fn timed(&mut self, method: &str, params: Value) -> Duration {
        self.id += 1;
        let id = self.id;
        let t = Instant::now();
        self.send(json!({"jsonrpc": "2.0", "id": id, "method": method, "params": params}));
        while self.recv()["id"] != json!(id) {}
        t.elapsed()
    }
}

/// A recipe to measure on, and where to hover and complete in it.
struct Case {
    name: String,
    uri: String,
    text: String,
    hover: Value,
    complete: Value,
}

fn main() {
    let rounds: usize = std::env::var("BENCH_ROUNDS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(100);
    let exe = env!("CARGO_BIN_EXE_assort");
    let mut child = Command::new(exe)
        .arg("lsp")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("start assort lsp");
    let mut client = Client {
        stdin: child.stdin.take().expect("piped"),
        stdout: BufReader::new(child.stdout.take().expect("piped")),
        id: 0,
    };
    client.send(
        json!({"jsonrpc": "2.0", "id": 0, "method": "initialize", "params": {"capabilities": {}}}),
    );
    client.recv();
    client.send(json!({"jsonrpc": "2.0", "method": "initialized", "params": {}}));

    let wide_dir = std::env::temp_dir().join("assort-lsp-bench");
    for case in [demo(), wide(&wide_dir)] {
        let times = measure(&mut client, &case, rounds);
        report(&case, rounds, &times);
    }
    client.send(json!({"jsonrpc": "2.0", "id": 999_999, "method": "shutdown", "params": null}));
    client.recv();
    client.send(json!({"jsonrpc": "2.0", "method": "exit", "params": null}));
    let _ = child.wait();
}

fn demo() -> Case {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes/coop-members.assort");
    Case {
        name: "the demo recipe".into(),
        uri: format!("file://{}", path.display()),
        text: std::fs::read_to_string(&path).expect("demo recipe"),
        hover: json!({"line": 20, "character": 2}),
        complete: json!({"line": 8, "character": 9}),
    }
}

/// A 120-column file of 1,000 members (110 numbers, 10 branch-like text
/// columns) and a recipe of about 300 lines over it: a feature per
/// continued line with a comment on some, categories, a `missing` rule, a
/// name, a transform and a weight for many columns, the method and the
/// outputs.
fn wide(dir: &Path) -> Case {
    std::fs::create_dir_all(dir).expect("bench folder");
    let numbers: Vec<String> = (1..=110).map(|i| format!("measure_{i:03}")).collect();
    let texts: Vec<String> = (1..=10).map(|i| format!("group_{i:02}")).collect();
    let mut csv = format!("member_id,{},{}\n", numbers.join(","), texts.join(","));
    for r in 0..1000u64 {
        csv.push_str(&format!("M{r}"));
        for c in 0..110u64 {
            // A spread of values, a gap now and then.
            let v = (r * 7919 + c * 104_729) % 1000;
            if v % 97 == 0 {
                csv.push(',');
            } else {
                csv.push_str(&format!(",{}.{}", v / 10, v % 10));
            }
        }
        for c in 0..10u64 {
            csv.push_str(&format!(
                ",{}",
                ["north", "harbour", "old town"][((r + c) % 3) as usize]
            ));
        }
        csv.push('\n');
    }
    std::fs::write(dir.join("wide.csv"), csv).expect("bench data");
    let mut text = String::from("# A wide recipe: one feature a line.\nrecipe \"wide\"\nseed 7\ninput \"wide.csv\" key member_id\n");
    text.push_str("features ");
    for (i, n) in numbers.iter().enumerate() {
        let sep = if i + 1 == numbers.len() { "" } else { "," };
        let note = if i % 10 == 0 {
            "  # a block of ten"
        } else {
            ""
        };
        let indent = if i == 0 { "" } else { "         " };
        text.push_str(&format!("{indent}{n}{sep}{note}\n"));
    }
    text.push_str(&format!("categories {}\n", texts.join(", ")));
    text.push_str("missing fill median\n");
    for (i, n) in numbers.iter().enumerate().take(70) {
        text.push_str(&format!("call {n} \"measure {}\"\n", i + 1));
    }
    for n in numbers.iter().take(60) {
        text.push_str(&format!("transform {n} clip 0..0.99\n"));
    }
    for n in numbers.iter().skip(60).take(100) {
        text.push_str(&format!("weight {n} 0.5\n"));
    }
    text.push_str("scale zscore\nkmeans k 2..6 restarts 5\nchoose k by silhouette\n");
    text.push_str(
        "save assignments \"out/wide_segments.csv\"\nsave profiles \"out/wide_profiles.json\"\n",
    );
    let path = dir.join("wide.assort");
    // Written too, to reproduce a figure with `assort check` or a profiler.
    std::fs::write(&path, &text).expect("bench recipe");
    let lines = text.lines().count();
    Case {
        name: format!("a {lines}-line recipe over 120 columns"),
        uri: format!("file://{}", path.display()),
        hover: json!({"line": 60, "character": 12}),
        complete: json!({"line": 200, "character": 10}),
        text,
    }
}

fn measure(client: &mut Client, case: &Case, rounds: usize) -> Vec<(&'static str, Duration)> {
    let uri = &case.uri;
    client.send(
        json!({"jsonrpc": "2.0", "method": "textDocument/didOpen", "params": {"textDocument": {"uri": uri, "languageId": "assort", "version": 1, "text": case.text}}}),
    );
    while client.recv()["method"] != "textDocument/publishDiagnostics" {}
    let lines = case.text.lines().count();
    let mut times = Vec::new();
    for round in 0..rounds {
        for (name, method, params) in [
            (
                "hover",
                "textDocument/hover",
                json!({"textDocument": {"uri": uri}, "position": case.hover}),
            ),
            (
                "completion",
                "textDocument/completion",
                json!({"textDocument": {"uri": uri}, "position": case.complete}),
            ),
            (
                "formatting",
                "textDocument/formatting",
                json!({"textDocument": {"uri": uri}, "options": {"tabSize": 4, "insertSpaces": true}}),
            ),
            (
                "codeaction",
                "textDocument/codeAction",
                json!({"textDocument": {"uri": uri}, "range": {"start": {"line": 0, "character": 0}, "end": {"line": lines, "character": 0}}, "context": {"diagnostics": []}}),
            ),
            (
                "tokens",
                "textDocument/semanticTokens/full",
                json!({"textDocument": {"uri": uri}}),
            ),
        ] {
            times.push((name, client.timed(method, params)));
        }
        let t = Instant::now();
        client.send(
            json!({"jsonrpc": "2.0", "method": "textDocument/didChange", "params": {"textDocument": {"uri": uri, "version": round + 2}, "contentChanges": [{"text": case.text}]}}),
        );
        while client.recv()["method"] != "textDocument/publishDiagnostics" {}
        times.push(("diagnostics", t.elapsed()));
    }
    client.send(
        json!({"jsonrpc": "2.0", "method": "textDocument/didClose", "params": {"textDocument": {"uri": uri}}}),
    );
    times
}

fn report(case: &Case, rounds: usize, times: &[(&str, Duration)]) {
    println!(
        "assort lsp on {}, {rounds} rounds (aim: p95 within 10 ms)",
        case.name
    );
    println!(
        "{:<12} {:>10} {:>10} {:>10}",
        "request", "median ms", "p95 ms", "max ms"
    );
    for name in [
        "hover",
        "completion",
        "formatting",
        "codeaction",
        "tokens",
        "diagnostics",
    ] {
        let mut ms: Vec<f64> = times
            .iter()
            .filter(|(n, _)| *n == name)
            .map(|(_, d)| d.as_secs_f64() * 1000.0)
            .collect();
        ms.sort_by(f64::total_cmp);
        println!(
            "{:<12} {:>10.2} {:>10.2} {:>10.2}",
            name,
            ms[ms.len() / 2],
            ms[(ms.len() * 95 / 100).min(ms.len() - 1)],
            ms[ms.len() - 1]
        );
    }
    println!();
}
