//! Where a command's outputs go, and committing them all together.
//!
//! Why: a command's outputs are checked before any work (a path that cannot
//! be written is a usage error, exit 2, found in milliseconds rather than
//! after an hour's scan), and written only after everything is computed,
//! all at once, so a failed command leaves every old file as it was and
//! never a mismatched pair (a new `.h` beside an old `.c`).
//!
//! Invariants:
//! - only a regular file or a new path is replaced, by a temporary file in
//!   the same folder renamed over it; a character device, a FIFO, a socket,
//!   `-` (standard output) and anything under `/dev` or `/proc` (such as
//!   `/dev/stdout`, `/proc/self/fd/1`) is written directly, since replacing
//!   it would destroy a device node or write past the stream a shell set up;
//! - a symlink is followed: the file it names is replaced, the link stays;
//! - an existing file that is read-only is refused, never replaced, and a
//!   replaced file keeps its mode (and, where the process may, its owner);
//! - one path given to two outputs of a command is a usage error;
//! - nothing is renamed into place until every output is staged.

use super::common::{refuse_input_overwrite, writing_guard};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Where one output goes, decided before the command does any work.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Sink {
    /// `-`: the command's standard output.
    Stdout,
    /// A character device, FIFO, socket, or a path under `/dev` or `/proc`:
    /// opened and written directly, never replaced.
    Stream(PathBuf),
    /// A regular file or a new path (symlinks resolved): replaced
    /// atomically. `shown` is the path as the user wrote it.
    File { target: PathBuf, shown: PathBuf },
}

impl Sink {
    /// The path as the user gave it, for messages.
    pub fn shown(&self) -> String {
        match self {
            Sink::Stdout => "standard output".into(),
            Sink::Stream(p) => p.display().to_string(),
            Sink::File { shown, .. } => shown.display().to_string(),
        }
    }
}

/// Decides where `path` is written and checks, before any work, that it
/// can be: its folder exists and is writable, it is not a folder, not a
/// read-only file, not a block device.
pub fn sink_for(path: &Path) -> Result<Sink, String> {
    let shown = path.display();
    if path.as_os_str() == "-" {
        return Ok(Sink::Stdout);
    }
    if path.as_os_str().is_empty() {
        return Err("an empty output path".into());
    }
    if is_system_stream_path(path) {
        return Ok(Sink::Stream(path.to_path_buf()));
    }
    match std::fs::metadata(path) {
        Ok(meta) => {
            let kind = meta.file_type();
            if kind.is_dir() {
                return Err(format!("{shown} is a directory"));
            }
            if !kind.is_file() {
                #[cfg(unix)]
                {
                    use std::os::unix::fs::FileTypeExt;
                    if kind.is_block_device() {
                        return Err(format!(
                            "{shown} is a block device; refusing to write to it"
                        ));
                    }
                }
                return Ok(Sink::Stream(path.to_path_buf()));
            }
            let target =
                std::fs::canonicalize(path).map_err(|e| format!("cannot resolve {shown}: {e}"))?;
            if is_system_stream_path(&target) {
                return Ok(Sink::Stream(path.to_path_buf()));
            }
            refuse_read_only(&target, &meta, path)?;
            check_folder_writable(&target, path)?;
            Ok(Sink::File {
                target,
                shown: path.to_path_buf(),
            })
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            if path.to_string_lossy().ends_with('/') {
                return Err(format!("{shown} names a directory, not a file"));
            }
            // A dangling symlink is replaced by the new file, as a new
            // path would be; its folder is what must exist.
            check_folder_writable(path, path)?;
            Ok(Sink::File {
                target: path.to_path_buf(),
                shown: path.to_path_buf(),
            })
        }
        Err(e) => Err(format!("cannot write {shown}: {e}")),
    }
}

/// Sinks for every output of one command, refusing one path given twice
/// and any input file of the command.
pub fn sinks_for(paths: &[&Path], inputs: &[PathBuf]) -> Result<Vec<Sink>, String> {
    let mut sinks: Vec<Sink> = Vec::with_capacity(paths.len());
    for path in paths {
        let sink = sink_for(path)?;
        if let Sink::File { target, .. } = &sink {
            refuse_input_overwrite(target, inputs)?;
        }
        if let Some(twice) = sinks.iter().find(|s| same_destination(s, &sink)) {
            return Err(format!(
                "{} is given for two outputs; each output needs a path of its own",
                twice.shown()
            ));
        }
        sinks.push(sink);
    }
    Ok(sinks)
}

fn same_destination(a: &Sink, b: &Sink) -> bool {
    match (a, b) {
        (Sink::Stdout, Sink::Stdout) => true,
        (Sink::Stream(x), Sink::Stream(y)) => x == y,
        (Sink::File { target: x, .. }, Sink::File { target: y, .. }) => {
            let absolute = |p: &Path| match (p.parent(), p.file_name()) {
                (Some(dir), Some(name)) => {
                    let dir = if dir.as_os_str().is_empty() {
                        Path::new(".")
                    } else {
                        dir
                    };
                    std::fs::canonicalize(dir).map(|d| d.join(name)).ok()
                }
                _ => None,
            };
            x == y || (absolute(x).is_some() && absolute(x) == absolute(y))
        }
        _ => false,
    }
}

