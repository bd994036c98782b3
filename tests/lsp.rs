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
        Server::start_with(json!({"capabilities": {}}))
    }

    /// A server initialised with these parameters (client capabilities,
    /// workspace folder).
    fn start_with(init_params: Value) -> Server {
        Server::start_as(&[], init_params)
    }

    /// A server started as `assort lsp ARGS...`.
    fn start_as(args: &[&str], init_params: Value) -> Server {
        Server::start_in(args, init_params, &[])
    }

    /// [`Server::start_as`] with variables `env` set for the server.
    fn start_in(args: &[&str], init_params: Value, env: &[(&str, &str)]) -> Server {
        let mut child = Command::new(env!("CARGO_BIN_EXE_assort"))
            .arg("lsp")
            .args(args)
            .envs(env.iter().copied())
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
        let init = s.request("initialize", init_params);
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

    /// The next message that satisfies `wanted`.
    fn wait_for(&mut self, what: &str, wanted: impl Fn(&Value) -> bool) -> Value {
        loop {
            let m = self
                .messages
                .recv_timeout(Duration::from_secs(20))
                .unwrap_or_else(|_| panic!("never received {what}"));
            if wanted(&m) {
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
fn completion_after_database_offers_the_service_files_connections() {
    let dir = tempfile::tempdir().unwrap();
    let service = dir.path().join("pg_service.conf");
    std::fs::write(
        &service,
        "[coop]\nhost=/nowhere\n[warehouse]\nuser=reader\n",
    )
    .unwrap();
    let service = service.display().to_string();
    let mut s = Server::start_in(
        &[],
        json!({"capabilities": {}}),
        &[("PGSERVICEFILE", &service)],
    );
    let (uri, demo) = demo_uri();
    open(&mut s, &uri, &demo);
    s.diagnostics(&uri);
    let items = items_at_end(&mut s, "input \"members\" database ");
    let labels = labels_of(&items);
    assert_eq!(labels, ["coop", "warehouse"]);
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

// ---- Context-aware completion, quick fixes, following the data, hover on
// ---- values, semantic tokens: what an editor user meets (issue 12).

/// Completion items at the end of `text` (opened as the demo recipe, so its
/// paths read the demo data).
fn items_at_end(s: &mut Server, text: &str) -> Vec<Value> {
    let (uri, _) = demo_uri();
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 9}, "contentChanges": [{"text": text}]}),
    );
    let line = text.matches('\n').count();
    let character = text.len() - text.rfind('\n').map_or(0, |i| i + 1);
    let c = s.request(
        "textDocument/completion",
        json!({"textDocument": {"uri": uri}, "position": {"line": line, "character": character}}),
    );
    c["result"].as_array().unwrap().clone()
}

fn labels_of(items: &[Value]) -> Vec<&str> {
    items.iter().map(|i| i["label"].as_str().unwrap()).collect()
}

#[test]
fn completion_offers_only_what_the_checker_accepts_there() {
    let mut s = Server::start();
    let (uri, demo) = demo_uri();
    open(&mut s, &uri, &demo);
    s.diagnostics(&uri);
    let with = |line: &str| format!("{demo}{line}");

    let features = items_at_end(&mut s, &with("features "));
    let labels = labels_of(&features);
    assert!(labels.contains(&"visits_per_month"), "{labels:?}");
    assert!(!labels.contains(&"member_id"), "the key: {labels:?}");
    assert!(
        !labels.contains(&"home_branch"),
        "a text column: {labels:?}"
    );
    let visits = features
        .iter()
        .find(|i| i["label"] == "visits_per_month")
        .unwrap();
    assert_eq!(visits["kind"], 5, "a field");
    assert!(
        visits["detail"]
            .as_str()
            .unwrap()
            .starts_with("numeric column: min "),
        "{visits}"
    );

    assert_eq!(
        labels_of(&items_at_end(&mut s, &with("categories "))),
        ["home_branch"]
    );
    let kmeans = items_at_end(&mut s, &with("kmeans k 2..8 "));
    assert!(!labels_of(&kmeans).contains(&"k"), "k is given");
    assert!(labels_of(&kmeans).contains(&"restarts"));
    assert_eq!(
        labels_of(&items_at_end(&mut s, &with("transform basket_value "))),
        ["clip", "log", "log1p", "sqrt"]
    );
    let save = items_at_end(&mut s, &with("save "));
    let tree = save.iter().find(|i| i["label"] == "tree").unwrap();
    assert!(
        tree["detail"].as_str().unwrap().contains("Newick"),
        "{tree}"
    );

    // A word with a dash is replaced whole, from its start.
    let text = with("choose k by calinski-h");
    let c = items_at_end(&mut s, &text);
    assert_eq!(labels_of(&c), ["calinski-harabasz"]);
    let line = text.matches('\n').count();
    assert_eq!(
        c[0]["textEdit"]["range"]["start"],
        json!({"line": line, "character": "choose k by ".len()})
    );
    assert_eq!(c[0]["textEdit"]["newText"], "calinski-harabasz");

    // Quoted paths complete relative to the recipe's folder.
    let text = with("validate against \"data/coop_members_p");
    let c = items_at_end(&mut s, &text);
    assert_eq!(labels_of(&c), ["data/coop_members_planted.csv"]);
    assert_eq!(
        c[0]["textEdit"]["range"]["start"],
        json!({"line": line, "character": "validate against \"".len()})
    );
    assert_eq!(c[0]["kind"], 17, "a file");
    s.stop();
}

/// A folder holding a small members file whose `basket_value` has a gap.
fn small_case() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let mut csv = String::from("member_id,visits_per_month,basket_value,branch\n");
    for i in 0..40 {
        let basket = if i == 7 {
            String::new()
        } else {
            format!("{}", 20 + (i * 7) % 50)
        };
        let branch = ["north", "harbour", "old town"][i % 3];
        csv.push_str(&format!("M{i},{}.5,{basket},{branch}\n", i % 9));
    }
    std::fs::write(dir.path().join("members.csv"), csv).unwrap();
    dir
}

