//! The requests: each finds the document it names (at the version it
//! names, if any), answers from that document's analysis, and returns the
//! protocol's answer or an error code with a message.

use super::analysis::Analysis;
use super::server::Server;
use super::{actions, completion, formatting, hover, navigate, outline};
use lsp_server::{ErrorCode, Request};
use lsp_types::{
    CodeAction, CodeActionKind, CodeActionOrCommand, CodeActionParams, CompletionParams,
    CompletionResponse, DocumentChanges, DocumentFormattingParams, DocumentRangeFormattingParams,
    DocumentSymbolParams, DocumentSymbolResponse, GotoDefinitionParams, GotoDefinitionResponse,
    Hover, HoverContents, HoverParams, Location, MarkupContent, MarkupKind, NumberOrString, OneOf,
    OptionalVersionedTextDocumentIdentifier, Position, PrepareRenameResponse, ReferenceParams,
    RenameParams, SemanticTokens, SemanticTokensParams, TextDocumentEdit,
    TextDocumentPositionParams, TextEdit, Uri, WorkspaceEdit,
};
use serde_json::Value;
use std::collections::{BTreeMap, HashSet};
use std::path::PathBuf;
use std::str::FromStr;

pub type Failure = (ErrorCode, String);

/// The analysis a request is answered from.
enum Answered<'s> {
    /// The document's current text.
    Current(&'s Analysis),
    /// An earlier version's text, analysed for this request.
    Earlier(Box<Analysis>),
}

impl Answered<'_> {
    fn get(&self) -> &Analysis {
        match self {
            Answered::Current(a) => a,
            Answered::Earlier(a) => a,
        }
    }
}

/// The document a request names: its path, the version answered and the
/// analysis of that version's text.
struct View<'s> {
    path: PathBuf,
    version: i32,
    answered: Answered<'s>,
}

fn view<'s>(server: &'s Server, params: &Value) -> Result<View<'s>, Failure> {
    let uri_text = params
        .pointer("/textDocument/uri")
        .and_then(Value::as_str)
        .ok_or((ErrorCode::InvalidParams, "no textDocument.uri".to_string()))?;
    let uri = Uri::from_str(uri_text)
        .map_err(|e| (ErrorCode::InvalidParams, format!("bad URI {uri_text}: {e}")))?;
    let path = super::convert::uri_to_path(&uri).ok_or((
        ErrorCode::InvalidParams,
        format!("{uri_text} is not a file URI"),
    ))?;
    let open = server.documents.get(&path).ok_or((
        ErrorCode::RequestFailed,
        format!("{} is not open", path.display()),
    ))?;
    let current = open.document.version;
    // A request may name the version it was made for; the standard ones
    // do not, and are answered against the text they were sent after.
    let named = params
        .pointer("/textDocument/version")
        .and_then(Value::as_i64)
        .map(|v| v as i32);
    match named {
        Some(v) if v != current => {
            let text = open.document.text_of(v).ok_or((
                ErrorCode::ContentModified,
                format!(
                    "version {v} of {} is no longer held (the document is at version {current})",
                    path.display()
                ),
            ))?;
            let mut buffers = server.buffers();
            buffers.insert(path.clone(), text.to_string());
            Ok(View {
                answered: Answered::Earlier(Box::new(Analysis::new(&path, &buffers))),
                path,
                version: v,
            })
        }
        _ => {
            let analysis = server.analyses.get(&path).ok_or((
                ErrorCode::ContentModified,
                format!("{} is not analysed yet", path.display()),
            ))?;
            Ok(View {
                path,
                version: current,
                answered: Answered::Current(analysis),
            })
        }
    }
}

fn parse<T: serde::de::DeserializeOwned>(request: &Request) -> Result<T, Failure> {
    serde_json::from_value(request.params.clone())
        .map_err(|e| (ErrorCode::InvalidParams, format!("{}: {e}", request.method)))
}

fn json(value: impl serde::Serialize) -> Result<Value, Failure> {
    serde_json::to_value(value).map_err(|e| (ErrorCode::InternalError, e.to_string()))
}

/// The document's byte offset of a position.
fn offset(analysis: &Analysis, position: Position) -> usize {
    analysis
        .main()
        .map(|f| f.lines.offset(&f.text, position))
        .unwrap_or(0)
}

