//! Text held in memory: a set of files given as strings, and one file's
//! text laid over another source (an editor buffer over the disk, a
//! mechanism with an extra line).
//!
//! Invariants: no file I/O here; paths are compared after lexical
//! normalization; a byte-order mark is dropped as from a file.

use super::{FileIdentity, ReadError, SourceText, Sources, beside, from_text, normalize};
use crate::diagnostics::{Code, Diagnostic};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Files held as strings, by path.
#[derive(Debug, Clone, Default)]
pub struct InMemory {
    files: BTreeMap<PathBuf, String>,
}

/// The line that starts each file in [`InMemory::from_bundle`]'s text:
/// `=== file NAME`.
const BUNDLE_MARK: &str = "=== file ";

fn key(path: &Path) -> PathBuf {
    normalize(path).unwrap_or_else(|| path.to_path_buf())
}

impl InMemory {
    pub fn new() -> Self {
        Self::default()
    }

    /// Adds (or replaces) the file at `path`.
    pub fn insert(&mut self, path: impl AsRef<Path>, text: impl Into<String>) -> &mut Self {
        self.files.insert(key(path.as_ref()), text.into());
        self
    }

    /// Several files in one string: each starts with a line
    /// `=== file NAME` and runs to the next such line. Text before the
    /// first such line is ignored.
    pub fn from_bundle(text: &str) -> Self {
        let mut files = InMemory::new();
        let mut current: Option<(String, String)> = None;
        for line in text.split_inclusive('\n') {
            if let Some(name) = line.strip_prefix(BUNDLE_MARK) {
                if let Some((path, body)) = current.take() {
                    files.insert(path, body);
                }
                current = Some((name.trim().to_string(), String::new()));
            } else if let Some((_, body)) = current.as_mut() {
                body.push_str(line);
            }
        }
        if let Some((path, body)) = current {
            files.insert(path, body);
        }
        files
    }
}

impl Sources for InMemory {
    fn resolve(&self, including: &Path, relative: &str) -> Result<PathBuf, Diagnostic> {
        Ok(key(&beside(including, relative)))
    }

    fn identity(&self, path: &Path) -> FileIdentity {
        FileIdentity::Path(key(path))
    }

    fn read(&self, path: &Path) -> Result<SourceText, ReadError> {
        match self.files.get(&key(path)) {
            Some(text) => Ok(from_text(text, path)),
            None => Err(Diagnostic::error(
                Code::FileRead,
                format!("cannot read {}: no such file", path.display()),
            )
            .with_path(path)
            .with_help("check the path")
            .into()),
        }
    }
}

/// One file's text in place of what `base` holds at that path; every other
/// path, and the resolution of `use` lines, is `base`'s.
#[derive(Debug, Clone)]
pub struct Overlay<'b, S: Sources> {
    pub base: &'b S,
    pub path: PathBuf,
    pub text: String,
}

impl<S: Sources> Sources for Overlay<'_, S> {
    fn resolve(&self, including: &Path, relative: &str) -> Result<PathBuf, Diagnostic> {
        self.base.resolve(including, relative)
    }

    fn identity(&self, path: &Path) -> FileIdentity {
        self.base.identity(path)
    }

    fn read(&self, path: &Path) -> Result<SourceText, ReadError> {
        if path == self.path || self.base.identity(path) == self.base.identity(&self.path) {
            Ok(from_text(&self.text, path))
        } else {
            self.base.read(path)
        }
    }
}
