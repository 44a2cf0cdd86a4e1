//! Files on disk: the source of every command that names a file.
//!
//! Invariants: a read takes at most one byte past the size limit (an
//! endless device such as /dev/zero ends in a size error, not exhausted
//! memory); a named pipe never blocks the open; a file is identified by
//! device and inode, so a hard link to a file already read is that file.

use super::{FileIdentity, ReadError, SourceText, Sources, beside, decode};
use crate::diagnostics::{Code, Diagnostic};
use std::path::{Path, PathBuf};

/// The file system, with `use` paths relative to the including file.
#[derive(Debug, Clone, Copy, Default)]
pub struct Disk;

/// Whether something exists at `path` (a command-line argument that names
/// an existing file is that file, never a `REV:PATH`).
pub fn exists(path: &Path) -> bool {
    path.exists()
}

impl Sources for Disk {
    fn resolve(&self, including: &Path, relative: &str) -> Result<PathBuf, Diagnostic> {
        Ok(beside(including, relative))
    }

    fn identity(&self, path: &Path) -> FileIdentity {
        #[cfg(unix)]
        {
            use std::os::unix::fs::MetadataExt;
            if let Ok(m) = std::fs::metadata(path) {
                return FileIdentity::Inode {
                    device: m.dev(),
                    inode: m.ino(),
                };
            }
        }
        FileIdentity::Path(path.canonicalize().unwrap_or_else(|_| path.to_path_buf()))
    }

    fn read(&self, path: &Path) -> Result<SourceText, ReadError> {
        let read_error = |e: std::io::Error| {
            Diagnostic::error(
                Code::FileRead,
                format!("cannot read {}: {e}", path.display()),
            )
            .with_path(path)
            .with_help("check the path and the file's permissions")
        };
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(
            &mut std::io::Read::take(
                open_without_waiting_for_a_writer(path).map_err(read_error)?,
                crate::syntax::parse::MAX_FILE_BYTES as u64 + 1,
            ),
            &mut bytes,
        )
        .map_err(read_error)?;
        decode(bytes, path)
    }
}

/// Opens a file for reading. Opening a named pipe waits until something
/// opens it for writing, which may be never: a pipe is opened without
/// waiting and then switched back to blocking reads, so a pipe with a
/// writer is read to its end and one without reads as empty at once.
fn open_without_waiting_for_a_writer(path: &Path) -> std::io::Result<std::fs::File> {
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
