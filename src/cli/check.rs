//! `ratewright check FILE...`: parse, resolve, check units and lint.

use super::Format;
use super::common::{
    EXIT_MODEL, EXIT_OK, EXIT_USAGE, names_an_unreadable_argument, print_diagnostics, write_stdout,
};
use crate::diagnostics::{Severity, to_json_value};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism files.
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// Treat warnings as errors.
    #[arg(long)]
    pub deny_warnings: bool,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    pub format: Format,
}

pub fn run(args: &Args) -> ExitCode {
    let mut all_json = Vec::new();
    let (mut errors, mut warnings, mut unreadable) = (0usize, 0usize, false);
    for path in &args.files {
        let loaded = crate::model::load_path(path);
        for d in &loaded.diagnostics {
            match d.severity {
                Severity::Error => errors += 1,
                Severity::Warning => warnings += 1,
            }
        }
        unreadable |= names_an_unreadable_argument(&loaded.diagnostics);
        match args.format {
            Format::Json => all_json.extend(
                loaded
                    .diagnostics
                    .iter()
                    .map(|d| to_json_value(d, &loaded.sources)),
            ),
            Format::Human => {
                print_diagnostics(&loaded.diagnostics, &loaded.sources);
                if loaded.diagnostics.is_empty() {
                    stderr_line!("{}: ok", path.display());
                }
            }
        }
    }
    let failed = errors > 0 || (args.deny_warnings && warnings > 0);
    match args.format {
        Format::Json => {
            // One report over all files; each diagnostic names its file.
            let out = serde_json::json!({
                "ok": !failed,
                "errors": errors,
                "warnings": warnings,
                "diagnostics": all_json,
            });
            let text = serde_json::to_string_pretty(&out).unwrap_or_default();
            if let Err(failed) = write_stdout(&format!("{text}\n")) {
                return failed;
            }
        }
        Format::Human => {
            if errors + warnings > 0 {
                stderr_line!(
                    "{errors} error(s), {warnings} warning(s){}",
                    if args.deny_warnings && warnings > 0 {
                        " (warnings denied)"
                    } else {
                        ""
                    }
                );
            }
        }
    }
    ExitCode::from(if unreadable {
        EXIT_USAGE
    } else if failed {
        EXIT_MODEL
    } else {
        EXIT_OK
    })
}