pub fn handle(server: &Server, request: &Request) -> Result<Value, Failure> {
    let view = view(server, &request.params)?;
    let analysis = view.answered.get();
    match request.method.as_str() {
        "textDocument/hover" => {
            let p: HoverParams = parse(request)?;
            let at = offset(analysis, p.text_document_position_params.position);
            json(hover::hover_text(analysis, at).map(|(text, span)| Hover {
                contents: HoverContents::Markup(MarkupContent {
                    kind: MarkupKind::Markdown,
                    value: text,
                }),
                range: super::convert::range_of(analysis, span),
            }))
        }
        "textDocument/definition" => {
            let p: GotoDefinitionParams = parse(request)?;
            let at = offset(analysis, p.text_document_position_params.position);
            let uri_of = |path: &std::path::Path| server.uri_of(path);
            json(
                navigate::definition(analysis, at)
                    .and_then(|span| super::convert::location_of(analysis, span, &uri_of))
                    .map(GotoDefinitionResponse::Scalar),
            )
        }
        "textDocument/references" => {
            let p: ReferenceParams = parse(request)?;
            let at = offset(analysis, p.text_document_position.position);
            let found = everywhere(server, &view, at);
            let declaration =
                navigate::definition(analysis, at).and_then(|s| navigate::placed(analysis, s));
            let locations: Vec<Location> = found
                .into_iter()
                .filter(|s| {
                    p.context.include_declaration
                        || declaration
                            .as_ref()
                            .is_none_or(|d| (&d.path, d.start) != (&s.path, s.start))
                })
                .filter_map(|s| Some(Location::new(server.uri_of(&s.path)?, s.range)))
                .collect();
            json(locations)
        }
        "textDocument/prepareRename" => {
            let p: TextDocumentPositionParams = parse(request)?;
            let at = offset(analysis, p.position);
            match analysis.name_at(0, at) {
                Some((name, span)) if analysis.declaration(name).is_some() => {
                    let range = super::convert::range_of(analysis, span).unwrap_or_default();
                    json(PrepareRenameResponse::RangeWithPlaceholder {
                        range,
                        placeholder: name.to_string(),
                    })
                }
                _ => json(Value::Null),
            }
        }
        "textDocument/rename" => {
            let p: RenameParams = parse(request)?;
            let at = offset(analysis, p.text_document_position.position);
            let Some((name, _, _)) = navigate::target(analysis, at) else {
                return Err((
                    ErrorCode::RequestFailed,
                    "no name here to rename".to_string(),
                ));
            };
            if analysis.declaration(&name).is_none() {
                return Err((
                    ErrorCode::RequestFailed,
                    format!("`{name}` is not declared, so there is nothing to rename"),
                ));
            }
            if let Some(why) = navigate::refuse_new_name(analysis, &p.new_name) {
                return Err((ErrorCode::RequestFailed, why));
            }
            let mut by_file: BTreeMap<PathBuf, Vec<TextEdit>> = BTreeMap::new();
            for s in everywhere(server, &view, at) {
                by_file
                    .entry(s.path)
                    .or_default()
                    .push(TextEdit::new(s.range, p.new_name.clone()));
            }
            json(versioned_edit(server, &view, by_file))
        }
        "textDocument/completion" => {
            let p: CompletionParams = parse(request)?;
            let position = p.text_document_position.position;
            let before = analysis
                .main()
                .map(|f| {
                    let (line, start) = f.lines.line_text(&f.text, position.line as usize);
                    let at = f.lines.offset(&f.text, position).saturating_sub(start);
                    line.get(..at.min(line.len())).unwrap_or("").to_string()
                })
                .unwrap_or_default();
            json(CompletionResponse::Array(completion::items(
                analysis, &before,
            )))
        }
        "textDocument/formatting" => {
            let _: DocumentFormattingParams = parse(request)?;
            let file = analysis.main().ok_or(not_read(&view))?;
            formatting::whole(&file.text, &file.lines)
                .map_err(|why| (ErrorCode::RequestFailed, why.to_string()))
                .and_then(json)
        }
        "textDocument/rangeFormatting" => {
            let p: DocumentRangeFormattingParams = parse(request)?;
            let file = analysis.main().ok_or(not_read(&view))?;
            formatting::range(&file.text, &file.lines, p.range)
                .map_err(|why| (ErrorCode::RequestFailed, why.to_string()))
                .and_then(json)
        }
        "textDocument/documentSymbol" => {
            let _: DocumentSymbolParams = parse(request)?;
            json(DocumentSymbolResponse::Nested(outline::symbols(analysis)))
        }
        "textDocument/semanticTokens/full" => {
            let _: SemanticTokensParams = parse(request)?;
            json(SemanticTokens {
                result_id: None,
                data: outline::tokens(analysis),
            })
        }
        "textDocument/codeAction" => {
            let p: CodeActionParams = parse(request)?;
            code_actions(server, &view, &p)
        }
        other => Err((
            ErrorCode::MethodNotFound,
            format!("{other} is not supported"),
        )),
    }
}

