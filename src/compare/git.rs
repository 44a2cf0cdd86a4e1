//! A side of a comparison read from a git revision: `REV:PATH`.
//!
//! Why through a temporary directory: the loader resolves `use "x.mech"`
//! against the file system, and a file read from a revision must include the
//! files of that same revision. So the file and, following its `use` lines,
//! every file it includes are read with `git show REV:path` into a private
//! temporary directory at their paths inside the repository, loaded from
//! there, and the loaded sources renamed back to `REV:path` so diagnostics
//! point at what the user named.
//!
//! PATH is relative to the current directory (like the other argument), not
//! to the repository's top; an absolute PATH works too. An argument that is
//! an existing file is always read as a file, never as `REV:PATH`.

use crate::diagnostics::{Code, Diagnostic, SourceMap};
use crate::model::{self, Loaded};
use crate::syntax::{self, StatementKind};
use std::collections::BTreeSet;
use std::path::{Component, Path, PathBuf};
use std::process::Command;

/// Where a side of a comparison comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Source {
    File(PathBuf),
    Revision { rev: String, path: PathBuf },
}

/// Reads a command-line argument: an existing file wins; otherwise
/// `REV:PATH` with a non-empty REV and PATH names a file in a revision.
pub fn classify(arg: &str) -> Source {
    if Path::new(arg).exists() {
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

/// Most files one revision read may pull in through `use`.
const MAX_FILES: usize = 10_000;

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

/// `a/./b/../c` → `a/c`, without touching the file system; `None` if `..`
/// climbs above the start.
fn normalize(path: &Path) -> Option<PathBuf> {
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

/// The one object a revision names, as git's hash. A revision is text the
/// user typed, handed to git: one that starts with `-` would be read as an
/// option (`--output=FILE` writes a file anywhere), and a range such as
/// `HEAD~1..HEAD` names no single tree. Both are refused, and git is told
/// where its options end.
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

/// Reads `rev:inside` and, following `use`, every file it includes, into `root`.
fn fetch(
    rev: &str,
    inside: &Path,
    top: &Path,
    root: &Path,
    seen: &mut BTreeSet<PathBuf>,
) -> Result<(), Diagnostic> {
    if !seen.insert(inside.to_path_buf()) {
        return Ok(());
    }
    if seen.len() > MAX_FILES {
        return Err(Diagnostic::error(
            Code::InputTooLarge,
            format!(
                "more than {MAX_FILES} files included from {rev}:{}",
                git_path(inside)
            ),
        ));
    }
    let spec = format!("{rev}:{}", git_path(inside));
    let bytes =
        run_git(top, &["show", "--no-textconv", "--end-of-options", &spec]).map_err(|d| {
            git_error(
                format!("cannot read {spec} from git: {}", d.message),
                d.help.as_deref().unwrap_or(""),
            )
        })?;
    let target = root.join(inside);
    if let Some(dir) = target.parent() {
        std::fs::create_dir_all(dir).map_err(|e| {
            git_error(
                format!("cannot create a temporary directory: {e}"),
                "check the temporary directory's free space",
            )
        })?;
    }
    std::fs::write(&target, &bytes).map_err(|e| {
        git_error(
            format!("cannot write a temporary copy of {spec}: {e}"),
            "check the temporary directory's free space",
        )
    })?;
    // Files that do not parse are left to the loader, which reports them.
    let Ok(text) = String::from_utf8(bytes) else {
        return Ok(());
    };
    let text = text.strip_prefix('\u{FEFF}').unwrap_or(&text);
    let Ok(tree) = syntax::parse(text, crate::diagnostics::FileId(0)) else {
        return Ok(());
    };
    let base = inside.parent().map(Path::to_path_buf).unwrap_or_default();
    for st in tree.statements() {
        if let StatementKind::Use { path, span } = &st.kind {
            let line = text[..span.start.min(text.len())].matches('\n').count() + 1;
            let Some(included) = normalize(&base.join(path)) else {
                return Err(git_error(
                    format!(
                        "`use \"{path}\"` in {spec} (line {line}) points outside the repository"
                    ),
                    "a file read from a revision can include only files of the same repository",
                ));
            };
            fetch(rev, &included, top, root, seen).map_err(|d| {
                let message = format!(
                    "cannot include \"{path}\" from {spec} (line {line}): {}",
                    d.message
                );
                Diagnostic { message, ..d }
            })?;
        }
    }
    Ok(())
}

/// Loads `rev:path` (path relative to `cwd`) with the files it includes
/// from the same revision.
pub fn load_revision(rev: &str, path: &Path, cwd: &Path) -> Result<Loaded, Diagnostic> {
    let (inside, top) = locate(path, cwd)?;
    let commit = verify_revision(rev, &top)?;
    let temp = tempfile::Builder::new()
        .prefix("ratewright-rev-")
        .tempdir()
        .map_err(|e| {
            git_error(
                format!("cannot create a temporary directory: {e}"),
                "check the temporary directory's free space",
            )
        })?;
    let root = temp
        .path()
        .canonicalize()
        .unwrap_or_else(|_| temp.path().to_path_buf());
    fetch(&commit, &inside, &top, &root, &mut BTreeSet::new()).map_err(|d| Diagnostic {
        message: d.message.replace(&commit, rev),
        ..d
    })?;
    let loaded = model::load_path(&root.join(&inside));
    Ok(relabel(loaded, &root, rev))
}

/// Names the temporary copies `rev:path` again, in the sources and in the
/// diagnostics' text.
fn relabel(loaded: Loaded, root: &Path, rev: &str) -> Loaded {
    let mut sources = SourceMap::new();
    for f in loaded.sources.files() {
        let shown = match f.path.strip_prefix(root) {
            Ok(inside) => PathBuf::from(format!("{rev}:{}", git_path(inside))),
            Err(_) => f.path.clone(),
        };
        sources.add(shown, f.text.clone());
    }
    let prefix = format!("{}/", root.display());
    let fix = |s: &str| s.replace(&prefix, &format!("{rev}:"));
    let diagnostics = loaded
        .diagnostics
        .into_iter()
        .map(|mut d| {
            d.message = fix(&d.message);
            d.help = d.help.as_deref().map(fix);
            d.labels
                .iter_mut()
                .for_each(|l| l.message = fix(&l.message));
            d
        })
        .collect();
    Loaded {
        sources,
        model: loaded.model,
        diagnostics,
    }
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
        assert_eq!(
            normalize(Path::new("a/./b/../c.mech")),
            Some(PathBuf::from("a/c.mech"))
        );
        assert_eq!(normalize(Path::new("../x.mech")), None);
    }
}
