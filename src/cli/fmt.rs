//! `ratewright fmt FILE... [--check]`: rewrite files in the canonical layout.

use super::common::{EXIT_MODEL, EXIT_OK, EXIT_USAGE, print_diagnostics, write_atomic};
use crate::diagnostics::SourceMap;
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
        let text = match std::fs::read(path) {
            Ok(bytes) => match String::from_utf8(bytes) {
                Ok(t) => t,
                Err(_) => {
                    eprintln!("error: {} is not UTF-8 text", path.display());
                    status = status.max(EXIT_MODEL);
                    continue;
                }
            },
            Err(e) => {
                eprintln!("error: cannot read {}: {e}", path.display());
                status = EXIT_USAGE;
                continue;
            }
        };
        let body = text.strip_prefix('\u{FEFF}').unwrap_or(&text);
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
            eprintln!("{} is not formatted", path.display());
            status = status.max(EXIT_MODEL);
        } else if let Err(e) = write_atomic(path, formatted.as_bytes(), &[]) {
            eprintln!("error: {e}");
            status = status.max(EXIT_MODEL);
        } else {
            eprintln!("formatted {}", path.display());
        }
    }
    ExitCode::from(status)
}
