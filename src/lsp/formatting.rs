//! Formatting: the canonical layout of `ratewright fmt`
//! ([`crate::syntax::format::format_file`]), for the whole document or for
//! the lines of a range.
//!
//! A range is formatted by pairing each line of the document with its line
//! in the formatted text (the layout changes only spaces and blank lines,
//! so a line and its formatted form are equal once spaces are removed) and
//! editing the paired lines inside the range. Alignment is that of the
//! whole file, so formatting a range then the rest gives the same text as
//! formatting the whole.

use super::document::LineIndex;
use lsp_types::{Position, Range, TextEdit};

/// Why a document cannot be formatted.
pub const SYNTAX_ERROR: &str =
    "the document has a syntax error; formatting needs a text that parses";

/// The formatted text of `text`, or `None` if it does not parse.
fn formatted(text: &str) -> Option<String> {
    let body = text.strip_prefix('\u{FEFF}').unwrap_or(text);
    let mut sources = crate::diagnostics::SourceMap::new();
    let id = sources.add("document".into(), body.to_string());
    let tree = crate::syntax::parse(body, id).ok()?;
    Some(crate::syntax::format::format_file(&tree, body))
}

/// The edit that formats the whole document (none when it is formatted).
pub fn whole(text: &str, lines: &LineIndex) -> Result<Vec<TextEdit>, &'static str> {
    let out = formatted(text).ok_or(SYNTAX_ERROR)?;
    let bom = text.len() - text.strip_prefix('\u{FEFF}').unwrap_or(text).len();
    if out == text[bom..] {
        return Ok(Vec::new());
    }
    Ok(vec![TextEdit::new(lines.range(text, bom, text.len()), out)])
}

fn key(line: &str) -> String {
    line.chars().filter(|c| !c.is_whitespace()).collect()
}

/// The edits that format the lines `range` touches.
pub fn range(text: &str, lines: &LineIndex, range: Range) -> Result<Vec<TextEdit>, &'static str> {
    let out = formatted(text).ok_or(SYNTAX_ERROR)?;
    let original: Vec<&str> = (0..lines.line_count())
        .map(|l| lines.line_text(text, l).0)
        .collect();
    let mut original = original;
    // The line after a final line break is not a line of the layout.
    if original.len() > 1 && original.last() == Some(&"") {
        original.pop();
    }
    // The formatted text ends with a line break; the document may not.
    let mut target: Vec<&str> = out.split('\n').collect();
    if target.last() == Some(&"") {
        target.pop();
    }
    let first = range.start.line as usize;
    let last = range.end.line as usize;
    let in_range = |l: usize| l >= first && l <= last;
    let line_range =
        |l: usize| Range::new(Position::new(l as u32, 0), Position::new(l as u32 + 1, 0));
    let mut edits = Vec::new();
    let (mut i, mut j) = (0usize, 0usize);
    while i < original.len() || j < target.len() {
        match (original.get(i), target.get(j)) {
            (Some(o), Some(f)) if key(o) == key(f) => {
                if in_range(i) && o != f {
                    let end = Position::new(i as u32, o.encode_utf16().count() as u32);
                    edits.push(TextEdit::new(
                        Range::new(Position::new(i as u32, 0), end),
                        f.to_string(),
                    ));
                }
                i += 1;
                j += 1;
            }
            (Some(o), _) if o.trim().is_empty() => {
                if in_range(i) {
                    edits.push(TextEdit::new(line_range(i), String::new()));
                }
                i += 1;
            }
            (_, Some(f)) if f.trim().is_empty() => {
                if in_range(i) {
                    edits.push(TextEdit::new(
                        Range::new(Position::new(i as u32, 0), Position::new(i as u32, 0)),
                        "\n".to_string(),
                    ));
                }
                j += 1;
            }
            // Lines that do not pair (not expected of the layout): the
            // whole document's edit is the safe answer.
            _ => return whole(text, lines),
        }
    }
    Ok(edits)
}