fn not_read(view: &View) -> Failure {
    (
        ErrorCode::RequestFailed,
        format!("{} could not be read", view.path.display()),
    )
}

/// Every occurrence of the name at `at`, in the document's model and in
/// every other open document's model that takes the name from the same
/// file.
fn everywhere(server: &Server, view: &View, at: usize) -> Vec<navigate::PlacedSpan> {
    let analysis = view.answered.get();
    let Some((name, _, declared_in)) = navigate::target(analysis, at) else {
        return Vec::new();
    };
    let mut seen = HashSet::new();
    let mut out = Vec::new();
    let others = server.other_analyses(&view.path);
    for a in std::iter::once(analysis).chain(others) {
        for s in navigate::occurrences_in(a, &name, &declared_in) {
            if seen.insert((s.path.clone(), s.start)) {
                out.push(s);
            }
        }
    }
    // Files of the workspace that are not open may use the declaring file.
    let buffers = server.buffers();
    for path in super::workspace::mechanism_files(&server.roots) {
        if server.documents.contains_key(&path) || seen.iter().any(|(p, _)| *p == path) {
            continue;
        }
        let closed = Analysis::parsed_only(&path, &buffers);
        for s in navigate::occurrences_in(&closed, &name, &declared_in) {
            if seen.insert((s.path.clone(), s.start)) {
                out.push(s);
            }
        }
    }
    out
}

/// Edits by file as one workspace edit, each file's edits naming the
/// version they were computed for (the view's for the document, the open
/// version for other open buffers, none for files only on disk).
fn versioned_edit(
    server: &Server,
    view: &View,
    by_file: BTreeMap<PathBuf, Vec<TextEdit>>,
) -> WorkspaceEdit {
    let edits: Vec<TextDocumentEdit> = by_file
        .into_iter()
        .filter_map(|(path, edits)| {
            let version = if path == view.path {
                Some(view.version)
            } else {
                server.documents.get(&path).map(|o| o.document.version)
            };
            Some(TextDocumentEdit {
                text_document: OptionalVersionedTextDocumentIdentifier {
                    uri: server.uri_of(&path)?,
                    version,
                },
                edits: edits.into_iter().map(OneOf::Left).collect(),
            })
        })
        .collect();
    WorkspaceEdit {
        changes: None,
        document_changes: Some(DocumentChanges::Edits(edits)),
        change_annotations: None,
    }
}

fn code_actions(server: &Server, view: &View, p: &CodeActionParams) -> Result<Value, Failure> {
    let analysis = view.answered.get();
    let start = offset(analysis, p.range.start);
    let end = offset(analysis, p.range.end);
    let Some(file) = analysis.main() else {
        return json(Vec::<CodeActionOrCommand>::new());
    };
    let actions: Vec<CodeActionOrCommand> = actions::fixes(analysis, start, end)
        .into_iter()
        .map(|fix| {
            let edits: Vec<TextEdit> = fix
                .edits
                .iter()
                .map(|(s, e, text)| {
                    TextEdit::new(file.lines.range(&file.text, *s, *e), text.clone())
                })
                .collect();
            let mut by_file = BTreeMap::new();
            by_file.insert(view.path.clone(), edits);
            let code = NumberOrString::String(fix.fixes.code.as_str().to_string());
            let fixed: Vec<lsp_types::Diagnostic> = p
                .context
                .diagnostics
                .iter()
                .filter(|d| d.code.as_ref() == Some(&code))
                .cloned()
                .collect();
            CodeActionOrCommand::CodeAction(CodeAction {
                title: fix.title,
                kind: Some(CodeActionKind::QUICKFIX),
                diagnostics: (!fixed.is_empty()).then_some(fixed),
                edit: Some(versioned_edit(server, view, by_file)),
                command: None,
                is_preferred: Some(fix.preferred),
                disabled: None,
                data: None,
            })
        })
        .collect();
    json(actions)
}
