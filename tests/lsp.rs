//! The language server, started as a process and spoken to in JSON-RPC
//! over its standard input and output, as an editor would.

use serde_json::{json, Value};
use std::io::{BufRead, BufReader, Read, Write};
use std::path::Path;
use std::process::{Child, ChildStdin, Command, Stdio};
use std::sync::mpsc::{channel, Receiver};
use std::time::Duration;

struct Server {
    child: Child,
    stdin: ChildStdin,
    messages: Receiver<Value>,
    next_id: i64,
}

impl Server {
    fn start() -> Server {
        let mut child = Command::new(env!("CARGO_BIN_EXE_assort"))
            .arg("lsp")
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        let stdin = child.stdin.take().unwrap();
        let mut stdout = BufReader::new(child.stdout.take().unwrap());
        let (tx, rx) = channel();
        std::thread::spawn(move || loop {
            let mut length = 0usize;
            loop {
                let mut line = String::new();
                if stdout.read_line(&mut line).unwrap_or(0) == 0 {
                    return;
                }
                let line = line.trim_end();
                if line.is_empty() {
                    break;
                }
                if let Some(v) = line.strip_prefix("Content-Length: ") {
                    length = v.parse().unwrap();
                }
            }
            let mut body = vec![0; length];
            if stdout.read_exact(&mut body).is_err() {
                return;
            }
            if tx.send(serde_json::from_slice(&body).unwrap()).is_err() {
                return;
            }
        });
        let mut s = Server {
            child,
            stdin,
            messages: rx,
            next_id: 1,
        };
        let init = s.request("initialize", json!({"capabilities": {}}));
        assert!(
            init["result"]["capabilities"]["hoverProvider"]
                .as_bool()
                .unwrap(),
            "{init}"
        );
        s.notify("initialized", json!({}));
        s
    }

    fn send(&mut self, msg: Value) {
        let body = msg.to_string();
        write!(self.stdin, "Content-Length: {}\r\n\r\n{}", body.len(), body).unwrap();
        self.stdin.flush().unwrap();
    }

    fn notify(&mut self, method: &str, params: Value) {
        self.send(json!({"jsonrpc": "2.0", "method": method, "params": params}));
    }

    fn request(&mut self, method: &str, params: Value) -> Value {
        let id = self.next_id;
        self.next_id += 1;
        self.send(json!({"jsonrpc": "2.0", "id": id, "method": method, "params": params}));
        loop {
            let m = self
                .messages
                .recv_timeout(Duration::from_secs(20))
                .expect("the server answers");
            if m["id"] == json!(id) {
                return m;
            }
        }
    }

    /// The next diagnostics published for `uri`.
    fn diagnostics(&mut self, uri: &str) -> Vec<Value> {
        loop {
            let m = self
                .messages
                .recv_timeout(Duration::from_secs(20))
                .expect("diagnostics are published");
            if m["method"] == "textDocument/publishDiagnostics" && m["params"]["uri"] == uri {
                return m["params"]["diagnostics"].as_array().unwrap().clone();
            }
        }
    }

    fn stop(mut self) {
        let r = self.request("shutdown", Value::Null);
        assert!(r.get("error").is_none(), "{r}");
        self.notify("exit", Value::Null);
        let status = self.child.wait().unwrap();
        assert!(status.success());
    }
}

fn demo_uri() -> (String, String) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("recipes/coop-members.assort");
    let text = std::fs::read_to_string(&path).unwrap();
    (format!("file://{}", path.display()), text)
}

fn open(s: &mut Server, uri: &str, text: &str) {
    s.notify(
        "textDocument/didOpen",
        json!({"textDocument": {"uri": uri, "languageId": "assort", "version": 1, "text": text}}),
    );
}

/// The (line, character) of the first `needle` in `text`, plus `shift`.
fn pos(text: &str, needle: &str, shift: usize) -> Value {
    let at = text.find(needle).unwrap() + shift;
    let line = text[..at].matches('\n').count();
    let col = at - text[..at].rfind('\n').map_or(0, |i| i + 1);
    json!({"line": line, "character": col})
}

