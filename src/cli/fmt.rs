//! `ratewright fmt FILE... [--check]`: rewrite files in the canonical layout.

use super::common::{EXIT_MODEL, EXIT_OK, EXIT_USAGE, print_diagnostics, write_atomic};
use crate::diagnostics::{Code, SourceMap};
use crate::model::source::{Disk, Sources};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism files.
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Write nothing; exit 1 if a file is not in canonical layout.
    #[arg(long)]
    pub check: bool,
}

pub fn run(args: &Args) -> ExitCode {
    let mut status = EXIT_OK;
    for path in &args.files {
        // fmt rewrites files in place: anything but a regular file (a FIFO
        // would block the read forever, a device would be replaced) is
        // refused before it is opened.
        match std::fs::metadata(path) {
            Ok(m) if !m.is_file() => {
                stderr_line!(
                    "error: {} is not a regular file; fmt reads and rewrites regular files only",
                    path.display()
                );
                status = EXIT_USAGE;
                continue;
            }
            _ => {}
        }
        let read = match Disk.read(path) {
            Ok(read) => read,
            Err(e) if e.diagnostic.code == Code::FileRead => {
                stderr_line!("error: {}", e.diagnostic.message);
                status = EXIT_USAGE;
                continue;
            }
            Err(e) => {
                // Not UTF-8 or too large: located at the first bad byte.
                let mut sources = SourceMap::new();
                let d = e.locate(&mut sources);
                print_diagnostics(&[d], &sources);
                status = status.max(EXIT_MODEL);
                continue;
            }
        };
        let body = read.text.as_str();
        let text = if read.had_bom {
            format!("\u{FEFF}{body}")
        } else {
            body.to_string()
        };
        let mut sources = SourceMap::new();
        let id = sources.add(path.clone(), body.to_string());
        let tree = match crate::syntax::parse(body, id) {
            Ok(t) => t,
            Err(diags) => {
                print_diagnostics(&diags, &sources);
                status = status.max(EXIT_MODEL);
                continue;
            }
        };
        let formatted = crate::syntax::format::format_file(&tree, body);
        if formatted == text {
            continue;
        }
        if args.check {
            stderr_line!("{} is not formatted", path.display());
            status = status.max(EXIT_MODEL);
        } else {
            // The rename that makes the write atomic replaces a directory
            // entry: through a symlink it must replace the link's target
            // (the link stays a link), never the link itself.
            let target = match std::fs::canonicalize(path) {
                Ok(t) => t,
                Err(e) => {
                    stderr_line!("error: cannot resolve {}: {e}", path.display());
                    status = status.max(EXIT_MODEL);
                    continue;
                }
            };
            if let Err(e) = super::output::sink_for(&target) {
                stderr_line!("error: {e}");
                status = status.max(EXIT_MODEL);
                continue;
            }
            let hard_linked = has_other_hard_links(&target);
            if let Err(e) = write_atomic(&target, formatted.as_bytes(), &[]) {
                stderr_line!("error: {e}");
                status = status.max(EXIT_MODEL);
            } else {
                stderr_line!("formatted {}", path.display());
                if hard_linked {
                    stderr_line!(
                        "note: {} had other hard links; they keep the old text (the file was replaced, not edited in place)",
                        path.display()
                    );
                }
            }
        }
    }
    ExitCode::from(status)
}

/// Whether the file has names besides this one. The atomic rename gives
/// the path a new file, so those other names keep the old text
/// (docs/reliability.md: atomicity is kept and the split reported).
fn has_other_hard_links(path: &std::path::Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        std::fs::metadata(path).is_ok_and(|m| m.nlink() > 1)
    }
    #[cfg(not(unix))]
    {
        let _ = path;
        false
    }
}
