//! The compiler's diagnostics as the protocol's: the same code, message,
//! help and labelled locations as `check --format json`, grouped by the
//! file they are in (a mistake in a `use`d file is shown in that file).

use super::analysis::Analysis;
use super::convert::path_to_uri;
use super::document::LineIndex;
use crate::diagnostics::{Diagnostic, FileId, Severity, SourceMap};
use lsp_types::{
    DiagnosticRelatedInformation, DiagnosticSeverity, Location, NumberOrString, Range,
};
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

/// The name diagnostics give as their source.
pub const SOURCE: &str = "ratewright";

/// The document's diagnostics by file; the document's own file is always
/// present (an empty list clears what was shown before).
pub fn by_file(analysis: &Analysis, main: &Path) -> BTreeMap<PathBuf, Vec<lsp_types::Diagnostic>> {
    let sources = &analysis.loaded.sources;
    let mut lines: HashMap<FileId, LineIndex> = HashMap::new();
    let mut out: BTreeMap<PathBuf, Vec<lsp_types::Diagnostic>> = BTreeMap::new();
    out.insert(main.to_path_buf(), Vec::new());
    for d in &analysis.loaded.diagnostics {
        let (path, range) = match d.primary_span() {
            Some(span) => match locate(sources, &mut lines, span.file, span.start, span.end) {
                Some(at) => at,
                None => (main.to_path_buf(), Range::default()),
            },
            None => (
                d.path.clone().unwrap_or_else(|| main.to_path_buf()),
                Range::default(),
            ),
        };
        let converted = convert(d, range, sources, &mut lines);
        out.entry(path).or_default().push(converted);
    }
    out
}

fn locate(
    sources: &SourceMap,
    lines: &mut HashMap<FileId, LineIndex>,
    file: FileId,
    start: usize,
    end: usize,
) -> Option<(PathBuf, Range)> {
    let source = sources.get(file)?;
    let index = lines
        .entry(file)
        .or_insert_with(|| LineIndex::new(&source.text));
    let path = crate::model::source::normalize(&source.path).unwrap_or_else(|| source.path.clone());
    Some((path, index.range(&source.text, start, end)))
}

fn convert(
    d: &Diagnostic,
    range: Range,
    sources: &SourceMap,
    lines: &mut HashMap<FileId, LineIndex>,
) -> lsp_types::Diagnostic {
    let related: Vec<DiagnosticRelatedInformation> = d
        .labels
        .iter()
        .filter_map(|label| {
            let (path, range) = locate(
                sources,
                lines,
                label.span.file,
                label.span.start,
                label.span.end,
            )?;
            Some(DiagnosticRelatedInformation {
                location: Location::new(path_to_uri(&path)?, range),
                message: label.message.clone(),
            })
        })
        .collect();
    let message = match &d.help {
        Some(help) => format!("{}\nhelp: {help}", d.message),
        None => d.message.clone(),
    };
    lsp_types::Diagnostic {
        range,
        severity: Some(match d.severity {
            Severity::Error => DiagnosticSeverity::ERROR,
            Severity::Warning => DiagnosticSeverity::WARNING,
        }),
        code: Some(NumberOrString::String(d.code.as_str().to_string())),
        code_description: None,
        source: Some(SOURCE.to_string()),
        message,
        related_information: Some(related),
        tags: None,
        // The parts the message joins, for clients (and code actions)
        // that want them apart.
        data: Some(serde_json::json!({
            "message": d.message,
            "help": d.help,
        })),
    }
}
