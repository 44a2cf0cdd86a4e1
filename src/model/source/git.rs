//! Files of a git revision (`REV:PATH`), read into memory with `git show`.
//!
//! Why here: a file read from a revision must include (through `use`) the
//! files of that same revision, so the revision is a source like the disk,
//! and lowering follows its `use` lines through it. No temporary folder.
//!
//! Invariants: the revision is text the user typed, handed to git, so one
//! that starts with `-` (read as an option: `--output=FILE` writes a file
//! anywhere) or is a range (it names no single tree) is refused; what is
//! left is verified with `git rev-parse --verify` to one commit's tree, and
//! every git call ends git's options before it. Paths are inside the
//! repository (a `use` that climbs out is an error); diagnostics name files
//! `REV:PATH` as the user wrote the revision.

use super::{FileIdentity, ReadError, SourceText, Sources, beside, decode, normalize};
use crate::diagnostics::{Code, Diagnostic};
use std::cell::Cell;
use std::path::{Path, PathBuf};
use std::process::Command;

/// Most files one revision read may pull in through `use`.
const MAX_FILES: usize = 10_000;

/// One revision of a repository. Paths given to it are relative to the
/// repository's top.
#[derive(Debug)]
pub struct GitRevision {
    /// The revision as the user wrote it, for messages.
    rev: String,
    /// The tree it names, as git's hash.
    tree: String,
    top: PathBuf,
    files_read: Cell<usize>,
}

fn git_error(message: String, help: &str) -> Diagnostic {
    Diagnostic::error(Code::GitRead, message).with_help(help.to_string())
}

fn run_git(dir: &Path, args: &[&str]) -> Result<Vec<u8>, Diagnostic> {
    let out = Command::new("git")
        .arg("-C")
        .arg(dir)
        .args(args)
        .output()
        .map_err(|e| {
            git_error(
                format!("cannot run git: {e}"),
                "install git, or give this side as a file path",
            )
        })?;
    if out.status.success() {
        Ok(out.stdout)
    } else {
        let stderr = String::from_utf8_lossy(&out.stderr);
        let first = stderr
            .lines()
            .find(|l| !l.trim().is_empty())
            .unwrap_or("git failed")
            .trim()
            .to_string();
        Err(git_error(
            first,
            "check the revision and the path (`git log --oneline -- PATH` lists the revisions that touch it)",
        ))
    }
}

/// The path of `path` (relative to `cwd`) inside its repository, and the
/// repository's top directory.
fn locate(path: &Path, cwd: &Path) -> Result<(PathBuf, PathBuf), Diagnostic> {
    let absolute = normalize(&cwd.join(path)).ok_or_else(|| {
        git_error(
            format!("`{}` climbs above the file system root", path.display()),
            "give a path inside the repository",
        )
    })?;
    // The nearest directory that exists: the file may be gone from the working tree.
    let mut existing = absolute
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_else(|| cwd.to_path_buf());
    let mut rest = Vec::new();
    if let Some(name) = absolute.file_name() {
        rest.push(name.to_os_string());
    }
    while !existing.is_dir() {
        match (
            existing.file_name().map(|n| n.to_os_string()),
            existing.parent(),
        ) {
            (Some(name), Some(parent)) => {
                rest.push(name);
                existing = parent.to_path_buf();
            }
            _ => break,
        }
    }
    let top = run_git(&existing, &["rev-parse", "--show-toplevel"]).map_err(|d| {
        git_error(
            format!(
                "`{}` is not inside a git repository: {}",
                path.display(),
                d.message
            ),
            "run the command inside the repository, or give the path of the file in it",
        )
    })?;
    let top = PathBuf::from(String::from_utf8_lossy(&top).trim());
    let top = top.canonicalize().unwrap_or(top);
    let mut full = existing.canonicalize().unwrap_or(existing);
    for name in rest.iter().rev() {
        full.push(name);
    }
    let inside = full
        .strip_prefix(&top)
        .map(Path::to_path_buf)
        .map_err(|_| {
            git_error(
                format!(
                    "`{}` is outside the repository at {}",
                    path.display(),
                    top.display()
                ),
                "give a path inside the repository",
            )
        })?;
    Ok((inside, top))
}

