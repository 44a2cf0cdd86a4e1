//! `ratewright diff OLD NEW [--format human|json]`: what changed in meaning
//! between two versions of a mechanism. Either side may be `REV:PATH`, read
//! from git. Exit 0 when nothing changed in meaning, 1 when something did,
//! 2 on errors (as line-diff tools do).

use super::Format;
use super::common::{EXIT_MODEL, EXIT_OK, EXIT_USAGE, print_diagnostics};
use crate::compare::{self, git};
use crate::diagnostics::to_json_value;
use crate::model::{self, Loaded, Model};
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The old version: a mechanism file, or REV:PATH read from git (e.g. HEAD~1:models/x.mech).
    pub old: String,
    /// The new version: a mechanism file, or REV:PATH.
    pub new: String,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    pub format: Format,
}

fn load(arg: &str) -> Loaded {
    match git::classify(arg) {
        git::Source::File(path) => model::load_path(&path),
        git::Source::Revision { rev, path } => {
            let cwd = std::env::current_dir().unwrap_or_default();
            match git::load_revision(&rev, &path, &cwd) {
                Ok(loaded) => loaded,
                Err(d) => Loaded {
                    sources: Default::default(),
                    model: None,
                    diagnostics: vec![d],
                },
            }
        }
    }
}

/// Writes the report; a closed pipe (`| head`) ends the command with exit
/// code 1 and a message, as in every other command, never a panic.
fn emit(text: &str) -> Result<(), ExitCode> {
    super::common::write_stdout(&format!("{text}\n"))
}

pub fn run(args: &Args) -> ExitCode {
    let json = args.format == Format::Json;
    let sides = [load(&args.old), load(&args.new)];
    let failed = sides
        .iter()
        .any(|l| l.model.is_none() || l.diagnostics.iter().any(|d| d.is_error()));
    if failed {
        if json {
            let errors: Vec<_> = sides
                .iter()
                .flat_map(|l| {
                    l.diagnostics
                        .iter()
                        .filter(|d| d.is_error())
                        .map(|d| to_json_value(d, &l.sources))
                })
                .collect();
            if let Err(failed) = emit(
                &serde_json::to_string_pretty(&serde_json::json!({ "errors": errors }))
                    .unwrap_or_default(),
            ) {
                return failed;
            }
        } else {
            for l in &sides {
                let errors: Vec<_> = l
                    .diagnostics
                    .iter()
                    .filter(|d| d.is_error())
                    .cloned()
                    .collect();
                print_diagnostics(&errors, &l.sources);
            }
        }
        return ExitCode::from(EXIT_USAGE);
    }
    // Warnings are the business of `check`; a diff reports meaning only.
    let [old, new] = sides.map(|l| l.model.unwrap_or_else(Model::default));
    let comparison = compare::compare(&old, &new);
    let written = if json {
        let doc = compare::report::json(&comparison, &args.old, &args.new);
        emit(&serde_json::to_string_pretty(&doc).unwrap_or_default())
    } else {
        emit(compare::report::human(&comparison, &args.old, &args.new).trim_end())
    };
    if let Err(failed) = written {
        return failed;
    }
    ExitCode::from(if comparison.changed() {
        EXIT_MODEL
    } else {
        EXIT_OK
    })
}
