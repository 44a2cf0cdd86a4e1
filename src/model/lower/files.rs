//! Reading the main file and, following `use`, every file it includes;
//! placing their statements in declaration order.
//!
//! Invariants: each file is parsed once (a file reached again through
//! another path is not read again); a file reached again through the chain
//! that is including it is a cycle error at the `use` line; an included
//! file's statements stand where its `use` is.

use super::*;
use crate::diagnostics::{Code, Diagnostic, FileId, SourceMap, Span};
use crate::syntax::{self, StatementKind};
use std::path::{Path, PathBuf};

pub fn load_path(path: &Path) -> Loaded {
    let mut sources = SourceMap::new();
    match read_source(path) {
        Ok(text) => {
            let id = sources.add(path.to_path_buf(), text);
            lower_from(sources, id)
        }
        Err(d) => {
            let d = locate_bad_bytes(d, path, &mut sources);
            Loaded {
                sources,
                model: None,
                diagnostics: vec![d],
            }
        }
    }
}

pub fn load_str(text: &str, path: &Path) -> Loaded {
    let mut sources = SourceMap::new();
    let text = text.strip_prefix('\u{FEFF}').unwrap_or(text).to_string();
    let id = sources.add(path.to_path_buf(), text);
    lower_from(sources, id)
}

/// Gives a not-UTF-8 error a label at the first bad byte: the file joins
/// the source map with invalid bytes shown as U+FFFD (the valid prefix, and
/// so the offset, is unchanged).
/// A file over the size limit gets a label at its start (only its first
/// line joins the source map).
pub(super) fn locate_bad_bytes(d: Diagnostic, path: &Path, sources: &mut SourceMap) -> Diagnostic {
    if d.code == Code::InputTooLarge {
        let mut head = Vec::new();
        let Ok(file) = std::fs::File::open(path) else {
            return d;
        };
        if std::io::Read::read_to_end(&mut std::io::Read::take(file, 256), &mut head).is_err() {
            return d;
        }
        let head = String::from_utf8_lossy(&head);
        let first_line = head.lines().next().unwrap_or("").to_string();
        let id = sources.add(path.to_path_buf(), first_line);
        return d.with_label(Span::new(id, 0, 0), "file starts here");
    }
    if d.code != Code::NotUtf8 {
        return d;
    }
    let Ok(bytes) = std::fs::read(path) else {
        return d;
    };
    let Err(e) = std::str::from_utf8(&bytes) else {
        return d;
    };
    let at = e.valid_up_to();
    let id = sources.add(
        path.to_path_buf(),
        String::from_utf8_lossy(&bytes).into_owned(),
    );
    d.with_label(Span::new(id, at, at + '\u{FFFD}'.len_utf8()), "not UTF-8")
}

/// Opens a file for reading. Opening a named pipe waits until something
/// opens it for writing, which may be never: a pipe is opened without
/// waiting and then switched back to blocking reads, so a pipe with a
/// writer is read to its end and one without reads as empty at once.
pub(super) fn open_without_waiting_for_a_writer(path: &Path) -> std::io::Result<std::fs::File> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::{FileTypeExt, OpenOptionsExt};
        use std::os::unix::io::AsRawFd;
        if std::fs::metadata(path).is_ok_and(|m| m.file_type().is_fifo()) {
            let file = std::fs::OpenOptions::new()
                .read(true)
                .custom_flags(libc::O_NONBLOCK)
                .open(path)?;
            // SAFETY: fcntl on a descriptor this function owns, with flags
            // read from it a moment before.
            let cleared = unsafe {
                let fd = file.as_raw_fd();
                let flags = libc::fcntl(fd, libc::F_GETFL);
                flags >= 0 && libc::fcntl(fd, libc::F_SETFL, flags & !libc::O_NONBLOCK) >= 0
            };
            if !cleared {
                return Err(std::io::Error::last_os_error());
            }
            return Ok(file);
        }
    }
    std::fs::File::open(path)
}

/// Reads a file as UTF-8 text, dropping a byte-order mark.
pub(super) fn read_source(path: &Path) -> Result<String, Diagnostic> {
    let read_error = |e: std::io::Error| {
        Diagnostic::error(
            Code::FileRead,
            format!("cannot read {}: {e}", path.display()),
        )
        .with_path(path)
        .with_help("check the path and the file's permissions")
    };
    // Read at most one byte past the limit, so an endless source (a device
    // such as /dev/zero) ends in a size error instead of exhausting memory.
    let mut bytes = Vec::new();
    std::io::Read::read_to_end(
        &mut std::io::Read::take(
            open_without_waiting_for_a_writer(path).map_err(read_error)?,
            syntax::parse::MAX_FILE_BYTES as u64 + 1,
        ),
        &mut bytes,
    )
    .map_err(read_error)?;
    if bytes.len() > syntax::parse::MAX_FILE_BYTES {
        return Err(Diagnostic::error(
            Code::InputTooLarge,
            format!(
                "{} is larger than {} bytes, the limit",
                path.display(),
                syntax::parse::MAX_FILE_BYTES
            ),
        )
        .with_help("split the mechanism into several files joined with `use`"));
    }
    match String::from_utf8(bytes) {
        Ok(s) => Ok(s.strip_prefix('\u{FEFF}').map(str::to_string).unwrap_or(s)),
        Err(e) => {
            let at = e.utf8_error().valid_up_to();
            let before = &e.as_bytes()[..at];
            let line = before.iter().filter(|&&b| b == b'\n').count() + 1;
            let col = at
                - before
                    .iter()
                    .rposition(|&b| b == b'\n')
                    .map(|p| p + 1)
                    .unwrap_or(0)
                + 1;
            let utf16 =
                e.as_bytes().starts_with(&[0xFF, 0xFE]) || e.as_bytes().starts_with(&[0xFE, 0xFF]);
            Err(Diagnostic::error(
                Code::NotUtf8,
                format!(
                    "{} is not UTF-8 text: invalid byte at line {line}, column {col} (byte {at})",
                    path.display()
                ),
            )
            .with_help(if utf16 {
                "the file starts with a UTF-16 byte-order mark: save it as UTF-8"
            } else {
                "save the file as UTF-8"
            }))
        }
    }
}

