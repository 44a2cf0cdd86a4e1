//! Sources: where lowering gets the text of a mechanism file and of every
//! file it `use`s.
//!
//! Why a trait: a model's text is not always on disk. An editor buffer, a
//! string from a caller, a set of files held in one string by a test, and
//! a file in a git revision (whose `use` lines must name files of the same
//! revision) all load through the same lowering. [`Sources`] turns a `use`
//! line into a path, says which file a path is, and reads it.
//!
//! Invariants: the only file I/O of the compiler is in the [`disk`] and
//! [`git`] implementations; bytes from either pass the same size limit,
//! UTF-8 check and byte-order-mark handling ([`decode`]), text held in
//! memory the same byte-order-mark handling ([`from_text`]); two paths
//! with the same [`FileIdentity`] are one file, read once.

pub mod disk;
pub mod git;
pub mod memory;

pub use disk::Disk;
pub use git::GitRevision;
pub use memory::{InMemory, Overlay};

use crate::diagnostics::{Code, Diagnostic, FileId, SourceMap, Span};
use std::ops::Range;
use std::path::{Component, Path, PathBuf};

/// A file's text, ready to parse.
#[derive(Debug, Clone)]
pub struct SourceText {
    /// The name diagnostics show for the file.
    pub shown: PathBuf,
    /// The text, without a leading byte-order mark.
    pub text: String,
    /// Whether the file started with a UTF-8 byte-order mark.
    pub had_bom: bool,
}

/// Which file a path is, so a file reached by two paths (a symbolic or a
/// hard link, `a/../b`) is read once and a cycle through either is seen.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub enum FileIdentity {
    /// A file on disk: its device and inode.
    Inode { device: u64, inode: u64 },
    /// A file known by a normalized path (in memory, in a revision, or on
    /// disk where the file does not exist).
    Path(PathBuf),
}

/// Why a file could not be read, with what of it can be shown to locate
/// the problem.
#[derive(Debug, Clone)]
pub struct ReadError {
    pub diagnostic: Diagnostic,
    pub excerpt: Option<Excerpt>,
}

/// Text to show for an unreadable file (invalid bytes as U+FFFD, the valid
/// prefix unchanged) and the bytes of it the diagnostic points at.
#[derive(Debug, Clone)]
pub struct Excerpt {
    pub shown: PathBuf,
    pub text: String,
    pub at: Range<usize>,
    pub label: &'static str,
}

impl From<Diagnostic> for ReadError {
    fn from(diagnostic: Diagnostic) -> Self {
        ReadError {
            diagnostic,
            excerpt: None,
        }
    }
}

impl ReadError {
    /// The diagnostic, labelled in the excerpt, which joins `sources` when
    /// there is one.
    pub fn locate(self, sources: &mut SourceMap) -> Diagnostic {
        match self.excerpt {
            Some(excerpt) => {
                let id: FileId = sources.add(excerpt.shown, excerpt.text);
                self.diagnostic.with_label(
                    Span::new(id, excerpt.at.start, excerpt.at.end),
                    excerpt.label,
                )
            }
            None => self.diagnostic,
        }
    }
}

/// Where lowering gets file text from.
pub trait Sources {
    /// The path a `use "relative"` line in the file at `including` names.
    fn resolve(&self, including: &Path, relative: &str) -> Result<PathBuf, Diagnostic>;
    /// Which file `path` is.
    fn identity(&self, path: &Path) -> FileIdentity;
    /// The file's text.
    // A read error is rare and carries a whole diagnostic; boxing it would
    // only move the allocation.
    #[allow(clippy::result_large_err)]
    fn read(&self, path: &Path) -> Result<SourceText, ReadError>;
}

/// The path `relative` names from the folder of the file at `including`
/// (as written: `..` is left to the source).
pub fn beside(including: &Path, relative: &str) -> PathBuf {
    including
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_default()
        .join(relative)
}

/// `a/./b/../c` → `a/c`, without touching the file system; `None` if `..`
/// climbs above the start.
pub fn normalize(path: &Path) -> Option<PathBuf> {
    let mut out = PathBuf::new();
    for c in path.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                if !out.pop() {
                    return None;
                }
            }
            other => out.push(other.as_os_str()),
        }
    }
    Some(out)
}

/// Text already held as a string → a file's text: a byte-order mark is
/// dropped (the parser applies the size limit to every text).
pub fn from_text(text: &str, shown: &Path) -> SourceText {
    match text.strip_prefix('\u{FEFF}') {
        Some(rest) => SourceText {
            shown: shown.to_path_buf(),
            text: rest.to_string(),
            had_bom: true,
        },
        None => SourceText {
            shown: shown.to_path_buf(),
            text: text.to_string(),
            had_bom: false,
        },
    }
}

/// Bytes of a file → its text: the size limit, the UTF-8 check (located at
/// the first bad byte) and a dropped byte-order mark, the same for every
/// source. `shown` names the file in messages.
#[allow(clippy::result_large_err)]
pub fn decode(bytes: Vec<u8>, shown: &Path) -> Result<SourceText, ReadError> {
    let limit = crate::syntax::parse::MAX_FILE_BYTES;
    if bytes.len() > limit {
        let head = String::from_utf8_lossy(&bytes[..bytes.len().min(256)]);
        let first_line = head.lines().next().unwrap_or("").to_string();
        return Err(ReadError {
            diagnostic: Diagnostic::error(
                Code::InputTooLarge,
                format!(
                    "{} is larger than {limit} bytes, the limit",
                    shown.display()
                ),
            )
            .with_help("split the mechanism into several files joined with `use`"),
            excerpt: Some(Excerpt {
                shown: shown.to_path_buf(),
                text: first_line,
                at: 0..0,
                label: "file starts here",
            }),
        });
    }
    match String::from_utf8(bytes) {
        Ok(s) => Ok(from_text(&s, shown)),
        Err(e) => {
            let at = e.utf8_error().valid_up_to();
            let bytes = e.into_bytes();
            let before = &bytes[..at];
            let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
            let col = at
                - before
                    .iter()
                    .rposition(|&b| b == b'\n')
                    .map(|p| p + 1)
                    .unwrap_or(0)
                + 1;
            let utf16 = bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]);
            Err(ReadError {
                diagnostic: Diagnostic::error(
                    Code::NotUtf8,
                    format!(
                        "{} is not UTF-8 text: invalid byte at line {line}, column {col} (byte {at})",
                        shown.display()
                    ),
                )
                .with_help(if utf16 {
                    "the file starts with a UTF-16 byte-order mark: save it as UTF-8"
                } else {
                    "save the file as UTF-8"
                }),
                excerpt: Some(Excerpt {
                    shown: shown.to_path_buf(),
                    text: String::from_utf8_lossy(&bytes).into_owned(),
                    at: at..at + '\u{FFFD}'.len_utf8(),
                    label: "not UTF-8",
                }),
            })
        }
    }
}

#[cfg(test)]
mod tests;
