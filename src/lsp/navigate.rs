//! Go to definition, find references and rename: the same index of
//! declarations and references, over the document and its `use`d files
//! (and, for rename and references, over every open document whose model
//! shares the declaring file, so a name changes in every file using it).

use super::analysis::Analysis;
use crate::diagnostics::Span;
use std::path::PathBuf;

/// A span in a file named by its path (spans of two analyses number their
/// files differently).
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct PlacedSpan {
    pub path: PathBuf,
    pub start: usize,
    pub range: lsp_types::Range,
}

pub fn placed(analysis: &Analysis, span: Span) -> Option<PlacedSpan> {
    let file = analysis.files().get(span.file.0 as usize)?;
    Some(PlacedSpan {
        path: file.path.clone(),
        start: span.start,
        range: file.lines.range(&file.text, span.start, span.end),
    })
}

/// The declaration of the name at `offset` of the document.
pub fn definition(analysis: &Analysis, offset: usize) -> Option<Span> {
    let (name, _) = analysis.name_at(0, offset)?;
    analysis.declaration(name).map(|d| d.span)
}

/// The name at `offset` and the file that declares it.
pub fn target(analysis: &Analysis, offset: usize) -> Option<(String, Span, Option<PathBuf>)> {
    let (name, at) = analysis.name_at(0, offset)?;
    let declared_in = analysis
        .declaration(name)
        .and_then(|d| analysis.files().get(d.span.file.0 as usize))
        .map(|f| f.path.clone());
    Some((name.to_string(), at, declared_in))
}

/// Every place `name` stands in `analysis`, when the model of `analysis`
/// declares it in `declared_in` (so a same-named item of an unrelated
/// model is left alone).
pub fn occurrences_in(
    analysis: &Analysis,
    name: &str,
    declared_in: &Option<PathBuf>,
) -> Vec<PlacedSpan> {
    let declaring = analysis
        .declaration(name)
        .and_then(|d| analysis.files().get(d.span.file.0 as usize))
        .map(|f| f.path.clone());
    if &declaring != declared_in {
        return Vec::new();
    }
    analysis
        .occurrences(name)
        .into_iter()
        .filter_map(|s| placed(analysis, s))
        .collect()
}

/// Why a new name cannot be used, or `None` when it can.
pub fn refuse_new_name(analysis: &Analysis, new_name: &str) -> Option<String> {
    let mut chars = new_name.chars();
    let starts_well = chars.next().is_some_and(|c| c == '_' || unicode_start(c));
    if !starts_well || !new_name.chars().skip(1).all(unicode_continue) {
        return Some(format!(
            "`{new_name}` is not a name: a name is a letter or `_` followed by letters, digits or `_`"
        ));
    }
    if matches!(new_name, "t" | "pi" | "with" | "law") {
        return Some(format!("`{new_name}` is reserved"));
    }
    if super::completion::KEYWORDS.contains(&new_name) {
        return Some(format!("`{new_name}` is a keyword"));
    }
    if let Some(d) = analysis.declaration(new_name) {
        return Some(format!(
            "`{new_name}` is already declared (a {})",
            d.kind.word()
        ));
    }
    None
}

fn unicode_start(c: char) -> bool {
    c.is_alphabetic()
}

fn unicode_continue(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}
