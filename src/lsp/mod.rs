//! The language server (`assort lsp`, stdio): diagnostics on open, on
//! every change and when a data file a recipe reads changes on disk; hover
//! help on every word, completion in context with replacement ranges,
//! quick fixes, semantic tokens, go to definition, document symbols and
//! formatting. A thin front end over the checker: the loop only
//! dispatches, the store keeps each open document's text and the data
//! files it reads, and each feature is one handler. It answers every request, including on
//! half-typed statements; a request it does not know gets "method not
//! found", and a handler that fails answers with an error, never a crash.

mod convert;
mod handlers;
mod semantic;

use crate::check::{self, CheckOptions, RecipeSource};
use lsp_server::{Connection, ErrorCode, Message, Notification, Request, Response};
use lsp_types::{
    CodeActionKind, CodeActionOptions, CodeActionProviderCapability, CompletionOptions,
    HoverProviderCapability, InitializeResult, OneOf, PublishDiagnosticsParams, SaveOptions,
    SemanticTokensFullOptions, SemanticTokensOptions, ServerCapabilities, ServerInfo,
    TextDocumentSyncCapability, TextDocumentSyncKind, TextDocumentSyncOptions,
    TextDocumentSyncSaveOptions, Uri,
};
use serde_json::{json, Value};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant, SystemTime};

/// How often the data files of open recipes are looked at, for clients
/// that do not watch files for the server: on a clock, however busy the
/// client is, so a change is seen within this and one check.
const DATA_POLL: Duration = Duration::from_secs(1);

/// A file's size and modification time, to notice that it changed.
type Stamp = Option<(u64, Option<SystemTime>)>;

fn stamp(path: &Path) -> Stamp {
    std::fs::metadata(path)
        .ok()
        .map(|m| (m.len(), m.modified().ok()))
}

/// An open document.
struct Document {
    text: String,
    version: i32,
    /// The data files it reads, as they were when it was last checked.
    reads: Vec<(PathBuf, Stamp)>,
}

/// Open documents by URI, the workspace folder, and what the server was
/// started with.
#[derive(Default)]
struct Store {
    docs: HashMap<String, Document>,
    /// Where a recipe not yet saved (an `untitled:` URI) resolves paths.
    root: Option<PathBuf>,
    /// The folders besides each recipe's own that recipes may touch
    /// (`assort lsp --allow-dir`).
    options: CheckOptions,
}

/// Runs the server over standard input and output until the client exits;
/// recipes are checked with `options`.
pub fn serve(options: CheckOptions) -> Result<(), String> {
    let (connection, threads) = Connection::stdio();
    let init = InitializeResult {
        capabilities: capabilities(),
        server_info: Some(ServerInfo {
            name: "assort".into(),
            version: Some(env!("CARGO_PKG_VERSION").into()),
        }),
    };
    let init = serde_json::to_value(init).map_err(|e| e.to_string())?;
    let (id, params) = connection.initialize_start().map_err(|e| e.to_string())?;
    connection
        .initialize_finish(id, init)
        .map_err(|e| e.to_string())?;
    let mut store = Store {
        root: workspace_root(&params),
        options,
        ..Store::default()
    };
    if params["capabilities"]["workspace"]["didChangeWatchedFiles"]["dynamicRegistration"]
        .as_bool()
        .unwrap_or(false)
    {
        watch_data_files(&connection)?;
    }
    main_loop(&connection, &mut store)?;
    drop(connection);
    threads.join().map_err(|e| e.to_string())
}

fn capabilities() -> ServerCapabilities {
    ServerCapabilities {
        text_document_sync: Some(TextDocumentSyncCapability::Options(
            TextDocumentSyncOptions {
                open_close: Some(true),
                change: Some(TextDocumentSyncKind::FULL),
                save: Some(TextDocumentSyncSaveOptions::SaveOptions(SaveOptions {
                    include_text: Some(false),
                })),
                ..Default::default()
            },
        )),
        hover_provider: Some(HoverProviderCapability::Simple(true)),
        completion_provider: Some(CompletionOptions {
            trigger_characters: Some(vec![" ".into(), ",".into(), "\"".into(), "/".into()]),
            ..Default::default()
        }),
        code_action_provider: Some(CodeActionProviderCapability::Options(CodeActionOptions {
            code_action_kinds: Some(vec![CodeActionKind::QUICKFIX]),
            ..Default::default()
        })),
        semantic_tokens_provider: Some(
            SemanticTokensOptions {
                legend: semantic::legend(),
                full: Some(SemanticTokensFullOptions::Bool(true)),
                ..Default::default()
            }
            .into(),
        ),
        definition_provider: Some(OneOf::Left(true)),
        document_symbol_provider: Some(OneOf::Left(true)),
        document_formatting_provider: Some(OneOf::Left(true)),
        ..Default::default()
    }
}