fn uri_of(dir: &tempfile::TempDir, name: &str) -> String {
    format!("file://{}", dir.path().join(name).display())
}

/// The quick fixes offered for the diagnostic with `code`.
fn fixes_for(s: &mut Server, uri: &str, diags: &[Value], code: &str) -> Vec<Value> {
    let d = diags
        .iter()
        .find(|d| d["code"] == code)
        .unwrap_or_else(|| panic!("no {code} in {diags:?}"));
    let r = s.request(
        "textDocument/codeAction",
        json!({"textDocument": {"uri": uri}, "range": d["range"], "context": {"diagnostics": [d]}}),
    );
    r["result"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|a| a["diagnostics"][0]["code"] == code)
        .cloned()
        .collect()
}

fn edit_of(action: &Value, uri: &str) -> (Value, String) {
    let e = &action["edit"]["changes"][uri][0];
    (
        e["range"].clone(),
        e["newText"].as_str().unwrap().to_string(),
    )
}

#[test]
fn every_suggestion_is_a_quick_fix_and_applying_them_clears_the_errors() {
    let dir = small_case();
    let uri = uri_of(&dir, "fix.assort");
    let text = "input \"members.csv\" key member_id\nfeatures vists_per_month, basket_value\nreshape basket_value log1p\nscale zscor\nkmeans k 2 restart 5\n";
    let mut s = Server::start();
    open(&mut s, &uri, text);
    let diags = s.diagnostics(&uri);

    let column = fixes_for(&mut s, &uri, &diags, "assort::unknown_column");
    assert_eq!(
        column[0]["title"],
        "replace `vists_per_month` with `visits_per_month`"
    );
    assert_eq!(column[0]["kind"], "quickfix");
    assert_eq!(column[0]["isPreferred"], true);
    assert_eq!(
        edit_of(&column[0], &uri),
        (
            json!({"start": pos(text, "vists", 0), "end": pos(text, "vists_per_month", 15)}),
            "visits_per_month".to_string()
        )
    );
    let statement = fixes_for(&mut s, &uri, &diags, "assort::unknown_statement");
    assert_eq!(edit_of(&statement[0], &uri).1, "transform");
    let option = fixes_for(&mut s, &uri, &diags, "assort::unknown_option");
    assert_eq!(edit_of(&option[0], &uri).1, "restarts");
    let word = diags
        .iter()
        .find(|d| d["message"].as_str().unwrap().contains("zscor"))
        .unwrap_or_else(|| panic!("{diags:?}"))["code"]
        .as_str()
        .unwrap()
        .to_string();
    let word = fixes_for(&mut s, &uri, &diags, &word);
    assert_eq!(edit_of(&word[0], &uri).1, "zscore");

    // Applying every preferred fix (from the last in the text to the
    // first, so the earlier positions still hold) leaves a recipe whose
    // only remaining problem is the gap, which has fixes of its own.
    let mut fixed = apply_first(text, &uri, &[column, statement, option, word]);
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": fixed}]}),
    );
    let diags = s.diagnostics(&uri);
    assert_eq!(diags.len(), 1, "{fixed}\n{diags:?}");
    let gaps = fixes_for(&mut s, &uri, &diags, "assort::gaps_without_rule");
    let titles: Vec<&str> = gaps.iter().map(|a| a["title"].as_str().unwrap()).collect();
    assert_eq!(
        titles,
        [
            "add `missing fill median for basket_value`",
            "add `missing drop for basket_value`"
        ]
    );
    // The rule goes on the line after the statement that names the column.
    let (range, new) = edit_of(&gaps[0], &uri);
    assert_eq!(range["start"], json!({"line": 2, "character": 0}));
    let start = offset(&fixed, &range["start"]);
    fixed.insert_str(start, &new);
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 3}, "contentChanges": [{"text": fixed}]}),
    );
    assert!(s.diagnostics(&uri).is_empty(), "{fixed}");
    s.stop();
}

