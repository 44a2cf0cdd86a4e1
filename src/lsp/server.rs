//! The message loop: the handshake, open documents and their analyses,
//! publishing diagnostics, and handing each request to its handler with
//! a guard against panics.

use super::analysis::Analysis;
use super::convert::{path_to_uri, uri_to_path};
use super::document::Document;
use super::{diagnostics, outline};
use crossbeam_channel::{Receiver, RecvTimeoutError, Sender};
use lsp_server::{Connection, ErrorCode, Message, Notification, Request, RequestId, Response};
use lsp_types::notification::{
    Cancel, DidChangeTextDocument, DidChangeWatchedFiles, DidCloseTextDocument,
    DidOpenTextDocument, DidSaveTextDocument, Notification as _, PublishDiagnostics,
};
use lsp_types::{
    CodeActionKind, CodeActionOptions, CodeActionProviderCapability, CompletionOptions,
    DidChangeTextDocumentParams, DidChangeWatchedFilesParams, DidCloseTextDocumentParams,
    DidOpenTextDocumentParams, HoverProviderCapability, OneOf, PositionEncodingKind,
    PublishDiagnosticsParams, RenameOptions, SemanticTokensFullOptions, SemanticTokensOptions,
    SemanticTokensServerCapabilities, ServerCapabilities, TextDocumentSyncCapability,
    TextDocumentSyncKind, TextDocumentSyncOptions, Uri, WorkDoneProgressOptions,
};
use std::collections::{BTreeMap, BTreeSet, HashMap, VecDeque};
use std::path::{Path, PathBuf};

/// How long a change waits for the next one before it is analysed.
const BURST_WAIT: std::time::Duration = std::time::Duration::from_millis(2);

/// Runs the server on standard input and output until the client's
/// `exit`. Returns whether the exit followed a `shutdown` (the protocol's
/// exit status 0) or the reason the connection failed.
pub fn run() -> Result<bool, String> {
    let (connection, io_threads) = Connection::stdio();
    match serve(&connection) {
        Ok(orderly) => {
            drop(connection);
            io_threads.join().map_err(|e| e.to_string())?;
            Ok(orderly)
        }
        // The reader stopped: the input ended or was not the protocol; its
        // own error says which.
        Err(e) if e.channel_is_disconnected() => {
            drop(connection);
            match io_threads.join() {
                Ok(()) => Err("the input ended before the client's `initialize`".to_string()),
                Err(io) => Err(format!(
                    "the input is not Language Server Protocol messages: {io}"
                )),
            }
        }
        // The reader may still be waiting on standard input: not joined.
        Err(e) => Err(e.to_string()),
    }
}

/// What the server tells the client it can do.
fn capabilities() -> ServerCapabilities {
    ServerCapabilities {
        position_encoding: Some(PositionEncodingKind::UTF16),
        text_document_sync: Some(TextDocumentSyncCapability::Options(
            TextDocumentSyncOptions {
                open_close: Some(true),
                change: Some(TextDocumentSyncKind::INCREMENTAL),
                ..TextDocumentSyncOptions::default()
            },
        )),
        hover_provider: Some(HoverProviderCapability::Simple(true)),
        completion_provider: Some(CompletionOptions {
            trigger_characters: Some(vec![" ".to_string(), "/".to_string()]),
            ..CompletionOptions::default()
        }),
        definition_provider: Some(OneOf::Left(true)),
        references_provider: Some(OneOf::Left(true)),
        rename_provider: Some(OneOf::Right(RenameOptions {
            prepare_provider: Some(true),
            work_done_progress_options: WorkDoneProgressOptions::default(),
        })),
        document_formatting_provider: Some(OneOf::Left(true)),
        document_range_formatting_provider: Some(OneOf::Left(true)),
        document_symbol_provider: Some(OneOf::Left(true)),
        code_action_provider: Some(CodeActionProviderCapability::Options(CodeActionOptions {
            code_action_kinds: Some(vec![CodeActionKind::QUICKFIX]),
            ..CodeActionOptions::default()
        })),
        semantic_tokens_provider: Some(SemanticTokensServerCapabilities::SemanticTokensOptions(
            SemanticTokensOptions {
                legend: outline::legend(),
                full: Some(SemanticTokensFullOptions::Bool(true)),
                range: Some(false),
                work_done_progress_options: WorkDoneProgressOptions::default(),
            },
        )),
        ..ServerCapabilities::default()
    }
}

fn serve(connection: &Connection) -> Result<bool, lsp_server::ProtocolError> {
    let (id, params) = connection.initialize_start()?;
    let result = serde_json::json!({
        "capabilities": capabilities(),
        "serverInfo": { "name": "ratewright", "version": env!("CARGO_PKG_VERSION") },
    });
    connection.initialize_finish(id, result)?;
    let mut server = Server::new(connection.sender.clone(), connection.receiver.clone());
    server.roots = super::workspace::roots(&params);
    Ok(server.main_loop())
}

/// An open buffer: the URI the client named it by and its text.
pub struct Open {
    pub uri: Uri,
    pub document: Document,
}

