//! The language server's answer time on the demo recipe, measured from a
//! client's side: `cargo bench --bench lsp_latency`. The aim is every
//! answer within 50 ms. Each request is sent and its answer awaited before
//! the next; the figures are the median, the 95th percentile and the
//! slowest of `BENCH_ROUNDS` (100) rounds of hover, completion, formatting,
//! quick fixes over the whole recipe, semantic tokens and a change that is
//! answered by fresh diagnostics.

use serde_json::{json, Value};
use std::io::{BufRead, BufReader, Read, Write};
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

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
    let mut stdin = child.stdin.take().expect("piped");
    let mut stdout = BufReader::new(child.stdout.take().expect("piped"));
    let mut send = |msg: Value| {
        let body = msg.to_string();
        write!(stdin, "Content-Length: {}\r\n\r\n{}", body.len(), body).expect("write");
        stdin.flush().expect("flush");
    };
    let mut recv = move || -> Value {
        let mut length = 0;
        loop {
            let mut line = String::new();
            stdout.read_line(&mut line).expect("read");
            let line = line.trim_end();
            if line.is_empty() {
                break;
            }
            if let Some(v) = line.strip_prefix("Content-Length: ") {
                length = v.parse().expect("length");
            }
        }
        let mut body = vec![0; length];
        stdout.read_exact(&mut body).expect("body");
        serde_json::from_slice(&body).expect("json")
    };
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes/coop-members.assort");
    let text = std::fs::read_to_string(&path).expect("demo recipe");
    let uri = format!("file://{}", path.display());
    send(
        json!({"jsonrpc": "2.0", "id": 0, "method": "initialize", "params": {"capabilities": {}}}),
    );
    recv();
    send(json!({"jsonrpc": "2.0", "method": "initialized", "params": {}}));
    send(
        json!({"jsonrpc": "2.0", "method": "textDocument/didOpen", "params": {"textDocument": {"uri": uri, "languageId": "assort", "version": 1, "text": text}}}),
    );
    recv();

    let mut times: Vec<(&str, Duration)> = Vec::new();
    let mut id = 1;
    for round in 0..rounds {
        for (name, method, params) in [
            (
                "hover",
                "textDocument/hover",
                json!({"textDocument": {"uri": uri}, "position": {"line": 20, "character": 2}}),
            ),
            (
                "completion",
                "textDocument/completion",
                json!({"textDocument": {"uri": uri}, "position": {"line": 8, "character": 9}}),
            ),
            (
                "formatting",
                "textDocument/formatting",
                json!({"textDocument": {"uri": uri}, "options": {"tabSize": 4, "insertSpaces": true}}),
            ),
            (
                "codeaction",
                "textDocument/codeAction",
                json!({"textDocument": {"uri": uri}, "range": {"start": {"line": 0, "character": 0}, "end": {"line": 60, "character": 0}}, "context": {"diagnostics": []}}),
            ),
            (
                "tokens",
                "textDocument/semanticTokens/full",
                json!({"textDocument": {"uri": uri}}),
            ),
        ] {
            let t = Instant::now();
            send(json!({"jsonrpc": "2.0", "id": id, "method": method, "params": params}));
            while recv()["id"] != json!(id) {}
            times.push((name, t.elapsed()));
            id += 1;
        }
        let t = Instant::now();
        send(
            json!({"jsonrpc": "2.0", "method": "textDocument/didChange", "params": {"textDocument": {"uri": uri, "version": round + 2}, "contentChanges": [{"text": text}]}}),
        );
        while recv()["method"] != "textDocument/publishDiagnostics" {}
        times.push(("diagnostics", t.elapsed()));
    }
    send(json!({"jsonrpc": "2.0", "id": id, "method": "shutdown", "params": null}));
    recv();
    send(json!({"jsonrpc": "2.0", "method": "exit", "params": null}));
    let _ = child.wait();

    println!("assort lsp on the demo recipe, {rounds} rounds (aim: every answer within 50 ms)");
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
}