/// Applies every edit of the first (preferred) fix of each action list.
fn apply_first(text: &str, uri: &str, fixes: &[Vec<Value>]) -> String {
    let mut edits: Vec<(usize, usize, String)> = fixes
        .iter()
        .flat_map(|a| a[0]["edit"]["changes"][uri].as_array().unwrap().clone())
        .map(|e| {
            (
                offset(text, &e["range"]["start"]),
                offset(text, &e["range"]["end"]),
                e["newText"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    edits.sort_by_key(|e| std::cmp::Reverse(e.0));
    let mut out = text.to_string();
    for (start, end, new) in edits {
        out.replace_range(start..end, &new);
    }
    out
}

#[test]
fn fixes_for_separators_decimal_marks_text_features_rules_and_distances() {
    let dir = small_case();
    let csv = std::fs::read_to_string(dir.path().join("members.csv")).unwrap();
    // The same members written the continental way.
    let semi = csv.replace(',', ";").replace(".5;", ",5;");
    std::fs::write(dir.path().join("semi.csv"), semi).unwrap();
    let mut s = Server::start();

    // Read with the wrong separator, then with the wrong decimal mark.
    let uri = uri_of(&dir, "semi.assort");
    let text = "input \"semi.csv\" key member_id\nfeatures visits_per_month\nkmeans k 2\n";
    open(&mut s, &uri, text);
    let diags = s.diagnostics(&uri);
    let code = diags[0]["code"].as_str().unwrap().to_string();
    let sep = fixes_for(&mut s, &uri, &diags, &code);
    assert_eq!(sep[0]["title"], "add `separator \";\"` to `input`");
    let text = apply_first(text, &uri, &[sep]);
    assert!(
        text.starts_with("input \"semi.csv\" key member_id separator \";\"\n"),
        "{text}"
    );
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": text}]}),
    );
    let diags = s.diagnostics(&uri);
    let dec = fixes_for(&mut s, &uri, &diags, "assort::not_a_number");
    assert_eq!(dec[0]["title"], "add `decimal \",\"` to `input`");
    let text = apply_first(&text, &uri, &[dec]);
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 3}, "contentChanges": [{"text": text}]}),
    );
    assert!(s.diagnostics(&uri).is_empty(), "{text}");

    // A text column among the features, a weight for a column that is not
    // one, a linkage that needs Euclidean distances.
    let uri = uri_of(&dir, "mixed.assort");
    let text = "input \"members.csv\" key member_id\nfeatures visits_per_month, branch\nweight basket_value 2\nmissing fill median\ntree linkage ward distance manhattan k 2..3\n";
    open(&mut s, &uri, text);
    let diags = s.diagnostics(&uri);
    let moved = fixes_for(&mut s, &uri, &diags, "assort::text_feature");
    assert_eq!(moved[0]["title"], "move `branch` to `categories`");
    let euclid = fixes_for(&mut s, &uri, &diags, "assort::needs_euclidean");
    assert_eq!(edit_of(&euclid[0], &uri).1, "euclidean");
    let fixed = apply_first(text, &uri, &[moved, euclid]);
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": fixed}]}),
    );
    // With the features mended, the weight's column is judged.
    let diags = s.diagnostics(&uri);
    let added = fixes_for(&mut s, &uri, &diags, "assort::not_a_feature");
    assert_eq!(added[0]["title"], "add `basket_value` to `features`");
    let fixed = apply_first(&fixed, &uri, &[added]);
    assert_eq!(
        fixed,
        "input \"members.csv\" key member_id\nfeatures visits_per_month, basket_value\ncategories branch\nweight basket_value 2\nmissing fill median\ntree linkage ward distance euclidean k 2..3\n"
    );
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 3}, "contentChanges": [{"text": fixed}]}),
    );
    let after = s.diagnostics(&uri);
    assert!(after.iter().all(|d| d["severity"] != 1), "{after:?}");
    s.stop();
}

