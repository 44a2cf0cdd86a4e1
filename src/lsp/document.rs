//! Open documents: the editor's text of each buffer, by version, and the
//! conversion between the protocol's positions (line, UTF-16 code unit)
//! and the byte offsets every span of the compiler uses.
//!
//! Invariants: a document's text only changes through a `didChange` whose
//! version is newer than the one held (an older or repeated version is
//! refused, never applied); the last few versions are kept so a request
//! naming one of them is answered against that text; a position past a
//! line's end or the file's end clamps to it, and an offset inside a
//! character moves back to its start, so no conversion can panic.

use lsp_types::{Position, Range, TextDocumentContentChangeEvent};
use std::collections::VecDeque;

/// How many earlier versions of a document stay answerable.
const KEPT_VERSIONS: usize = 8;

/// Line starts of a text, for offset ↔ position conversions. A line ends
/// at `\n`, `\r\n` or a lone `\r`, as the protocol counts lines.
#[derive(Debug, Clone)]
pub struct LineIndex {
    starts: Vec<usize>,
}

impl LineIndex {
    pub fn new(text: &str) -> LineIndex {
        let bytes = text.as_bytes();
        let mut starts = vec![0];
        let mut i = 0;
        while i < bytes.len() {
            match bytes[i] {
                b'\n' => starts.push(i + 1),
                b'\r' if bytes.get(i + 1) != Some(&b'\n') => starts.push(i + 1),
                _ => {}
            }
            i += 1;
        }
        LineIndex { starts }
    }

    /// The byte range of line `line` without its line break.
    fn line_bounds(&self, text: &str, line: usize) -> (usize, usize) {
        let start = self.starts[line.min(self.starts.len() - 1)];
        let mut end = self.starts.get(line + 1).copied().unwrap_or(text.len());
        let bytes = text.as_bytes();
        while end > start && matches!(bytes[end - 1], b'\n' | b'\r') {
            end -= 1;
        }
        (start, end)
    }

    pub fn line_count(&self) -> usize {
        self.starts.len()
    }

    /// The protocol position of a byte offset.
    pub fn position(&self, text: &str, offset: usize) -> Position {
        let offset = floor_boundary(text, offset);
        let line = self
            .starts
            .partition_point(|&s| s <= offset)
            .saturating_sub(1);
        let start = self.starts[line];
        let character: usize = text[start..offset].chars().map(char::len_utf16).sum();
        Position::new(line as u32, character as u32)
    }

    /// The byte offset of a protocol position (clamped to the line's end).
    pub fn offset(&self, text: &str, position: Position) -> usize {
        let line = position.line as usize;
        if line >= self.starts.len() {
            return text.len();
        }
        let (start, end) = self.line_bounds(text, line);
        let mut units = 0usize;
        for (i, c) in text[start..end].char_indices() {
            if units >= position.character as usize {
                return start + i;
            }
            units += c.len_utf16();
        }
        end
    }

    pub fn range(&self, text: &str, start: usize, end: usize) -> Range {
        Range::new(self.position(text, start), self.position(text, end))
    }

    /// The text of line `line` (without its break) and its start offset.
    pub fn line_text<'t>(&self, text: &'t str, line: usize) -> (&'t str, usize) {
        let (start, end) = self.line_bounds(text, line);
        (&text[start..end], start)
    }
}

/// The largest character boundary at or before `offset`.
pub fn floor_boundary(text: &str, offset: usize) -> usize {
    let mut offset = offset.min(text.len());
    while offset > 0 && !text.is_char_boundary(offset) {
        offset -= 1;
    }
    offset
}

/// One open buffer.
#[derive(Debug, Clone)]
pub struct Document {
    pub version: i32,
    pub text: String,
    pub lines: LineIndex,
    /// Earlier (version, text) pairs, newest last.
    history: VecDeque<(i32, String)>,
}

/// Why a change was not applied.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ChangeRefused {
    /// The change's version is not newer than the document's.
    StaleVersion { held: i32, given: i32 },
}

impl Document {
    pub fn new(version: i32, text: String) -> Document {
        Document {
            version,
            lines: LineIndex::new(&text),
            text,
            history: VecDeque::new(),
        }
    }

    /// Applies the changes of one `didChange`, in order (each range is in
    /// the text left by the change before it).
    pub fn apply(
        &mut self,
        version: i32,
        changes: &[TextDocumentContentChangeEvent],
    ) -> Result<(), ChangeRefused> {
        if version <= self.version {
            return Err(ChangeRefused::StaleVersion {
                held: self.version,
                given: version,
            });
        }
        let mut text = self.text.clone();
        let mut lines = self.lines.clone();
        for change in changes {
            match change.range {
                Some(range) => {
                    let start = lines.offset(&text, range.start);
                    let end = lines.offset(&text, range.end).max(start);
                    text.replace_range(start..end, &change.text);
                }
                None => text = change.text.clone(),
            }
            lines = LineIndex::new(&text);
        }
        let old = std::mem::replace(&mut self.text, text);
        self.history.push_back((self.version, old));
        if self.history.len() > KEPT_VERSIONS {
            self.history.pop_front();
        }
        self.version = version;
        self.lines = lines;
        Ok(())
    }

    /// The text of `version`, if it is the current one or still kept.
    pub fn text_of(&self, version: i32) -> Option<&str> {
        if version == self.version {
            return Some(&self.text);
        }
        self.history
            .iter()
            .find(|(v, _)| *v == version)
            .map(|(_, t)| t.as_str())
    }
}
