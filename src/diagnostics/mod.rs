//! Diagnostics shared by every stage: source files, spans, and typed
//! diagnostics with stable codes.
//!
//! Why here: every stage reports problems against the user's text, so the
//! span type and the diagnostic type live below all stages. Invariants: a
//! span's byte offsets always lie on character boundaries of the file it
//! names; nothing in this module prints (rendering returns strings).

mod code;
mod render;

pub use code::Code;
pub use render::{render_human, render_json, to_json_value};

use std::path::PathBuf;

/// Index of a file in a [`SourceMap`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
pub struct FileId(pub u32);

/// A byte range in one source file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub struct Span {
    pub file: FileId,
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(file: FileId, start: usize, end: usize) -> Self {
        Span { file, start, end }
    }
    /// The smallest span covering both (same file assumed; otherwise `self`).
    pub fn join(self, other: Span) -> Span {
        if self.file != other.file {
            return self;
        }
        Span {
            file: self.file,
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
    pub fn len(&self) -> usize {
        self.end.saturating_sub(self.start)
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// One loaded source file. `text` is exactly what the parser saw (a leading
/// byte-order mark is replaced by nothing before loading, so offsets match).
#[derive(Debug, Clone)]
pub struct SourceFile {
    pub path: PathBuf,
    pub text: String,
    /// Byte offsets where lines start, built on first use: locating a
    /// diagnostic is then a binary search, not a scan from the file's start
    /// (a file with 100,000 diagnostics would otherwise take quadratic time).
    line_starts: std::sync::OnceLock<Vec<usize>>,
}

impl SourceFile {
    pub fn new(path: PathBuf, text: String) -> SourceFile {
        SourceFile {
            path,
            text,
            line_starts: std::sync::OnceLock::new(),
        }
    }

    fn line_starts(&self) -> &[usize] {
        self.line_starts.get_or_init(|| {
            std::iter::once(0)
                .chain(self.text.match_indices('\n').map(|(i, _)| i + 1))
                .collect()
        })
    }

    /// 0-based line index of a byte offset.
    pub fn line_index(&self, offset: usize) -> usize {
        self.line_starts()
            .partition_point(|&start| start <= offset)
            .saturating_sub(1)
    }
}

/// All files read for one compilation (the main file and its `use`d files).
#[derive(Debug, Clone, Default)]
pub struct SourceMap {
    files: Vec<SourceFile>,
}

impl SourceMap {
    pub fn new() -> Self {
        Self::default()
    }
    /// Adds a file's text. A lone carriage return (old Mac line endings)
    /// becomes a line feed: the same one byte, so every span still points
    /// at the same text, but diagnostics show lines instead of one long one.
    pub fn add(&mut self, path: PathBuf, text: String) -> FileId {
        let text = if text.contains('\r') {
            lone_carriage_returns_to_line_feeds(text)
        } else {
            text
        };
        self.files.push(SourceFile::new(path, text));
        FileId((self.files.len() - 1) as u32)
    }
    pub fn get(&self, id: FileId) -> Option<&SourceFile> {
        self.files.get(id.0 as usize)
    }
    pub fn files(&self) -> &[SourceFile] {
        &self.files
    }
    pub fn find(&self, path: &std::path::Path) -> Option<FileId> {
        self.files
            .iter()
            .position(|f| f.path == path)
            .map(|i| FileId(i as u32))
    }
    /// 1-based line and column (in characters) of a byte offset.
    pub fn line_col(&self, id: FileId, offset: usize) -> (usize, usize) {
        let Some(file) = self.get(id) else {
            return (1, 1);
        };
        let offset = floor_char_boundary(&file.text, offset.min(file.text.len()));
        let line = file.line_index(offset);
        let line_start = file.line_starts()[line];
        let col = file.text[line_start..offset].chars().count() + 1;
        (line + 1, col)
    }
    /// The text a span covers ("" if out of range).
    pub fn snippet(&self, span: Span) -> &str {
        self.get(span.file)
            .and_then(|f| f.text.get(span.start..span.end))
            .unwrap_or("")
    }
}

pub(crate) fn floor_char_boundary(text: &str, mut offset: usize) -> usize {
    offset = offset.min(text.len());
    while offset > 0 && !text.is_char_boundary(offset) {
        offset -= 1;
    }
    offset
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    Warning,
    Error,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Label {
    pub span: Span,
    pub message: String,
}

/// A diagnostic: a stable code, a message, labelled spans (the first is the
/// primary one) and an optional help line.
#[derive(Debug, Clone, PartialEq)]
pub struct Diagnostic {
    pub code: Code,
    pub severity: Severity,
    pub message: String,
    pub labels: Vec<Label>,
    pub help: Option<String>,
    /// The file a diagnostic is about when no label can point into it (a
    /// file that could not be read has no text to label).
    pub path: Option<PathBuf>,
}

impl Diagnostic {
    pub fn error(code: Code, message: impl Into<String>) -> Self {
        Diagnostic {
            code,
            severity: Severity::Error,
            message: message.into(),
            labels: vec![],
            help: None,
            path: None,
        }
    }
    pub fn warning(code: Code, message: impl Into<String>) -> Self {
        Diagnostic {
            code,
            severity: Severity::Warning,
            message: message.into(),
            labels: vec![],
            help: None,
            path: None,
        }
    }
    pub fn with_label(mut self, span: Span, message: impl Into<String>) -> Self {
        self.labels.push(Label {
            span,
            message: message.into(),
        });
        self
    }
    pub fn with_path(mut self, path: impl Into<PathBuf>) -> Self {
        self.path = Some(path.into());
        self
    }
    pub fn with_help(mut self, help: impl Into<String>) -> Self {
        self.help = Some(help.into());
        self
    }
    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }
    pub fn primary_span(&self) -> Option<Span> {
        self.labels.first().map(|l| l.span)
    }
}

/// Diagnostics collected by a stage; `has_errors` decides whether the stage's
/// result may be used.
#[derive(Debug, Clone, Default)]
pub struct Diagnostics(pub Vec<Diagnostic>);

impl Diagnostics {
    pub fn push(&mut self, d: Diagnostic) {
        self.0.push(d);
    }
    pub fn has_errors(&self) -> bool {
        self.0.iter().any(Diagnostic::is_error)
    }
    pub fn extend(&mut self, other: impl IntoIterator<Item = Diagnostic>) {
        self.0.extend(other);
    }
    pub fn iter(&self) -> impl Iterator<Item = &Diagnostic> {
        self.0.iter()
    }
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }
    pub fn len(&self) -> usize {
        self.0.len()
    }
}

/// The closest candidate to `name` by edit distance, if close enough to be a
/// plausible typo ("did you mean").
pub fn did_you_mean<'a>(
    name: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Option<&'a str> {
    let limit = (name.chars().count() / 3).max(1);
    candidates
        .into_iter()
        .map(|c| (edit_distance(name, c), c))
        .filter(|(d, c)| *d <= limit && *c != name)
        .min_by(|a, b| a.0.cmp(&b.0).then(a.1.cmp(b.1)))
        .map(|(_, c)| c)
}

/// Edits between two names, ignoring case, where swapping two adjacent
/// letters counts as one edit (`kcta` is one edit from `kcat`): the
/// optimal-string-alignment distance.
fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().flat_map(char::to_lowercase).collect();
    let b: Vec<char> = b.chars().flat_map(char::to_lowercase).collect();
    let mut before: Vec<usize> = Vec::new();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for i in 1..=a.len() {
        let mut cur = vec![i; b.len() + 1];
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            cur[j] = (prev[j] + 1).min(cur[j - 1] + 1).min(prev[j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                cur[j] = cur[j].min(before[j - 2] + 1);
            }
        }
        before = std::mem::replace(&mut prev, cur);
    }
    prev[b.len()]
}