/// A recipe that reads a file outside its folder is refused by a server
/// started plainly, with advice that names the server's own
/// `--allow-dir`, and accepted by one started with `--allow-dir` that
/// folder; an absolute path inside the recipe's folder is accepted with a
/// warning whose quick fix writes it relative to the folder.
#[test]
fn folders_are_allowed_in_the_server_command_and_absolute_paths_made_relative() {
    let data = small_case();
    let elsewhere = tempfile::tempdir().unwrap();
    let uri = uri_of(&elsewhere, "outside.assort");
    let members = data.path().join("members.csv");
    let text = format!(
        "input \"{}\" key member_id\nfeatures visits_per_month\nkmeans k 2\n",
        members.display()
    );
    let mut plain = Server::start();
    open(&mut plain, &uri, &text);
    let diags = plain.diagnostics(&uri);
    let outside = diags.iter().find(|d| d["code"] == "assort::path_outside");
    let message = outside.unwrap_or_else(|| panic!("{diags:?}"))["message"].to_string();
    assert!(
        message.contains("assort lsp --allow-dir FOLDER"),
        "{message}"
    );
    plain.stop();

    let folder = data.path().to_str().unwrap();
    let mut allowing = Server::start_as(&["--allow-dir", folder], json!({"capabilities": {}}));
    open(&mut allowing, &uri, &text);
    let diags = allowing.diagnostics(&uri);
    assert!(diags.is_empty(), "{diags:?}");

    let uri = uri_of(&data, "inside.assort");
    open(&mut allowing, &uri, &text);
    let diags = allowing.diagnostics(&uri);
    assert_eq!(diags.len(), 1, "{diags:?}");
    assert_eq!(diags[0]["severity"], 2, "a warning");
    let fix = fixes_for(&mut allowing, &uri, &diags, "assort::absolute_path");
    assert_eq!(
        fix[0]["title"],
        "write `members.csv`, relative to the recipe's folder"
    );
    let fixed = apply_first(&text, &uri, &[fix]);
    assert!(
        fixed.starts_with("input \"members.csv\" key member_id\n"),
        "{fixed}"
    );
    allowing.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": fixed}]}),
    );
    assert!(allowing.diagnostics(&uri).is_empty());
    allowing.stop();
}