#[test]
fn a_misspelt_column_is_reported_at_its_range() {
    let mut s = Server::start();
    let (uri, text) = demo_uri();
    let text = text.replacen("visits_per_month", "vists_per_month", 1);
    open(&mut s, &uri, &text);
    let diags = s.diagnostics(&uri);
    let d = diags
        .iter()
        .find(|d| d["code"] == "assort::unknown_column")
        .unwrap_or_else(|| panic!("{diags:?}"));
    assert_eq!(d["range"]["start"], pos(&text, "vists_per_month", 0));
    assert_eq!(
        d["range"]["end"],
        pos(&text, "vists_per_month", "vists_per_month".len())
    );
    assert!(d["message"]
        .as_str()
        .unwrap()
        .contains("did you mean `visits_per_month`?"));
    assert_eq!(d["severity"], 1);
    // Mending it clears the diagnostic.
    s.notify("textDocument/didChange", json!({"textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": demo_uri().1}]}));
    assert!(s.diagnostics(&uri).is_empty());
    s.stop();
}

#[test]
fn hover_explains_statements_and_columns() {
    let mut s = Server::start();
    let (uri, text) = demo_uri();
    open(&mut s, &uri, &text);
    s.diagnostics(&uri);
    let h = s.request(
        "textDocument/hover",
        json!({"textDocument": {"uri": uri}, "position": pos(&text, "kmeans k", 2)}),
    );
    let value = h["result"]["contents"]["value"].as_str().unwrap();
    assert!(
        value.contains("**kmeans**") && value.contains("restarts"),
        "{value}"
    );
    let h = s.request(
        "textDocument/hover",
        json!({"textDocument": {"uri": uri}, "position": pos(&text, "basket_value", 3)}),
    );
    let value = h["result"]["contents"]["value"].as_str().unwrap();
    assert!(
        value.contains("**basket_value**: numeric column; in the first 1000 records"),
        "{value}"
    );
    assert!(value.contains("mean"), "{value}");
    s.stop();
}

#[test]
fn completion_offers_column_names_and_statement_words() {
    let mut s = Server::start();
    let (uri, text) = demo_uri();
    let text = format!("{text}weight coup");
    open(&mut s, &uri, &text);
    s.diagnostics(&uri);
    let end = json!({"line": text.matches('\n').count(), "character": "weight coup".len()});
    let c = s.request(
        "textDocument/completion",
        json!({"textDocument": {"uri": uri}, "position": end}),
    );
    let labels: Vec<&str> = c["result"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["label"].as_str().unwrap())
        .collect();
    assert_eq!(labels, ["coupon_rate"]);
    s.stop();
}

#[test]
fn formatting_symbols_and_definition() {
    let mut s = Server::start();
    let uri = format!(
        "file://{}/recipes/scratch.assort",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = "input  \"data/coop_members.csv\" key member_id\nfeatures visits_per_month ,basket_value\nkmeans k 3\nweight basket_value 2\n";
    open(&mut s, &uri, text);
    s.diagnostics(&uri);
    let f = s.request(
        "textDocument/formatting",
        json!({"textDocument": {"uri": uri}, "options": {"tabSize": 4, "insertSpaces": true}}),
    );
    let edit = &f["result"][0];
    assert_eq!(edit["newText"], "input \"data/coop_members.csv\" key member_id\nfeatures visits_per_month, basket_value\nkmeans k 3\nweight basket_value 2\n");
    let sym = s.request(
        "textDocument/documentSymbol",
        json!({"textDocument": {"uri": uri}}),
    );
    assert_eq!(sym["result"].as_array().unwrap().len(), 4);
    // basket_value in `weight` goes to where `features` names it.
    let d = s.request(
        "textDocument/definition",
        json!({"textDocument": {"uri": uri}, "position": pos(text, "weight basket_value", 9)}),
    );
    assert_eq!(d["result"]["range"]["start"], pos(text, "basket_value", 0));
    s.stop();
}

#[test]
fn a_burst_of_half_typed_edits_does_not_crash_the_server() {
    let mut s = Server::start();
    let (uri, text) = demo_uri();
    open(&mut s, &uri, "");
    s.diagnostics(&uri);
    for (version, end) in (1..text.len()).step_by(7).enumerate() {
        let partial = &text[..end];
        s.notify("textDocument/didChange", json!({"textDocument": {"uri": uri, "version": version + 2}, "contentChanges": [{"text": partial}]}));
    }
    // Requests anywhere in a half-typed recipe are answered.
    let h = s.request(
        "textDocument/hover",
        json!({"textDocument": {"uri": uri}, "position": {"line": 3, "character": 2}}),
    );
    assert!(h.get("error").is_none(), "{h}");
    let unknown = s.request("textDocument/rename", json!({"textDocument": {"uri": uri}, "position": {"line": 0, "character": 0}, "newName": "x"}));
    assert_eq!(unknown["error"]["code"], -32601);
    s.stop();
}