/// The workspace folder the client named, if any.
fn workspace_root(params: &Value) -> Option<PathBuf> {
    params["workspaceFolders"][0]["uri"]
        .as_str()
        .or_else(|| params["rootUri"].as_str())
        .map(uri_path)
        .or_else(|| params["rootPath"].as_str().map(PathBuf::from))
}

/// Asks the client to report changes to data files (CSV and the like, and
/// models), so a renamed column is reported without a keystroke.
fn watch_data_files(connection: &Connection) -> Result<(), String> {
    let params = json!({"registrations": [{
        "id": "assort-data-files",
        "method": "workspace/didChangeWatchedFiles",
        "registerOptions": {"watchers": [{"globPattern": "**/*.{csv,tsv,txt,json}"}]}
    }]});
    let request = Request::new(
        "assort-watch".to_string().into(),
        "client/registerCapability".into(),
        params,
    );
    connection
        .sender
        .send(Message::Request(request))
        .map_err(|e| e.to_string())
}

fn main_loop(connection: &Connection, store: &mut Store) -> Result<(), String> {
    let send = |m: Message| connection.sender.send(m).map_err(|e| e.to_string());
    let mut next_look = Instant::now() + DATA_POLL;
    loop {
        let wait = next_look.saturating_duration_since(Instant::now());
        let message = match connection.receiver.recv_timeout(wait) {
            Ok(m) => Some(m),
            Err(e) if e.is_timeout() => None,
            Err(_) => return Ok(()),
        };
        // The fallback for clients that do not watch files, on time even
        // while messages keep coming (a hover every second would otherwise
        // never leave the server a quiet moment to look).
        if Instant::now() >= next_look {
            for uri in store.changed_data() {
                send(Message::Notification(publish(store, &uri)))?;
            }
            next_look = Instant::now() + DATA_POLL;
        }
        let Some(message) = message else {
            continue;
        };
        match message {
            Message::Request(req) => {
                if connection
                    .handle_shutdown(&req)
                    .map_err(|e| e.to_string())?
                {
                    return Ok(());
                }
                send(Message::Response(respond(store, req)))?;
            }
            Message::Notification(note) => {
                for uri in update(store, &note) {
                    send(Message::Notification(publish(store, &uri)))?;
                }
            }
            Message::Response(_) => {}
        }
    }
}

impl Store {
    /// Open documents whose data files changed since they were checked.
    fn changed_data(&self) -> Vec<String> {
        self.docs
            .iter()
            .filter(|(_, d)| d.reads.iter().any(|(p, s)| stamp(p) != *s))
            .map(|(uri, _)| uri.clone())
            .collect()
    }
}

/// Applies a notification; returns the documents to publish diagnostics
/// for (a closed document's are published empty, which clears them).
fn update(store: &mut Store, note: &Notification) -> Vec<String> {
    let p = &note.params;
    if note.method == "workspace/didChangeWatchedFiles" {
        return store.docs.keys().cloned().collect();
    }
    let Some(uri) = p["textDocument"]["uri"].as_str().map(str::to_string) else {
        return Vec::new();
    };
    let version = p["textDocument"]["version"].as_i64().unwrap_or(0) as i32;
    let text = match note.method.as_str() {
        "textDocument/didOpen" => p["textDocument"]["text"].as_str(),
        // Full synchronisation: the last change holds the whole text.
        "textDocument/didChange" => p["contentChanges"]
            .as_array()
            .and_then(|c| c.last())
            .and_then(|c| c["text"].as_str()),
        // Saving is a moment to look at the data again.
        "textDocument/didSave" => return vec![uri],
        "textDocument/didClose" => {
            store.docs.remove(&uri);
            return vec![uri];
        }
        _ => None,
    };
    let Some(text) = text else {
        return Vec::new();
    };
    store.docs.insert(
        uri.clone(),
        Document {
            text: text.to_string(),
            version,
            reads: Vec::new(),
        },
    );
    vec![uri]
}

