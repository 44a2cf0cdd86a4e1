//! The document's outline (symbols grouped by statement kind) and its
//! semantic tokens (what each word is, for colouring by meaning: a species
//! and a param look different even where the grammar cannot tell them
//! apart).
//!
//! Tokens come from a scan of the text that needs no parse, so half-typed
//! lines are coloured too; names are classified by the index of the
//! tolerant parse. Invariant: tokens are in order, on one line each and
//! never overlap, as the protocol requires.

use super::analysis::{Analysis, Kind};
use crate::model::Func;
use crate::model::units::parse_unit;
use lsp_types::{
    DocumentSymbol, SemanticToken, SemanticTokenModifier, SemanticTokenType, SemanticTokensLegend,
    SymbolKind,
};
use std::collections::HashMap;

fn symbol_kind(kind: Kind) -> SymbolKind {
    match kind {
        Kind::Mechanism => SymbolKind::MODULE,
        Kind::Species => SymbolKind::VARIABLE,
        Kind::Fixed => SymbolKind::CONSTANT,
        Kind::Param => SymbolKind::CONSTANT,
        Kind::Step => SymbolKind::EVENT,
        Kind::Total => SymbolKind::NUMBER,
        Kind::Observable => SymbolKind::FIELD,
    }
}

/// The outline: one group per kind of statement, in the order the kinds
/// first appear, each holding its names in file order.
#[allow(deprecated)] // `DocumentSymbol::deprecated` must be written to build one
pub fn symbols(analysis: &Analysis) -> Vec<DocumentSymbol> {
    let Some(file) = analysis.main() else {
        return Vec::new();
    };
    let statements = file.statements();
    let mut groups: Vec<(Kind, Vec<DocumentSymbol>)> = Vec::new();
    for d in &file.declarations {
        let Some(statement) = statements.get(d.statement) else {
            continue;
        };
        let range = file
            .lines
            .range(&file.text, statement.span.start, statement.span.end);
        let selection = file.lines.range(&file.text, d.span.start, d.span.end);
        let symbol = DocumentSymbol {
            name: d.name.clone(),
            detail: Some(d.kind.word().to_string()),
            kind: symbol_kind(d.kind),
            tags: None,
            deprecated: None,
            range,
            selection_range: selection,
            children: None,
        };
        match groups.iter_mut().find(|(k, _)| *k == d.kind) {
            Some((_, list)) => list.push(symbol),
            None => groups.push((d.kind, vec![symbol])),
        }
    }
    groups
        .into_iter()
        .map(|(kind, children)| {
            let first = children.first().map(|c| c.range).unwrap_or_default();
            let last = children.last().map(|c| c.range).unwrap_or_default();
            let range = lsp_types::Range::new(first.start, last.end);
            DocumentSymbol {
                name: group_name(kind).to_string(),
                detail: Some(format!("{}", children.len())),
                kind: SymbolKind::NAMESPACE,
                tags: None,
                deprecated: None,
                range,
                selection_range: first,
                children: Some(children),
            }
        })
        .collect()
}

fn group_name(kind: Kind) -> &'static str {
    match kind {
        Kind::Mechanism => "mechanism",
        Kind::Species => "species",
        Kind::Fixed => "fixed species",
        Kind::Param => "params",
        Kind::Step => "steps",
        Kind::Total => "totals",
        Kind::Observable => "observables",
    }
}

/// The token types, in the order of their numbers in the tokens.
const TYPES: [SemanticTokenType; 11] = [
    SemanticTokenType::KEYWORD,
    SemanticTokenType::NUMBER,
    SemanticTokenType::STRING,
    SemanticTokenType::COMMENT,
    SemanticTokenType::OPERATOR,
    SemanticTokenType::VARIABLE,
    SemanticTokenType::PARAMETER,
    SemanticTokenType::FUNCTION,
    SemanticTokenType::TYPE,
    SemanticTokenType::PROPERTY,
    SemanticTokenType::NAMESPACE,
];

#[derive(Clone, Copy)]
enum Token {
    Keyword = 0,
    Number,
    Str,
    Comment,
    Operator,
    Species,
    Param,
    Function,
    Unit,
    Total,
    Mechanism,
}

const DECLARATION: u32 = 1;
const READONLY: u32 = 2;

pub fn legend() -> SemanticTokensLegend {
    SemanticTokensLegend {
        token_types: TYPES.to_vec(),
        token_modifiers: vec![
            SemanticTokenModifier::DECLARATION,
            SemanticTokenModifier::READONLY,
        ],
    }
}

const WORDS: [&str; 20] = [
    "mechanism",
    "units",
    "species",
    "fixed",
    "param",
    "step",
    "total",
    "observe",
    "assume",
    "steady",
    "equilibrium",
    "add",
    "remove",
    "set",
    "at",
    "use",
    "with",
    "law",
    "concentration",
    "time",
];

fn name_token(kind: Kind) -> (Token, u32) {
    match kind {
        Kind::Mechanism => (Token::Mechanism, 0),
        Kind::Species => (Token::Species, 0),
        Kind::Fixed => (Token::Species, READONLY),
        Kind::Param => (Token::Param, READONLY),
        Kind::Step => (Token::Function, 0),
        Kind::Total | Kind::Observable => (Token::Total, 0),
    }
}

