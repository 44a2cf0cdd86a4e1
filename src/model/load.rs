//! Entry points: load a mechanism from a path or a string.

use super::Model;
use crate::diagnostics::{Diagnostic, SourceMap};
use std::path::Path;

/// The result of loading: all files read, the model when there were no
/// errors, and every diagnostic (warnings too).
#[derive(Debug, Clone)]
pub struct Loaded {
    pub sources: SourceMap,
    pub model: Option<Model>,
    pub diagnostics: Vec<Diagnostic>,
}

/// Reads, parses and lowers a mechanism file and the files it `use`s.
pub fn load_path(path: &Path) -> Loaded {
    super::lower::load_path(path)
}

/// Reads, parses and lowers the file at `path` of `sources` and the files
/// it `use`s, read from the same sources.
pub fn load_with(sources: &dyn super::source::Sources, path: &Path) -> Loaded {
    super::lower::load_with(sources, path)
}

/// Parses and lowers mechanism text; `path` names it in diagnostics and is
/// the base for `use` paths.
pub fn load_str(text: &str, path: &Path) -> Loaded {
    super::lower::load_str(text, path)
}