/// Text of a path in the repository (slash-separated, as git wants it).
fn git_path(p: &Path) -> String {
    p.components()
        .map(|c| c.as_os_str().to_string_lossy().into_owned())
        .collect::<Vec<_>>()
        .join("/")
}

/// The one tree a revision names, as git's hash (see the head comment).
fn verify_revision(rev: &str, top: &Path) -> Result<String, Diagnostic> {
    let help = "give a single revision such as HEAD, HEAD~1, a tag or a commit hash, as REV:PATH";
    if rev.starts_with('-') {
        return Err(git_error(
            format!("`{rev}` is not a revision (it starts with `-`)"),
            help,
        ));
    }
    if rev.contains("..") {
        return Err(git_error(
            format!("`{rev}` is a range of revisions; a side of a comparison is one revision"),
            help,
        ));
    }
    let spec = format!("{rev}^{{tree}}");
    let out = run_git(
        top,
        &[
            "rev-parse",
            "--verify",
            "--quiet",
            "--end-of-options",
            &spec,
        ],
    )
    .map_err(|_| {
        git_error(
            format!("`{rev}` names no revision of this repository"),
            help,
        )
    })?;
    let hash = String::from_utf8_lossy(&out).trim().to_string();
    if hash.is_empty() || !hash.bytes().all(|b| b.is_ascii_hexdigit()) {
        return Err(git_error(format!("`{rev}` names no single revision"), help));
    }
    Ok(hash)
}

impl GitRevision {
    /// The revision `rev` of the repository that holds `path` (relative to
    /// `cwd`, like any other argument, or absolute), and the path of the
    /// file inside the repository, to load with it.
    pub fn open(rev: &str, path: &Path, cwd: &Path) -> Result<(GitRevision, PathBuf), Diagnostic> {
        let (inside, top) = locate(path, cwd)?;
        let tree = verify_revision(rev, &top)?;
        Ok((
            GitRevision {
                rev: rev.to_string(),
                tree,
                top,
                files_read: Cell::new(0),
            },
            inside,
        ))
    }

    /// How diagnostics name a file of the revision.
    fn shown(&self, inside: &Path) -> PathBuf {
        PathBuf::from(format!("{}:{}", self.rev, git_path(inside)))
    }
}

impl Sources for GitRevision {
    fn resolve(&self, including: &Path, relative: &str) -> Result<PathBuf, Diagnostic> {
        normalize(&beside(including, relative)).ok_or_else(|| {
            git_error(
                format!(
                    "`use \"{relative}\"` in {} points outside the repository",
                    self.shown(including).display()
                ),
                "a file read from a revision can include only files of the same repository",
            )
        })
    }

    fn identity(&self, path: &Path) -> FileIdentity {
        FileIdentity::Path(normalize(path).unwrap_or_else(|| path.to_path_buf()))
    }

    fn read(&self, path: &Path) -> Result<SourceText, ReadError> {
        let shown = self.shown(path);
        self.files_read.set(self.files_read.get() + 1);
        if self.files_read.get() > MAX_FILES {
            return Err(Diagnostic::error(
                Code::InputTooLarge,
                format!(
                    "more than {MAX_FILES} files included from {}",
                    self.shown(path).display()
                ),
            )
            .into());
        }
        let spec = format!("{}:{}", self.tree, git_path(path));
        let bytes = run_git(
            &self.top,
            &["show", "--no-textconv", "--end-of-options", &spec],
        )
        .map_err(|d| {
            git_error(
                format!(
                    "cannot read {} from git: {}",
                    shown.display(),
                    d.message.replace(&self.tree, &self.rev)
                ),
                d.help.as_deref().unwrap_or(""),
            )
        })?;
        decode(bytes, &shown)
    }
}