fn lone_carriage_returns_to_line_feeds(text: String) -> String {
    let mut bytes = text.into_bytes();
    for i in 0..bytes.len() {
        if bytes[i] == b'\r' && bytes.get(i + 1) != Some(&b'\n') {
            bytes[i] = b'\n';
        }
    }
    // Replacing one ASCII byte by another keeps the text valid UTF-8.
    String::from_utf8(bytes).expect("ASCII-for-ASCII replacement")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn suggests_close_names_only() {
        assert_eq!(
            did_you_mean("k_of", ["k_on", "k_off", "k_cat"]),
            Some("k_off")
        );
        assert_eq!(did_you_mean("zzz", ["k_on", "k_off"]), None);
        // Two swapped letters are one slip of the fingers (the
        // Damerau–Levenshtein view of typing errors; common practice).
        assert_eq!(did_you_mean("kcta", ["kcat", "Km"]), Some("kcat"));
        assert_eq!(edit_distance("abcd", "badc"), 2);
    }

    #[test]
    fn line_and_column_count_characters() {
        let mut map = SourceMap::new();
        let id = map.add("x.mech".into(), "ab\nµc d".into());
        assert_eq!(map.line_col(id, 0), (1, 1));
        assert_eq!(map.line_col(id, 3), (2, 1));
        assert_eq!(map.line_col(id, 6), (2, 3));
    }
}