pub struct Server {
    sender: Sender<Message>,
    receiver: Receiver<Message>,
    /// Messages read ahead (to see a cancel or coalesce changes).
    queue: VecDeque<Message>,
    pub documents: BTreeMap<PathBuf, Open>,
    pub analyses: HashMap<PathBuf, Analysis>,
    /// Documents whose analysis is out of date.
    dirty: BTreeSet<PathBuf>,
    /// Per open document, the files it last published diagnostics for.
    published: HashMap<PathBuf, BTreeSet<PathBuf>>,
    shutdown: bool,
    /// The workspace folders the client named.
    pub roots: Vec<PathBuf>,
}

impl Server {
    fn new(sender: Sender<Message>, receiver: Receiver<Message>) -> Server {
        Server {
            sender,
            receiver,
            queue: VecDeque::new(),
            documents: BTreeMap::new(),
            analyses: HashMap::new(),
            dirty: BTreeSet::new(),
            published: HashMap::new(),
            shutdown: false,
            roots: Vec::new(),
        }
    }

    /// Handles messages until `exit`; true if `shutdown` came first.
    fn main_loop(&mut self) -> bool {
        while let Some(message) = self.next_message() {
            match message {
                Message::Request(request) => self.on_request(request),
                Message::Notification(n) if n.method == "exit" => return self.shutdown,
                Message::Notification(n) => self.on_notification(n),
                // The server sends no requests, so expects no responses.
                Message::Response(_) => {}
            }
        }
        self.shutdown
    }

    /// The next message; when none is waiting, the out-of-date analyses
    /// are brought up to date first (so a burst of changes is analysed
    /// once, after its last change).
    fn next_message(&mut self) -> Option<Message> {
        if let Some(m) = self.queue.pop_front() {
            return Some(m);
        }
        // The reader thread hands over one message at a time, so the next
        // change of a burst may be a moment from being handed over: a short
        // wait before analysing lets a burst be analysed once, at its end.
        let wait = if self.dirty.is_empty() {
            std::time::Duration::ZERO
        } else {
            BURST_WAIT
        };
        match self.receiver.recv_timeout(wait) {
            Ok(m) => Some(m),
            Err(RecvTimeoutError::Timeout) => {
                self.refresh();
                self.receiver.recv().ok()
            }
            Err(RecvTimeoutError::Disconnected) => None,
        }
    }

    fn read_ahead(&mut self) {
        while let Ok(m) = self.receiver.try_recv() {
            self.queue.push_back(m);
        }
    }

    pub fn send(&self, message: impl Into<Message>) {
        // A closed connection ends the loop at the next read.
        let _ = self.sender.send(message.into());
    }