/// Paths the system provides as views of streams and devices: replacing
/// one with a regular file would detach it from what it stood for.
fn is_system_stream_path(path: &Path) -> bool {
    path.starts_with("/dev") || path.starts_with("/proc")
}

fn refuse_read_only(target: &Path, meta: &std::fs::Metadata, shown: &Path) -> Result<(), String> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        // The mode is the owner's statement, even for a superuser whom
        // access(2) would let through.
        let no_write_bits = meta.permissions().mode() & 0o222 == 0;
        if no_write_bits || !access_allows(target, libc::W_OK) {
            return Err(format!(
                "{} is read-only; refusing to replace it (change its mode first)",
                shown.display()
            ));
        }
    }
    #[cfg(not(unix))]
    if meta.permissions().readonly() {
        return Err(format!(
            "{} is read-only; refusing to replace it",
            shown.display()
        ));
    }
    let _ = target;
    Ok(())
}

fn check_folder_writable(target: &Path, shown: &Path) -> Result<(), String> {
    let dir = folder_of(target);
    match std::fs::metadata(&dir) {
        Ok(m) if m.is_dir() => {}
        Ok(_) => {
            return Err(format!(
                "cannot write {}: {} is not a directory",
                shown.display(),
                dir.display()
            ));
        }
        Err(_) => {
            return Err(format!(
                "cannot write {}: the directory {} does not exist",
                shown.display(),
                dir.display()
            ));
        }
    }
    #[cfg(unix)]
    if !access_allows(&dir, libc::W_OK | libc::X_OK) {
        return Err(format!(
            "cannot write {}: the directory {} is not writable",
            shown.display(),
            dir.display()
        ));
    }
    Ok(())
}

#[cfg(unix)]
fn access_allows(path: &Path, mode: libc::c_int) -> bool {
    use std::os::unix::ffi::OsStrExt;
    let Ok(c) = std::ffi::CString::new(path.as_os_str().as_bytes()) else {
        return false;
    };
    // SAFETY: `c` is a valid NUL-terminated path for the call's duration.
    unsafe { libc::access(c.as_ptr(), mode) == 0 }
}

fn folder_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

enum Content {
    /// A temporary file beside the target, renamed over it at commit.
    Temporary(tempfile::NamedTempFile),
    /// Bytes for a stream, written at commit.
    Bytes(Vec<u8>),
}

/// A command's outputs, staged one by one and committed together. From the
/// first staged output to the commit the interrupt guard is held, so an
/// interrupt waits until the temporary files are in place or removed.
#[derive(Default)]
pub struct Staged {
    entries: Vec<(Sink, Content)>,
    no_interrupt: Option<std::sync::MutexGuard<'static, ()>>,
}

impl Staged {
    pub fn new() -> Staged {
        Staged::default()
    }

    /// Stages `bytes` for `sink`.
    pub fn bytes(&mut self, sink: &Sink, bytes: &[u8]) -> Result<(), String> {
        self.with_file(sink, ".tmp", |tmp| {
            std::fs::write(tmp, bytes).map_err(|e| format!("cannot write {}: {e}", sink.shown()))
        })
    }

    /// Stages the file `fill` writes at the path it is given (for writers
    /// that create their own file, such as the figure back ends; `suffix`
    /// is the extension they go by).
    pub fn with_file(
        &mut self,
        sink: &Sink,
        suffix: &str,
        fill: impl FnOnce(&Path) -> Result<(), String>,
    ) -> Result<(), String> {
        if self.no_interrupt.is_none() {
            self.no_interrupt = Some(writing_guard());
        }
        let content = match sink {
            Sink::File { target, .. } => {
                let tmp = temporary_beside(target, suffix, sink)?;
                fill(tmp.path())?;
                tmp.as_file()
                    .sync_all()
                    .map_err(|e| format!("cannot write {}: {e}", sink.shown()))?;
                Content::Temporary(tmp)
            }
            Sink::Stdout | Sink::Stream(_) => {
                let tmp = tempfile::Builder::new()
                    .prefix(".ratewright-")
                    .suffix(suffix)
                    .tempfile()
                    .map_err(|e| format!("cannot create a temporary file: {e}"))?;
                fill(tmp.path())?;
                Content::Bytes(
                    std::fs::read(tmp.path())
                        .map_err(|e| format!("cannot write {}: {e}", sink.shown()))?,
                )
            }
        };
        self.entries.push((sink.clone(), content));
        Ok(())
    }