/// The semantic tokens of the document.
pub fn tokens(analysis: &Analysis) -> Vec<SemanticToken> {
    let Some(file) = analysis.main() else {
        return Vec::new();
    };
    let kinds: HashMap<&str, Kind> = analysis
        .files()
        .iter()
        .flat_map(|f| &f.declarations)
        .map(|d| (d.name.as_str(), d.kind))
        .collect();
    let declared_at: std::collections::HashSet<usize> =
        file.declarations.iter().map(|d| d.span.start).collect();
    let mut found: Vec<(usize, usize, Token, u32)> = Vec::new();
    let text = file.text.as_str();
    let mut i = 0;
    let mut after_number = false;
    while i < text.len() {
        let rest = &text[i..];
        let c = rest.chars().next().expect("inside the text");
        if c == '#' {
            let end = rest.find(['\n', '\r']).map_or(text.len(), |e| i + e);
            found.push((i, end, Token::Comment, 0));
            i = end;
            continue;
        }
        if c == '"' {
            let close = rest[1..].find(['"', '\n', '\r']);
            let end = match close {
                Some(e) if rest[1 + e..].starts_with('"') => i + e + 2,
                Some(e) => i + 1 + e,
                None => text.len(),
            };
            found.push((i, end, Token::Str, 0));
            i = end;
            after_number = false;
            continue;
        }
        if c.is_ascii_digit() || (c == '.' && rest[1..].starts_with(|d: char| d.is_ascii_digit())) {
            let end = i + number_length(rest);
            found.push((i, end, Token::Number, 0));
            i = end;
            after_number = true;
            continue;
        }
        if c == '_' || c.is_alphabetic() || (after_number && c == '/') {
            let word_end = rest
                .char_indices()
                .find(|(_, c)| !(c.is_alphanumeric() || *c == '_'))
                .map_or(text.len(), |(e, _)| i + e);
            let unit_end = rest
                .char_indices()
                .find(|(_, c)| {
                    !(c.is_alphanumeric() || matches!(c, '_' | '/' | '*' | '^' | '-' | '·'))
                })
                .map_or(text.len(), |(e, _)| i + e);
            let word = &text[i..word_end];
            if let Some(kind) = kinds.get(word).filter(|_| c != '/') {
                let (token, mut modifiers) = name_token(*kind);
                if declared_at.contains(&i) {
                    modifiers |= DECLARATION;
                }
                found.push((i, word_end, token, modifiers));
                i = word_end;
            } else if after_number && unit_end > i && parse_unit(&text[i..unit_end]).is_ok() {
                found.push((i, unit_end, Token::Unit, 0));
                i = unit_end;
            } else if WORDS.contains(&word) {
                found.push((i, word_end, Token::Keyword, 0));
                i = word_end;
            } else if Func::from_name(word).is_some()
                && text[word_end..].trim_start().starts_with('(')
            {
                found.push((i, word_end, Token::Function, 0));
                i = word_end;
            } else {
                i = word_end.max(i + c.len_utf8());
            }
            after_number = false;
            continue;
        }
        let operator = ["<=>", "->", "⇌", "→", "+", "-", "*", "/", "^", "="]
            .into_iter()
            .find(|op| rest.starts_with(op));
        if let Some(op) = operator {
            found.push((i, i + op.len(), Token::Operator, 0));
            i += op.len();
            after_number = false;
            continue;
        }
        if !matches!(c, ' ' | '\t' | '\u{a0}') {
            after_number = false;
        }
        i += c.len_utf8();
    }
    encode(file, &found)
}

/// The length of the number at the start of `text` (digits, a fraction,
/// an exponent).
fn number_length(text: &str) -> usize {
    let bytes = text.as_bytes();
    let mut n = 0;
    while n < bytes.len() && (bytes[n].is_ascii_digit() || bytes[n] == b'.') {
        n += 1;
    }
    if n < bytes.len() && matches!(bytes[n], b'e' | b'E') {
        let mut m = n + 1;
        if m < bytes.len() && matches!(bytes[m], b'+' | b'-') {
            m += 1;
        }
        if m < bytes.len() && bytes[m].is_ascii_digit() {
            while m < bytes.len() && bytes[m].is_ascii_digit() {
                m += 1;
            }
            n = m;
        }
    }
    n
}

/// Relative encoding of the protocol, in UTF-16 units.
fn encode(
    file: &super::analysis::ParsedFile,
    found: &[(usize, usize, Token, u32)],
) -> Vec<SemanticToken> {
    let mut out = Vec::with_capacity(found.len());
    let (mut line, mut character) = (0u32, 0u32);
    for &(start, end, token, modifiers) in found {
        let from = file.lines.position(&file.text, start);
        let to = file.lines.position(&file.text, end);
        // A token never spans lines; one that would is cut at the line's end.
        let length = if to.line == from.line {
            to.character - from.character
        } else {
            let (line_text, line_start) = file.lines.line_text(&file.text, from.line as usize);
            line_text[start - line_start..].encode_utf16().count() as u32
        };
        if length == 0 {
            continue;
        }
        let delta_line = from.line - line;
        let delta_start = if delta_line == 0 {
            from.character - character
        } else {
            from.character
        };
        out.push(SemanticToken {
            delta_line,
            delta_start,
            length,
            token_type: token as u32,
            token_modifiers_bitset: modifiers,
        });
        line = from.line;
        character = from.character;
    }
    out
}
