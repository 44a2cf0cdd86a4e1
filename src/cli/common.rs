//! Shared command-line plumbing: loading a model and reporting its
//! diagnostics, parsing quantities given on the command line, and atomic
//! output files.

use crate::diagnostics::{Code, Diagnostic, SourceMap, render_human, render_json};
use crate::model::{self, Model, Units};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

pub const EXIT_OK: u8 = 0;
pub const EXIT_MODEL: u8 = 1;
pub const EXIT_USAGE: u8 = 2;

/// Prints diagnostics to stderr as a person reads them.
pub fn print_diagnostics(diags: &[Diagnostic], sources: &SourceMap) {
    let mut err = std::io::stderr().lock();
    for d in diags {
        let _ = write!(err, "{}", render_human(d, sources));
    }
}

/// Loads a model for a command that needs one: prints warnings, and on
/// errors prints them (as the JSON report on standard output when `json`,
/// the same for every `--format json` command) and returns the exit code
/// to use.
pub fn load_model(path: &Path, json: bool) -> Result<(Model, SourceMap), ExitCode> {
    let loaded = model::load_path(path);
    if loaded.model.is_none() || loaded.diagnostics.iter().any(|d| d.is_error()) {
        let code = if names_an_unreadable_argument(&loaded.diagnostics) {
            EXIT_USAGE
        } else {
            EXIT_MODEL
        };
        return Err(report_failure(
            &loaded.diagnostics,
            &loaded.sources,
            json,
            code,
        ));
    }
    if !json {
        print_diagnostics(&loaded.diagnostics, &loaded.sources);
    }
    Ok((loaded.model.expect("checked above"), loaded.sources))
}

/// Reports diagnostics that end a command, as JSON on standard output or
/// for people on standard error, and returns `code` as the exit code.
pub fn report_failure(diags: &[Diagnostic], sources: &SourceMap, json: bool, code: u8) -> ExitCode {
    if json {
        if let Err(failed) = write_stdout(&format!("{}\n", render_json(diags, sources))) {
            return failed;
        }
    } else {
        print_diagnostics(diags, sources);
    }
    ExitCode::from(code)
}

/// Whether a file named on the command line could not be read: a usage
/// error (exit 2). The same failure through `use` is labelled at the `use`
/// line and is a model error (exit 1), like any other error in a file.
pub fn names_an_unreadable_argument(diags: &[Diagnostic]) -> bool {
    diags
        .iter()
        .any(|d| d.code == Code::FileRead && d.primary_span().is_none())
}

/// Writes to standard error, ignoring failure (see `stderr_line!`).
pub fn write_stderr(args: std::fmt::Arguments<'_>) {
    let _ = std::io::stderr().lock().write_fmt(args);
}

/// Writes to standard output. A closed or failing standard output ends the
/// command with exit code 1 and a message (never a panic, as `print!`
/// would).
pub fn write_stdout(text: &str) -> Result<(), ExitCode> {
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Ok(()) => Ok(()),
        Err(_) => Err(run_error("cannot write to standard output")),
    }
}

/// `text` followed by spaces up to `width` characters. Formatting widths
/// (`{:<w$}`) are limited to 65,535 and panic beyond; names have no limit.
pub fn pad_end(text: &str, width: usize) -> String {
    let len = text.chars().count();
    let mut s = String::with_capacity(text.len() + width.saturating_sub(len));
    s.push_str(text);
    s.extend(std::iter::repeat_n(' ', width.saturating_sub(len)));
    s
}

/// Spaces up to `width` characters, then `text` (right-aligned).
pub fn pad_start(text: &str, width: usize) -> String {
    let len = text.chars().count();
    let mut s: String = std::iter::repeat_n(' ', width.saturating_sub(len)).collect();
    s.push_str(text);
    s
}

/// `1 row`, `2 rows`.
pub fn count_of(n: usize, singular: &str, plural: &str) -> String {
    format!("{n} {}", if n == 1 { singular } else { plural })
}

/// Prints a usage error and returns exit code 2.
pub fn usage_error(message: impl std::fmt::Display) -> ExitCode {
    stderr_line!("error: {message}");
    ExitCode::from(EXIT_USAGE)
}