    /// Puts every staged output in place, under the interrupt guard.
    pub fn commit(mut self) -> Result<(), String> {
        let _no_interrupt = self.no_interrupt.take().unwrap_or_else(writing_guard);
        for (sink, content) in std::mem::take(&mut self.entries) {
            match (sink, content) {
                (Sink::File { target, shown }, Content::Temporary(tmp)) => {
                    tmp.persist(&target)
                        .map_err(|e| format!("cannot write {}: {}", shown.display(), e.error))?;
                }
                (Sink::Stdout, Content::Bytes(b)) => {
                    let mut out = std::io::stdout().lock();
                    out.write_all(&b)
                        .and_then(|()| out.flush())
                        .map_err(|_| "cannot write to standard output".to_string())?;
                }
                (Sink::Stream(path), Content::Bytes(b)) => {
                    let mut f = std::fs::OpenOptions::new()
                        .write(true)
                        .open(&path)
                        .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
                    f.write_all(&b)
                        .map_err(|e| format!("cannot write {}: {e}", path.display()))?;
                }
                (Sink::File { .. }, Content::Bytes(_))
                | (Sink::Stdout | Sink::Stream(_), Content::Temporary(_)) => {
                    unreachable!("with_file stages a temporary file exactly for File sinks")
                }
            }
        }
        Ok(())
    }
}

/// A temporary file in the target's folder with the mode (and, where
/// permitted, the owner) of the file it replaces; a new file gets the mode
/// of any new file (0666 less the umask), not the temporary's private 0600.
fn temporary_beside(
    target: &Path,
    suffix: &str,
    sink: &Sink,
) -> Result<tempfile::NamedTempFile, String> {
    let dir = folder_of(target);
    let existing = std::fs::metadata(target).ok();
    let mut builder = tempfile::Builder::new();
    builder.prefix(".ratewright-").suffix(suffix);
    #[cfg(unix)]
    builder.permissions(std::os::unix::fs::PermissionsExt::from_mode(0o666));
    let tmp = builder
        .tempfile_in(&dir)
        .map_err(|e| format!("cannot create a temporary file in {}: {e}", dir.display()))?;
    if let Some(meta) = existing {
        tmp.as_file()
            .set_permissions(meta.permissions())
            .map_err(|e| format!("cannot write {}: {e}", sink.shown()))?;
        #[cfg(unix)]
        {
            use std::os::unix::fs::MetadataExt;
            use std::os::unix::io::AsRawFd;
            // Only a superuser may give a file away; for others the file
            // is theirs already or the group is theirs to keep.
            // SAFETY: the descriptor is open for the call's duration.
            let _ = unsafe { libc::fchown(tmp.as_file().as_raw_fd(), meta.uid(), meta.gid()) };
        }
    }
    Ok(tmp)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_are_written_directly_and_files_replaced() {
        assert_eq!(sink_for(Path::new("-")).unwrap(), Sink::Stdout);
        assert!(matches!(
            sink_for(Path::new("/dev/null")).unwrap(),
            Sink::Stream(_)
        ));
        assert!(matches!(
            sink_for(Path::new("/dev/stdout")).unwrap(),
            Sink::Stream(_)
        ));
        let dir = tempfile::tempdir().unwrap();
        assert!(sink_for(dir.path()).unwrap_err().contains("is a directory"));
        let missing = dir.path().join("nodir").join("x.csv");
        assert!(sink_for(&missing).unwrap_err().contains("does not exist"));
        let new = dir.path().join("x.csv");
        assert!(matches!(sink_for(&new).unwrap(), Sink::File { .. }));
        let twice = sinks_for(&[new.as_path(), new.as_path()], &[]);
        assert!(twice.unwrap_err().contains("two outputs"));
    }

    #[cfg(unix)]
    #[test]
    fn read_only_files_are_refused_and_kept() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let kept = dir.path().join("kept.csv");
        std::fs::write(&kept, "old").unwrap();
        std::fs::set_permissions(&kept, std::fs::Permissions::from_mode(0o444)).unwrap();
        assert!(sink_for(&kept).unwrap_err().contains("read-only"));
        assert_eq!(std::fs::read_to_string(&kept).unwrap(), "old");
    }

    #[test]
    fn nothing_is_in_place_before_commit() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("a.txt");
        let b = dir.path().join("b.txt");
        std::fs::write(&a, "old a").unwrap();
        let sinks = sinks_for(&[a.as_path(), b.as_path()], &[]).unwrap();
        let mut staged = Staged::new();
        staged.bytes(&sinks[0], b"new a").unwrap();
        staged.bytes(&sinks[1], b"new b").unwrap();
        assert_eq!(std::fs::read_to_string(&a).unwrap(), "old a");
        assert!(!b.exists());
        staged.commit().unwrap();
        assert_eq!(std::fs::read_to_string(&a).unwrap(), "new a");
        assert_eq!(std::fs::read_to_string(&b).unwrap(), "new b");
    }
}