/// The byte offset of an LSP position (ASCII text).
fn offset(text: &str, p: &Value) -> usize {
    let line = p["line"].as_u64().unwrap() as usize;
    let start: usize = text.split_inclusive('\n').take(line).map(str::len).sum();
    start + p["character"].as_u64().unwrap() as usize
}

#[test]
fn a_tree_over_too_many_records_gets_micro_500_as_a_fix() {
    let dir = tempfile::tempdir().unwrap();
    // More records than an average-linkage tree's distance matrix allows
    // (23,170 in 2 GiB).
    let mut csv = String::from("id,x\n");
    for i in 0..23_500 {
        csv.push_str(&format!("r{i},{}\n", i % 97));
    }
    std::fs::write(dir.path().join("big.csv"), csv).unwrap();
    let uri = uri_of(&dir, "big.assort");
    let text = "input \"big.csv\" key id\nfeatures x\ntree linkage average k 2..4  # try it\n";
    let mut s = Server::start();
    open(&mut s, &uri, text);
    let diags = s.diagnostics(&uri);
    let micro = fixes_for(&mut s, &uri, &diags, "assort::large_tree");
    let (range, new) = edit_of(&micro[0], &uri);
    assert_eq!(new, " micro 500");
    // At the end of the statement, before its comment.
    assert_eq!(range["start"], pos(text, "  # try it", 0));
    let mut fixed = text.to_string();
    fixed.insert_str(offset(text, &range["start"]), &new);
    s.notify(
        "textDocument/didChange",
        json!({"textDocument": {"uri": uri, "version": 2}, "contentChanges": [{"text": fixed}]}),
    );
    let after = s.diagnostics(&uri);
    assert!(
        after.iter().all(|d| d["code"] != "assort::large_tree"),
        "{after:?}"
    );
    s.stop();
}

/// A recipe over `members.csv` that uses its `basket_value` column.
const FOLLOWED: &str = "input \"members.csv\" key member_id\nfeatures visits_per_month, basket_value\nmissing fill median\nkmeans k 2\n";

/// Opens [`FOLLOWED`] at `uri` (it checks clean), then renames
/// `basket_value` in the data file on disk; the file as it was.
fn open_then_rename_a_column(s: &mut Server, dir: &tempfile::TempDir, uri: &str) -> String {
    open(s, uri, FOLLOWED);
    assert!(s.diagnostics(uri).is_empty());
    let csv = std::fs::read_to_string(dir.path().join("members.csv")).unwrap();
    std::fs::write(
        dir.path().join("members.csv"),
        csv.replacen("basket_value", "basket_total", 1),
    )
    .unwrap();
    csv
}

#[test]
fn a_data_file_changed_on_disk_is_checked_again_while_the_client_keeps_asking() {
    // A client that does not watch files and sends a request every half
    // second: the server never has two quiet seconds, and before it looked
    // only then, so the change was never seen.
    let dir = small_case();
    let uri = uri_of(&dir, "busy.assort");
    let text = FOLLOWED;
    let mut s = Server::start();
    open_then_rename_a_column(&mut s, &dir, &uri);
    let changed = std::time::Instant::now();
    let mut seen = None;
    for id in 1000..1020 {
        s.send(
            json!({"jsonrpc": "2.0", "id": id, "method": "textDocument/hover",
            "params": {"textDocument": {"uri": uri}, "position": pos(text, "kmeans", 1)}}),
        );
        let until = std::time::Instant::now() + Duration::from_millis(500);
        while let Some(left) = until.checked_duration_since(std::time::Instant::now()) {
            let Ok(m) = s.messages.recv_timeout(left) else {
                break;
            };
            let renamed = m["method"] == "textDocument/publishDiagnostics"
                && m["params"]["diagnostics"]
                    .to_string()
                    .contains("basket_value");
            if renamed && seen.is_none() {
                seen = Some(changed.elapsed());
            }
        }
        if seen.is_some() {
            break;
        }
    }
    let seen = seen.expect("the change was never checked while the client kept asking");
    // The server looks every second; 5 s leaves room for a busy machine.
    assert!(seen < Duration::from_secs(5), "{seen:?}");
    s.stop();
}