/// The diagnostics of a document, as a notification (empty for a document
/// no longer open); notes the data files it read.
fn publish(store: &mut Store, uri: &str) -> Notification {
    let root = store.root.clone();
    let options = &store.options;
    let diagnostics = store.docs.get_mut(uri).map(|doc| {
        let source = source(uri, &doc.text, root.as_deref());
        let checked = check::check_with(&source, options);
        doc.reads = check::shape::data_files(&doc.text, &source.path)
            .into_iter()
            .map(|p| {
                let s = stamp(&p);
                (p, s)
            })
            .collect();
        let index = convert::LineIndex::new(&doc.text);
        checked
            .problems
            .iter()
            .map(|p| convert::diagnostic(p, &index))
            .collect::<Vec<_>>()
    });
    let params = PublishDiagnosticsParams {
        uri: uri
            .parse::<Uri>()
            .unwrap_or_else(|_| "file:///".parse().expect("a constant, valid URI")),
        diagnostics: diagnostics.unwrap_or_default(),
        version: store.docs.get(uri).map(|d| d.version),
    };
    Notification::new("textDocument/publishDiagnostics".into(), params)
}

/// A document as the checker sees it: its file path gives the folder its
/// paths are relative to; a document not yet saved lives in the workspace
/// folder (or the server's working folder).
fn source(uri: &str, text: &str, root: Option<&Path>) -> RecipeSource {
    let path = if uri.starts_with("file:") {
        uri_path(uri)
    } else {
        root.map_or_else(|| PathBuf::from("."), Path::to_path_buf)
            .join("untitled.assort")
    };
    RecipeSource {
        path,
        text: text.to_string(),
    }
}

/// The file path of a `file:` URI, percent-decoded.
fn uri_path(uri: &str) -> PathBuf {
    let raw = uri.strip_prefix("file://").unwrap_or(uri);
    let bytes = raw.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] == b'%' && i + 2 < bytes.len() {
            if let Ok(b) = u8::from_str_radix(&raw[i + 1..i + 3], 16) {
                out.push(b);
                i += 3;
                continue;
            }
        }
        out.push(bytes[i]);
        i += 1;
    }
    PathBuf::from(String::from_utf8_lossy(&out).into_owned())
}

fn respond(store: &Store, req: Request) -> Response {
    let uri = req.params["textDocument"]["uri"]
        .as_str()
        .unwrap_or("")
        .to_string();
    let Some(doc) = store.docs.get(&uri) else {
        return match req.method.as_str() {
            "textDocument/hover"
            | "textDocument/completion"
            | "textDocument/codeAction"
            | "textDocument/semanticTokens/full"
            | "textDocument/definition"
            | "textDocument/documentSymbol"
            | "textDocument/formatting" => Response::new_ok(req.id, serde_json::Value::Null),
            _ => Response::new_err(
                req.id,
                ErrorCode::MethodNotFound as i32,
                format!("assort does not answer `{}`", req.method),
            ),
        };
    };
    let position =
        serde_json::from_value::<lsp_types::Position>(req.params["position"].clone()).ok();
    let ctx = handlers::Context {
        uri: &uri,
        text: &doc.text,
        source: source(&uri, &doc.text, store.root.as_deref()),
        options: &store.options,
    };
    let result = match (req.method.as_str(), position) {
        ("textDocument/hover", Some(p)) => serde_json::to_value(handlers::hover(&ctx, p)),
        ("textDocument/completion", Some(p)) => serde_json::to_value(handlers::completion(&ctx, p)),
        ("textDocument/definition", Some(p)) => serde_json::to_value(handlers::definition(&ctx, p)),
        ("textDocument/documentSymbol", _) => serde_json::to_value(handlers::symbols(&ctx)),
        ("textDocument/codeAction", _) => {
            match serde_json::from_value::<lsp_types::Range>(req.params["range"].clone()) {
                Ok(range) => serde_json::to_value(handlers::code_actions(&ctx, range)),
                Err(e) => Err(e),
            }
        }
        ("textDocument/semanticTokens/full", _) => serde_json::to_value(semantic::tokens(ctx.text)),
        ("textDocument/formatting", _) => serde_json::to_value(handlers::formatting(&ctx)),
        (m, _) => {
            return Response::new_err(
                req.id,
                ErrorCode::MethodNotFound as i32,
                format!("assort does not answer `{m}`"),
            )
        }
    };
    match result {
        Ok(v) => Response::new_ok(req.id, v),
        Err(e) => Response::new_err(req.id, ErrorCode::InternalError as i32, e.to_string()),
    }
}