/// A usage error of a command that may be asked for JSON: under
/// `--format json` the error is also the JSON report on standard output
/// (code E0801, no location), so a program reading it always gets a
/// document. Exit code 2.
pub fn usage_error_as(json: bool, message: impl std::fmt::Display) -> ExitCode {
    if json {
        let diag = Diagnostic::error(Code::BadOption, message.to_string());
        if let Err(failed) = write_stdout(&format!("{}\n", render_json(&[diag], &SourceMap::new())))
        {
            return failed;
        }
    }
    usage_error(message)
}

/// Prints a run failure (numerical or output) and returns exit code 1.
pub fn run_error(message: impl std::fmt::Display) -> ExitCode {
    stderr_line!("error: {message}");
    ExitCode::from(EXIT_MODEL)
}

/// Parses `NAME=VALUE[unit]` as given to `--set`, converting to the model's
/// default units; a unit of the wrong dimension for NAME is refused.
pub fn parse_assignment(text: &str, model: &model::Model) -> Result<(String, f64), String> {
    let (name, value) = text
        .split_once('=')
        .ok_or_else(|| format!("`{text}` is not NAME=VALUE"))?;
    let name = name.trim();
    if name == model::TEMPERATURE && model.lookup(name).is_none() {
        return Ok((
            name.to_string(),
            model::lab_units::parse_temperature(value)?,
        ));
    }
    let (v, dim) = model::units::parse_quantity(value, model.units)?;
    model.check_value_dimension(name, value, dim)?;
    Ok((name.to_string(), v))
}

/// Parses a time such as `20 min` or `600` in the model's time unit.
pub fn parse_time(text: &str, units: Units) -> Result<f64, String> {
    let (v, dim) = model::units::parse_quantity(text, units)?;
    match dim {
        None => Ok(v),
        Some(d) if d == model::Dim::TIME => Ok(v),
        Some(d) => Err(format!(
            "`{text}` is not a time (its unit has dimension {d})"
        )),
    }
}

/// Writes `bytes` to `path`: a regular file or a new path atomically (a
/// temporary file in the same directory, renamed over the target), a
/// stream or device directly (see [`super::output`]). Refuses to overwrite
/// any of `inputs` (the files the command read).
pub fn write_atomic(path: &Path, bytes: &[u8], inputs: &[PathBuf]) -> Result<(), String> {
    let sinks = super::output::sinks_for(&[path], inputs)?;
    let mut staged = super::output::Staged::new();
    staged.bytes(&sinks[0], bytes)?;
    staged.commit()
}

static WRITING: std::sync::Mutex<()> = std::sync::Mutex::new(());

/// Held while a temporary output file exists. The first call installs a
/// handler for SIGINT, SIGTERM and SIGHUP that waits for the guard, so an
/// interrupted command exits (code 130) only between writes: the temporary
/// file has then been renamed into place or removed, never left behind.
/// Every command that writes through a temporary file holds it.
pub fn writing_guard() -> std::sync::MutexGuard<'static, ()> {
    static INSTALL: std::sync::Once = std::sync::Once::new();
    INSTALL.call_once(|| {
        // Without a handler (it fails only if one is already set) an
        // interrupt ends the process at once, as it would anyway.
        let _ = ctrlc::set_handler(|| {
            let _wait = WRITING.lock();
            std::process::exit(130);
        });
    });
    WRITING
        .lock()
        .unwrap_or_else(std::sync::PoisonError::into_inner)
}

/// Errors if `out` names the same file as one of `inputs`.
pub fn refuse_input_overwrite(out: &Path, inputs: &[PathBuf]) -> Result<(), String> {
    let same = |a: &Path, b: &Path| match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    };
    if let Some(input) = inputs.iter().find(|i| same(out, i)) {
        return Err(format!(
            "refusing to overwrite the input file {}",
            input.display()
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_refuses_inputs_and_replaces_whole_files() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("m.mech");
        std::fs::write(&input, "species A").unwrap();
        assert!(write_atomic(&input, b"x", std::slice::from_ref(&input)).is_err());
        assert_eq!(std::fs::read_to_string(&input).unwrap(), "species A");
        let out = dir.path().join("out.csv");
        write_atomic(&out, b"a,b\n", std::slice::from_ref(&input)).unwrap();
        assert_eq!(std::fs::read_to_string(&out).unwrap(), "a,b\n");
        let leftovers = std::fs::read_dir(dir.path())
            .unwrap()
            .filter(|e| {
                e.as_ref()
                    .unwrap()
                    .file_name()
                    .to_string_lossy()
                    .ends_with(".tmp")
            })
            .count();
        assert_eq!(leftovers, 0);
    }
}