#[test]
fn a_data_file_changed_on_disk_is_checked_again_without_a_keystroke() {
    let dir = small_case();
    let uri = uri_of(&dir, "follow.assort");
    let text = FOLLOWED;
    // A client that does not watch files: the server looks by itself.
    let mut s = Server::start();
    let csv = open_then_rename_a_column(&mut s, &dir, &uri);
    let diags = s.diagnostics(&uri);
    assert!(
        diags.iter().any(|d| d["code"] == "assort::unknown_column"
            && d["message"].as_str().unwrap().contains("basket_value")),
        "{diags:?}"
    );
    s.stop();

    // A client that watches files for the server: the server asks it to,
    // and re-checks when told of a change.
    let mut s = Server::start_with(
        json!({"capabilities": {"workspace": {"didChangeWatchedFiles": {"dynamicRegistration": true}}}}),
    );
    let register = s.wait_for("a watch registration", |m| {
        m["method"] == "client/registerCapability"
    });
    assert_eq!(
        register["params"]["registrations"][0]["method"],
        "workspace/didChangeWatchedFiles"
    );
    s.send(json!({"jsonrpc": "2.0", "id": register["id"], "result": null}));
    open(&mut s, &uri, text);
    assert!(!s.diagnostics(&uri).is_empty(), "still renamed");
    std::fs::write(dir.path().join("members.csv"), &csv).unwrap();
    s.notify(
        "workspace/didChangeWatchedFiles",
        json!({"changes": [{"uri": uri_of(&dir, "members.csv"), "type": 2}]}),
    );
    assert!(s.diagnostics(&uri).is_empty());
    s.stop();
}

#[test]
fn closing_a_recipe_clears_its_diagnostics() {
    let dir = small_case();
    let uri = uri_of(&dir, "closed.assort");
    let mut s = Server::start();
    open(
        &mut s,
        &uri,
        "input \"members.csv\" key member_id\nfeatures nope\n",
    );
    assert!(!s.diagnostics(&uri).is_empty());
    s.notify(
        "textDocument/didClose",
        json!({"textDocument": {"uri": uri}}),
    );
    assert!(s.diagnostics(&uri).is_empty());
    s.stop();
}

#[test]
fn an_untitled_recipe_resolves_paths_against_the_workspace_folder() {
    let dir = small_case();
    let mut s = Server::start_with(json!({"capabilities": {}, "rootUri": uri_of(&dir, "")}));
    let uri = "untitled:Untitled-1";
    open(
        &mut s,
        uri,
        "input \"members.csv\" key member_id\nfeatures visits_per_mnth\nkmeans k 2\n",
    );
    let diags = s.diagnostics(uri);
    // The file was found and its header read: only the misspelt column.
    let codes: Vec<&str> = diags.iter().map(|d| d["code"].as_str().unwrap()).collect();
    assert_eq!(codes, ["assort::unknown_column"], "{diags:?}");
    s.stop();
}