    fn on_request(&mut self, request: Request) {
        if self.shutdown {
            self.send(Response::new_err(
                request.id,
                ErrorCode::InvalidRequest as i32,
                "the server is shutting down".to_string(),
            ));
            return;
        }
        if request.method == "shutdown" {
            self.shutdown = true;
            self.send(Response::new_ok(request.id, ()));
            return;
        }
        self.read_ahead();
        if self.cancel_waiting(&request.id) {
            self.send(Response::new_err(
                request.id,
                ErrorCode::RequestCanceled as i32,
                "cancelled by the client".to_string(),
            ));
            return;
        }
        self.refresh();
        let id = request.id.clone();
        let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            super::requests::handle(self, &request)
        }));
        let response = match outcome {
            Ok(Ok(value)) => Response::new_ok(id, value),
            Ok(Err((code, message))) => Response::new_err(id, code as i32, message),
            Err(_) => Response::new_err(
                id,
                ErrorCode::InternalError as i32,
                format!("internal error while answering {}", request.method),
            ),
        };
        self.send(response);
    }

    /// Whether a `$/cancelRequest` for `id` is among the messages read
    /// ahead (it is then dropped from them).
    fn cancel_waiting(&mut self, id: &RequestId) -> bool {
        let wanted = serde_json::to_value(id).unwrap_or_default();
        let position = self.queue.iter().position(|m| {
            matches!(m, Message::Notification(n)
                if n.method == Cancel::METHOD && n.params.get("id") == Some(&wanted))
        });
        match position {
            Some(p) => {
                self.queue.remove(p);
                true
            }
            None => false,
        }
    }

    fn on_notification(&mut self, n: Notification) {
        let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            match n.method.as_str() {
                DidOpenTextDocument::METHOD => {
                    if let Ok(p) = serde_json::from_value::<DidOpenTextDocumentParams>(n.params) {
                        self.did_open(p);
                    }
                }
                DidChangeTextDocument::METHOD => {
                    if let Ok(p) = serde_json::from_value::<DidChangeTextDocumentParams>(n.params) {
                        self.did_change(p);
                    }
                }
                DidCloseTextDocument::METHOD => {
                    if let Ok(p) = serde_json::from_value::<DidCloseTextDocumentParams>(n.params) {
                        self.did_close(p);
                    }
                }
                // A file saved or changed on disk: the documents that read
                // it are loaded again (an open buffer is read from the
                // editor, so only files that are not open matter here).
                DidSaveTextDocument::METHOD => {
                    if let Some(path) = n
                        .params
                        .pointer("/textDocument/uri")
                        .and_then(|u| u.as_str())
                        .and_then(|u| u.parse::<Uri>().ok())
                        .and_then(|u| uri_to_path(&u))
                    {
                        self.mark(&path);
                    }
                }
                DidChangeWatchedFiles::METHOD => {
                    if let Ok(p) = serde_json::from_value::<DidChangeWatchedFilesParams>(n.params) {
                        for change in p.changes {
                            if let Some(path) = uri_to_path(&change.uri) {
                                self.mark(&path);
                            }
                        }
                    }
                }
                // Cancels of requests already answered and the rest need
                // nothing.
                _ => {}
            }
        }));
        if outcome.is_err() {
            self.log(
                "internal error while handling a notification; the document may be out of date",
            );
        }
    }

    fn log(&self, message: &str) {
        self.send(Notification::new(
            "window/logMessage".to_string(),
            serde_json::json!({ "type": 1, "message": message }),
        ));
    }

    fn did_open(&mut self, p: DidOpenTextDocumentParams) {
        let Some(path) = uri_to_path(&p.text_document.uri) else {
            return;
        };
        self.documents.insert(
            path.clone(),
            Open {
                uri: p.text_document.uri,
                document: Document::new(p.text_document.version, p.text_document.text),
            },
        );
        self.mark(&path);
    }

    fn did_change(&mut self, p: DidChangeTextDocumentParams) {
        let Some(path) = uri_to_path(&p.text_document.uri) else {
            return;
        };
        let Some(open) = self.documents.get_mut(&path) else {
            return;
        };
        match open
            .document
            .apply(p.text_document.version, &p.content_changes)
        {
            Ok(()) => self.mark(&path),
            Err(refused) => self.log(&format!(
                "change of {} refused: {refused:?} (a change for an older text is never applied)",
                path.display()
            )),
        }
    }

    fn did_close(&mut self, p: DidCloseTextDocumentParams) {
        let Some(path) = uri_to_path(&p.text_document.uri) else {
            return;
        };
        self.documents.remove(&path);
        self.analyses.remove(&path);
        self.dirty.remove(&path);
        for file in self.published.remove(&path).unwrap_or_default() {
            self.publish(&file, Vec::new(), None);
        }
        self.mark(&path);
    }

    /// Marks `path` and every open document whose model reads it as out
    /// of date.
    fn mark(&mut self, path: &Path) {
        if self.documents.contains_key(path) {
            self.dirty.insert(path.to_path_buf());
        }
        for (doc, analysis) in &self.analyses {
            if analysis.reads(path) {
                self.dirty.insert(doc.clone());
            }
        }
    }

    /// The open buffers' texts, by path.
    pub fn buffers(&self) -> HashMap<PathBuf, String> {
        self.documents
            .iter()
            .map(|(p, o)| (p.clone(), o.document.text.clone()))
            .collect()
    }

    /// Analyses the out-of-date documents and publishes their diagnostics.
    fn refresh(&mut self) {
        if self.dirty.is_empty() {
            return;
        }
        let buffers = self.buffers();
        for path in std::mem::take(&mut self.dirty) {
            let Some(version) = self.documents.get(&path).map(|o| o.document.version) else {
                continue;
            };
            let analysis = Analysis::new(&path, &buffers);
            let by_file = diagnostics::by_file(&analysis, &path);
            self.analyses.insert(path.clone(), analysis);
            let before = self.published.remove(&path).unwrap_or_default();
            let mut now = BTreeSet::new();
            for (file, list) in by_file {
                // An open file shows its own analysis's diagnostics.
                if file != path && self.documents.contains_key(&file) {
                    continue;
                }
                let shown_version = (file == path).then_some(version);
                self.publish(&file, list, shown_version);
                now.insert(file);
            }
            for gone in before.difference(&now) {
                self.publish(gone, Vec::new(), None);
            }
            self.published.insert(path, now);
        }
    }

    fn publish(&self, file: &Path, diagnostics: Vec<lsp_types::Diagnostic>, version: Option<i32>) {
        let Some(uri) = self.uri_of(file) else {
            return;
        };
        let params = PublishDiagnosticsParams {
            uri,
            diagnostics,
            version,
        };
        self.send(Notification::new(
            PublishDiagnostics::METHOD.to_string(),
            params,
        ));
    }

    /// The URI of a file: the client's own for an open buffer.
    pub fn uri_of(&self, path: &Path) -> Option<Uri> {
        match self.documents.get(path) {
            Some(open) => Some(open.uri.clone()),
            None => path_to_uri(path),
        }
    }

    /// Every analysis other than `of`'s (for edits across documents).
    pub fn other_analyses<'a>(&'a self, of: &'a Path) -> impl Iterator<Item = &'a Analysis> {
        self.analyses
            .iter()
            .filter(move |(p, _)| p.as_path() != of)
            .map(|(_, a)| a)
    }
}
