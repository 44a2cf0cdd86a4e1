//! A side of a comparison: a file, or `REV:PATH` read from a git revision
//! through [`GitRevision`] (which reads the file and, following its `use`
//! lines, the files of the same revision into memory).
//!
//! PATH is relative to the current directory (like the other argument), not
//! to the repository's top; an absolute PATH works too. An argument that is
//! an existing file is always read as a file, never as `REV:PATH`.

use crate::diagnostics::Diagnostic;
use crate::model::source::{GitRevision, disk};
use crate::model::{self, Loaded};
use std::path::{Path, PathBuf};

/// Where a side of a comparison comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Source {
    File(PathBuf),
    Revision { rev: String, path: PathBuf },
}

/// Reads a command-line argument: an existing file wins; otherwise
/// `REV:PATH` with a non-empty REV and PATH names a file in a revision.
pub fn classify(arg: &str) -> Source {
    if disk::exists(Path::new(arg)) {
        return Source::File(PathBuf::from(arg));
    }
    match arg.split_once(':') {
        Some((rev, path)) if !rev.is_empty() && !path.is_empty() => Source::Revision {
            rev: rev.to_string(),
            path: PathBuf::from(path),
        },
        _ => Source::File(PathBuf::from(arg)),
    }
}

/// Loads `rev:path` (path relative to `cwd`) with the files it includes
/// from the same revision.
pub fn load_revision(rev: &str, path: &Path, cwd: &Path) -> Result<Loaded, Diagnostic> {
    let (revision, inside) = GitRevision::open(rev, path, cwd)?;
    Ok(model::load_with(&revision, &inside))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn existing_files_win_over_revision_syntax() {
        let dir = tempfile::tempdir().unwrap();
        let odd = dir.path().join("HEAD:m.mech");
        std::fs::write(&odd, "species A").unwrap();
        assert_eq!(classify(odd.to_str().unwrap()), Source::File(odd.clone()));
        assert_eq!(
            classify("HEAD~1:models/x.mech"),
            Source::Revision {
                rev: "HEAD~1".into(),
                path: PathBuf::from("models/x.mech")
            }
        );
        assert_eq!(classify(":x.mech"), Source::File(PathBuf::from(":x.mech")));
    }

    #[test]
    fn normalizing_refuses_to_climb_out() {
        use crate::model::source::normalize;
        assert_eq!(
            normalize(Path::new("a/./b/../c.mech")),
            Some(PathBuf::from("a/c.mech"))
        );
        assert_eq!(normalize(Path::new("../x.mech")), None);
    }
}