#[test]
fn hover_explains_the_values_analysts_ask_about() {
    let mut s = Server::start();
    let (uri, text) = demo_uri();
    let text = format!("{text}missing fill median for share_bulk\nsave report \"out/r.html\"\n");
    open(&mut s, &uri, &text);
    s.diagnostics(&uri);
    let mut hover = |needle: &str, shift: usize| -> String {
        let h = s.request(
            "textDocument/hover",
            json!({"textDocument": {"uri": uri}, "position": pos(&text, needle, shift)}),
        );
        h["result"]["contents"]["value"]
            .as_str()
            .unwrap_or("")
            .to_string()
    };
    for (needle, shift, expected) in [
        (
            "scale zscore",
            7,
            "**zscore** (in `scale`): subtracts the mean",
        ),
        ("log1p", 1, "**log1p** (in `transform`): log(1 + x)"),
        ("clip 0..", 1, "**clip** (in `transform`)"),
        ("fill median\n", 1, "**fill** (in `missing`)"),
        ("fill median for", 6, "**median** (in `missing`)"),
        (
            "by silhouette",
            4,
            "**silhouette** (a value of `by` in `choose`)",
        ),
        ("save assignments", 6, "**assignments** (in `save`)"),
        (
            "save report \"out/r",
            6,
            "**report** (in `save`): one self-contained HTML page",
        ),
    ] {
        let got = hover(needle, shift);
        assert!(got.starts_with(expected), "{needle}: {got}");
    }
    s.stop();
}

#[test]
fn semantic_tokens_colour_the_demo_recipe() {
    let mut s = Server::start();
    let (uri, text) = demo_uri();
    open(&mut s, &uri, &text);
    s.diagnostics(&uri);
    let r = s.request(
        "textDocument/semanticTokens/full",
        json!({"textDocument": {"uri": uri}}),
    );
    let data: Vec<u64> = r["result"]["data"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_u64().unwrap())
        .collect();
    assert_eq!(data.len() % 5, 0);
    // Decode (line, column, length, type) and read each token's text.
    let lines: Vec<&str> = text.lines().collect();
    let (mut line, mut col) = (0u64, 0u64);
    let mut tokens = Vec::new();
    for t in data.chunks(5) {
        if t[0] > 0 {
            col = 0;
        }
        line += t[0];
        col += t[1];
        let l = lines[line as usize];
        // Columns count UTF-16 units; the demo's characters (`€`) are one
        // unit each, so they count as chars.
        let text: String = l.chars().skip(col as usize).take(t[2] as usize).collect();
        tokens.push((text, t[3]));
    }
    // The legend's order: keyword, property, enumMember, variable,
    // number, string, comment.
    let kind_of = |w: &str| tokens.iter().find(|t| t.0 == w).map(|t| t.1);
    assert_eq!(
        tokens[0].1, 6,
        "the first line is a comment: {:?}",
        tokens[0]
    );
    assert_eq!(kind_of("recipe"), Some(0));
    assert_eq!(kind_of("\"data/coop_members.csv\""), Some(5));
    assert_eq!(kind_of("key"), Some(1));
    assert_eq!(kind_of("member_id"), Some(3));
    assert_eq!(kind_of("zscore"), Some(2));
    assert_eq!(kind_of("2..8"), Some(4));
    assert_eq!(kind_of("share_prepared"), Some(3), "on a continued line");
    assert_eq!(kind_of("\"€\""), Some(5), "after a wide character");
    assert_eq!(kind_of("tally"), Some(0));
    s.stop();
}

#[test]
fn a_level_spelt_otherwise_in_the_data_gets_no_fix_that_edits_the_recipe() {
    // The fault is in the data (`Mid` for `mid`): a quick fix replacing the
    // column name with the level would break the recipe.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("members.csv"),
        "member_id,visits,tier\nM1,1,low\nM2,2,Mid\nM3,3,high\nM4,4,low\n",
    )
    .unwrap();
    let mut s = Server::start();
    let uri = uri_of(&dir, "kinds.assort");
    let text = "input \"members.csv\" key member_id\nfeatures visits\nordered tier \"low\" < \"mid\" < \"high\"\nkmeans k 2\n";
    open(&mut s, &uri, text);
    let diags = s.diagnostics(&uri);
    let d = diags
        .iter()
        .find(|d| d["code"] == "assort::not_a_level")
        .unwrap_or_else(|| panic!("{diags:?}"));
    assert!(d["message"].as_str().unwrap().contains("line 3"), "{d}");
    assert!(
        fixes_for(&mut s, &uri, &diags, "assort::not_a_level").is_empty(),
        "no edit of the recipe mends the data"
    );
    s.stop();
}
