//! Completion: what may come at the cursor — a statement keyword at the
//! start of a line, a unit word right after a number, and otherwise the
//! names in scope (the document's and its `use`d files'), each with its
//! kind.

use super::analysis::{Analysis, Kind};
use lsp_types::{CompletionItem, CompletionItemKind};

/// The words that start a statement.
pub use crate::syntax::parse::STATEMENT_KEYWORDS as KEYWORDS;

/// Unit words a number may take: concentrations, times, and the usual
/// rate-constant forms.
const UNIT_WORDS: [&str; 19] = [
    "M", "mM", "uM", "nM", "pM", "s", "ms", "min", "h", "/s", "/min", "/h", "/M/s", "/mM/s",
    "/uM/s", "/nM/s", "M/s", "mM/s", "uM/s",
];

/// What the text before the cursor on its line asks for.
#[derive(Debug, PartialEq, Eq)]
enum Context {
    Keyword,
    Unit,
    Name,
}

fn context(before: &str) -> Context {
    let trimmed = before.trim_start();
    let is_word = |c: char| c.is_alphanumeric() || c == '_';
    if trimmed.chars().all(is_word) {
        return Context::Keyword;
    }
    // The word being typed, and the token before it.
    let word_start = before
        .char_indices()
        .rev()
        .find(|(_, c)| !(is_word(*c) || matches!(c, '/' | '^')))
        .map(|(i, c)| i + c.len_utf8())
        .unwrap_or(0);
    let previous = before[..word_start].split_whitespace().next_back();
    let after_number = previous.is_some_and(|p| p.parse::<f64>().is_ok());
    // A number in a step's sides is a coefficient: a species follows.
    let in_step_sides =
        trimmed.starts_with("step ") && !trimmed.contains(" with ") && !trimmed.contains(" law ");
    if after_number && !in_step_sides {
        Context::Unit
    } else {
        Context::Name
    }
}

fn kind_of(kind: Kind) -> CompletionItemKind {
    match kind {
        Kind::Mechanism => CompletionItemKind::MODULE,
        Kind::Species => CompletionItemKind::VARIABLE,
        Kind::Fixed => CompletionItemKind::CONSTANT,
        Kind::Param => CompletionItemKind::CONSTANT,
        Kind::Step => CompletionItemKind::EVENT,
        Kind::Total => CompletionItemKind::VALUE,
        Kind::Observable => CompletionItemKind::FIELD,
    }
}

/// The items for a cursor whose line reads `before` up to it.
pub fn items(analysis: &Analysis, before: &str) -> Vec<CompletionItem> {
    match context(before) {
        Context::Keyword => KEYWORDS
            .iter()
            .map(|k| CompletionItem {
                label: k.to_string(),
                kind: Some(CompletionItemKind::KEYWORD),
                detail: Some("statement".to_string()),
                ..CompletionItem::default()
            })
            .collect(),
        Context::Unit => UNIT_WORDS
            .iter()
            .map(|u| CompletionItem {
                label: u.to_string(),
                kind: Some(CompletionItemKind::UNIT),
                detail: Some("unit".to_string()),
                ..CompletionItem::default()
            })
            .collect(),
        Context::Name => {
            let mut seen = std::collections::HashSet::new();
            analysis
                .files()
                .iter()
                .flat_map(|f| &f.declarations)
                .filter(|d| d.kind != Kind::Mechanism && seen.insert(d.name.clone()))
                .map(|d| CompletionItem {
                    label: d.name.clone(),
                    kind: Some(kind_of(d.kind)),
                    detail: Some(d.kind.word().to_string()),
                    ..CompletionItem::default()
                })
                .collect()
        }
    }
}
