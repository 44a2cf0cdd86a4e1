//! `ratewright emit FILE --target T [--reduced] [-o PATH]`: simulation-ready
//! code and exchange files.
//!
//! Output: without `-o`, a single-file target prints to standard output.
//! With `-o PATH`, a single-file target writes PATH. The C target writes a
//! header and a source, so it needs `-o`: an existing directory (or a path
//! ending in `/`) receives `<model stem>.h` and `<model stem>.c`; any other
//! PATH is a stem (`-o out/decay` writes `out/decay.h` and `out/decay.c`; a
//! trailing `.c` or `.h` is dropped). Every file is written atomically.

use super::common::{load_model, run_error, usage_error, write_stdout};
use crate::emit::{EmitOptions, TARGETS, emit, find_target};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
    /// Target: python, julia, c, rust, octave, r, sbml, latex, json or dot.
    #[arg(long, short = 't', value_name = "T")]
    pub target: String,
    /// Emit the reduced system (conservation laws eliminated; totals become parameters).
    #[arg(long)]
    pub reduced: bool,
    /// Output file (or, for the c target, a directory or a stem).
    #[arg(long, short = 'o', value_name = "PATH")]
    pub output: Option<PathBuf>,
}

pub fn run(args: &Args) -> ExitCode {
    let Some(target) = find_target(&args.target) else {
        let all: Vec<&str> = TARGETS.iter().map(|t| t.name()).collect();
        let hint = crate::diagnostics::did_you_mean(&args.target, all.iter().copied())
            .map(|s| format!(" (did you mean `{s}`?)"))
            .unwrap_or_default();
        return usage_error(format!(
            "unknown target `{}`{hint}; targets: {}",
            args.target,
            all.join(", ")
        ));
    };
    if args.reduced && !target.supports_reduced() {
        return usage_error(format!(
            "the `{}` target describes the reactions themselves; `--reduced` does not apply to it",
            target.name()
        ));
    }
    if target.multi_file() && args.output.is_none() {
        return usage_error(format!(
            "the `{}` target writes more than one file: give `-o DIR` or `-o STEM`",
            target.name()
        ));
    }
    let (model, _sources) = match load_model(&args.file, false) {
        Ok(x) => x,
        Err(code) => return code,
    };
    let model_stem = file_stem(&args.file);
    let (dir, stem) = match &args.output {
        None => (None, model_stem),
        Some(out) if target.multi_file() => {
            let is_dir = out.is_dir() || out.as_os_str().to_string_lossy().ends_with('/');
            if is_dir {
                (Some(out.clone()), model_stem)
            } else {
                let parent = out.parent().map(Path::to_path_buf).unwrap_or_default();
                let name = out
                    .file_name()
                    .map(|n| n.to_string_lossy().to_string())
                    .unwrap_or_default();
                let name = name
                    .strip_suffix(".c")
                    .or_else(|| name.strip_suffix(".h"))
                    .unwrap_or(&name)
                    .to_string();
                (Some(parent), name)
            }
        }
        Some(out) => (out.parent().map(Path::to_path_buf), file_stem(out)),
    };
    if !crate::emit::names::is_identifier(&stem) && matches!(target.name(), "octave" | "c") {
        let what = if target.name() == "octave" {
            "an Octave function"
        } else {
            "a C prefix"
        };
        let rule = if stem.starts_with(|c: char| c.is_ascii_digit()) {
            "it must not start with a digit"
        } else {
            "it must start with a letter or `_` and contain only ASCII letters, digits and `_`"
        };
        return usage_error(format!(
            "`{stem}` cannot name {what}: {rule} (give `-o` another name)"
        ));
    }
    let options = EmitOptions {
        reduced: args.reduced,
        stem,
        source_name: args
            .file
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_default(),
    };
    let files = match emit(&model, target, &options) {
        Ok(f) => f,
        Err(d) => {
            super::common::print_diagnostics(&[d], &_sources);
            return ExitCode::from(super::common::EXIT_MODEL);
        }
    };
    let inputs: Vec<PathBuf> = _sources.files().iter().map(|f| f.path.clone()).collect();
    let destination = |name: &str| match &dir {
        Some(d) if !d.as_os_str().is_empty() => d.join(name),
        _ => PathBuf::from(name),
    };
    // Every destination is checked before anything is written: an input
    // file as output is a usage error, and no file of a pair is left behind.
    let destinations: Vec<PathBuf> = match (&args.output, target.multi_file()) {
        (None, _) => vec![],
        (Some(path), false) => vec![path.clone()],
        (Some(_), true) => files.iter().map(|f| destination(&f.name)).collect(),
    };
    let dest_refs: Vec<&Path> = destinations.iter().map(PathBuf::as_path).collect();
    let sinks = match super::output::sinks_for(&dest_refs, &inputs) {
        Ok(s) => s,
        Err(e) => return usage_error(e),
    };
    if args.output.is_none() {
        let text: String = files.iter().map(|f| f.contents.as_str()).collect();
        return match write_stdout(&text) {
            Ok(()) => ExitCode::SUCCESS,
            Err(failed) => failed,
        };
    }
    if files.is_empty() {
        return run_error("nothing to write");
    }
    // Every file of the target is staged before any is put in place, so a
    // pair (.c and .h) is written whole or not at all.
    let mut staged = super::output::Staged::new();
    for (f, sink) in files.iter().zip(&sinks) {
        if let Err(e) = staged.bytes(sink, f.contents.as_bytes()) {
            return run_error(e);
        }
    }
    match staged.commit() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => run_error(e),
    }
}

fn file_stem(path: &Path) -> String {
    path.file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "model".into())
}
