//! The language server (`assort lsp`, stdio): diagnostics on open and on
//! every change, hover help, completion in context, go to definition,
//! document symbols and formatting. A thin front end over the checker: the
//! loop only dispatches, the store keeps each open document's text, and
//! each feature is one handler. It answers every request, including on
//! half-typed statements; a request it does not know gets "method not
//! found", and a handler that fails answers with an error, never a crash.

mod convert;
mod handlers;

use crate::check::{self, CheckOptions, RecipeSource};
use lsp_server::{Connection, ErrorCode, Message, Notification, Request, Response};
use lsp_types::{
    CompletionOptions, HoverProviderCapability, InitializeResult, OneOf, PublishDiagnosticsParams,
    ServerCapabilities, ServerInfo, TextDocumentSyncCapability, TextDocumentSyncKind, Uri,
};
use std::collections::HashMap;
use std::path::PathBuf;

/// An open document.
struct Document {
    text: String,
    version: i32,
}

/// Open documents by URI.
#[derive(Default)]
struct Store {
    docs: HashMap<String, Document>,
}

/// Runs the server over standard input and output until the client exits.
pub fn serve() -> Result<(), String> {
    let (connection, threads) = Connection::stdio();
    let capabilities = ServerCapabilities {
        text_document_sync: Some(TextDocumentSyncCapability::Kind(TextDocumentSyncKind::FULL)),
        hover_provider: Some(HoverProviderCapability::Simple(true)),
        completion_provider: Some(CompletionOptions {
            trigger_characters: Some(vec![" ".into(), ",".into()]),
            ..Default::default()
        }),
        definition_provider: Some(OneOf::Left(true)),
        document_symbol_provider: Some(OneOf::Left(true)),
        document_formatting_provider: Some(OneOf::Left(true)),
        ..Default::default()
    };
    let init = InitializeResult {
        capabilities,
        server_info: Some(ServerInfo {
            name: "assort".into(),
            version: Some(env!("CARGO_PKG_VERSION").into()),
        }),
    };
    let init = serde_json::to_value(init).map_err(|e| e.to_string())?;
    let (id, _params) = connection.initialize_start().map_err(|e| e.to_string())?;
    connection
        .initialize_finish(id, init)
        .map_err(|e| e.to_string())?;
    main_loop(&connection)?;
    drop(connection);
    threads.join().map_err(|e| e.to_string())
}

fn main_loop(connection: &Connection) -> Result<(), String> {
    let mut store = Store::default();
    for message in &connection.receiver {
        match message {
            Message::Request(req) => {
                if connection
                    .handle_shutdown(&req)
                    .map_err(|e| e.to_string())?
                {
                    return Ok(());
                }
                let response = respond(&store, req);
                connection
                    .sender
                    .send(Message::Response(response))
                    .map_err(|e| e.to_string())?;
            }
            Message::Notification(note) => {
                if let Some(uri) = update(&mut store, &note) {
                    let published = publish(&store, &uri);
                    connection
                        .sender
                        .send(Message::Notification(published))
                        .map_err(|e| e.to_string())?;
                }
            }
            Message::Response(_) => {}
        }
    }
    Ok(())
}

/// Applies an open, change or close; returns the document to re-check.
fn update(store: &mut Store, note: &Notification) -> Option<String> {
    let p = &note.params;
    let uri = p["textDocument"]["uri"].as_str()?.to_string();
    let version = p["textDocument"]["version"].as_i64().unwrap_or(0) as i32;
    match note.method.as_str() {
        "textDocument/didOpen" => {
            let text = p["textDocument"]["text"].as_str()?.to_string();
            store.docs.insert(uri.clone(), Document { text, version });
        }
        "textDocument/didChange" => {
            // Full synchronisation: the last change holds the whole text.
            let text = p["contentChanges"].as_array()?.last()?["text"]
                .as_str()?
                .to_string();
            store.docs.insert(uri.clone(), Document { text, version });
        }
        "textDocument/didClose" => {
            store.docs.remove(&uri);
            return None;
        }
        _ => return None,
    }
    Some(uri)
}

/// The diagnostics of a document, as a notification.
fn publish(store: &Store, uri: &str) -> Notification {
    let diagnostics = store.docs.get(uri).map(|doc| {
        let checked = check::check_with(&source(uri, &doc.text), &CheckOptions::default());
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
/// paths are relative to.
fn source(uri: &str, text: &str) -> RecipeSource {
    RecipeSource {
        path: uri_path(uri),
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
        source: source(&uri, &doc.text),
    };
    let result = match (req.method.as_str(), position) {
        ("textDocument/hover", Some(p)) => serde_json::to_value(handlers::hover(&ctx, p)),
        ("textDocument/completion", Some(p)) => serde_json::to_value(handlers::completion(&ctx, p)),
        ("textDocument/definition", Some(p)) => serde_json::to_value(handlers::definition(&ctx, p)),
        ("textDocument/documentSymbol", _) => serde_json::to_value(handlers::symbols(&ctx)),
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