/// Appends `file`'s statements to `items`, with each file it `use`s placed
/// at its `use` statement; files already placed are skipped.
pub(super) fn place_statements<'t>(
    file: FileId,
    trees: &'t [(FileId, syntax::File)],
    sources: &SourceMap,
    placed: &mut Vec<FileId>,
    items: &mut Vec<Item<'t>>,
) {
    if placed.contains(&file) {
        return;
    }
    placed.push(file);
    let Some((_, tree)) = trees.iter().find(|(f, _)| *f == file) else {
        return;
    };
    let units = file_units(Some(tree), &mut Vec::new()).units;
    let base = sources
        .get(file)
        .and_then(|s| s.path.parent().map(Path::to_path_buf))
        .unwrap_or_default();
    for st in tree.statements() {
        if let StatementKind::Use { path, .. } = &st.kind {
            let target = base.join(path);
            let canonical = target.canonicalize().unwrap_or(target);
            let used = trees.iter().map(|(f, _)| *f).find(|f| {
                sources
                    .get(*f)
                    .map(|s| s.path.canonicalize().unwrap_or_else(|_| s.path.clone()))
                    == Some(canonical.clone())
            });
            if let Some(used) = used {
                place_statements(used, trees, sources, placed, items);
            }
        }
        items.push(Item {
            kind: &st.kind,
            span: st.span,
            units,
        });
    }
}

/// Parses `file` and, depth first, every file it `use`s. `trees` gets each
/// file once; a file reached again through the current chain is a cycle.
pub(super) fn collect_files(
    sources: &mut SourceMap,
    file: FileId,
    stack: &mut Vec<(PathBuf, PathBuf)>,
    trees: &mut Vec<(FileId, syntax::File)>,
    diags: &mut Vec<Diagnostic>,
) {
    let Some(src) = sources.get(file) else { return };
    let path = src.path.clone();
    let canonical = path.canonicalize().unwrap_or_else(|_| path.clone());
    let tree = match syntax::parse(&src.text, file) {
        Ok(t) => t,
        Err(errs) => {
            diags.extend(errs);
            return;
        }
    };
    stack.push((canonical, path.clone()));
    let uses: Vec<(String, Span)> = tree
        .statements()
        .filter_map(|s| match &s.kind {
            StatementKind::Use { path, span } => Some((path.clone(), *span)),
            _ => None,
        })
        .collect();
    trees.push((file, tree));
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    for (rel, span) in uses {
        if rel.trim().is_empty() {
            diags.push(
                Diagnostic::error(Code::FileRead, "cannot include \"\": the path is empty")
                    .with_label(span, "no file named")
                    .with_help("write the path of a .mech file, relative to this file"),
            );
            continue;
        }
        let target = base.join(&rel);
        let canonical = target.canonicalize().unwrap_or_else(|_| target.clone());
        if let Some(pos) = stack.iter().position(|(c, _)| *c == canonical) {
            diags.push(
                Diagnostic::error(
                    Code::UseCycle,
                    format!("`use \"{rel}\"` makes a cycle: the file includes itself"),
                )
                .with_label(span, "this file is already being included")
                .with_help(format!(
                    "chain: {} → {}",
                    stack[pos..]
                        .iter()
                        .map(|(_, shown)| shown.display().to_string())
                        .collect::<Vec<_>>()
                        .join(" → "),
                    stack[pos].1.display()
                )),
            );
            continue;
        }
        if trees.iter().any(|(f, _)| {
            sources
                .get(*f)
                .map(|s| s.path.canonicalize().unwrap_or_else(|_| s.path.clone()))
                == Some(canonical.clone())
        }) {
            continue; // already included through another path: declarations once
        }
        match read_source(&target) {
            Ok(text) => {
                let id = sources.add(target, text);
                collect_files(sources, id, stack, trees, diags);
            }
            Err(d) => {
                let mut d = locate_bad_bytes(d, &target, sources);
                // Labelled at the `use` line: a model error (exit 1), unlike
                // an unreadable file named on the command line (exit 2).
                d.labels.push(crate::diagnostics::Label {
                    span,
                    message: "included here".into(),
                });
                d.message = format!("cannot include \"{rel}\": {}", d.message);
                diags.push(d);
            }
        }
    }
    stack.pop();
}
