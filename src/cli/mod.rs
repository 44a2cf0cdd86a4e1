//! The command line: clap definitions and one module per subcommand. This is
//! the only stage that prints, reads arguments or exits; every other stage
//! returns data and diagnostics.
//!
//! Exit codes (CLI.md): 0 success, 1 model errors or a failed numerical run,
//! 2 usage errors (bad options, unreadable arguments).
//!
//! Messages go to standard error through `stderr_line!` / `stderr_text!`,
//! never `eprintln!`: a closed standard error (`2>&1 | head -1`) must not
//! turn a report into a crash.

/// Writes one line to standard error; a failed write is ignored, because
/// there is nowhere left to report it.
macro_rules! stderr_line {
    () => {
        $crate::cli::common::write_stderr(format_args!("\n"))
    };
    ($($arg:tt)*) => {
        $crate::cli::common::write_stderr(format_args!("{}\n", format_args!($($arg)*)))
    };
}

/// Like [`stderr_line!`] without the line break (progress lines).
macro_rules! stderr_text {
    ($($arg:tt)*) => {
        $crate::cli::common::write_stderr(format_args!($($arg)*))
    };
}

pub mod common;

mod analyze;
mod check;
mod control;
mod derive;
mod diff;
mod emit;
mod fit;
mod fmt;
mod lsp;
pub mod output;
mod plot;
mod run;
mod sample;
mod scan;
mod sensitivity;
mod steady;

use clap::{Parser, Subcommand, ValueEnum};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser, Debug)]
#[command(
    name = "ratewright",
    version,
    about = "Compile, analyse, derive and simulate reaction mechanisms written in .mech files"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum, Default)]
pub enum Format {
    #[default]
    Human,
    Json,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Parse, resolve names, check units and lint mechanism files.
    Check(check::Args),
    /// Rewrite mechanism files in the canonical layout (comments kept).
    Fmt(fmt::Args),
    /// Stoichiometry, rank, conservation laws, reduced system, network structure.
    Analyze(analyze::Args),
    /// Steady-state and rapid-equilibrium rate laws.
    Derive(derive::Args),
    /// Simulation-ready code or exchange files.
    Emit(emit::Args),
    /// Simulate the time course.
    Run(run::Args),
    /// Steady state of the reduced system, with stability.
    Steady(steady::Args),
    /// Vary params over grids and measure an expression.
    Scan(scan::Args),
    /// Meaning-level difference of two mechanisms.
    Diff(diff::Args),
    /// Estimate params from assay data; rank rival mechanisms.
    Fit(fit::Args),
    /// Local sensitivities of the time course to params and initial values.
    Sensitivity(sensitivity::Args),
    /// Metabolic control analysis at the steady state.
    Control(control::Args),
    /// Stochastic runs of molecule counts (exact or tau-leaping), ensembles with statistics.
    Sample(sample::Args),
    /// Language server for editors, on standard input and output.
    Lsp(lsp::Args),
}

/// Parses arguments and runs one command. Usage errors exit with 2.
pub fn main() -> ExitCode {
    // A standard output closed before the start (`>&-`) would swallow every
    // write without an error, and the next file opened would take its
    // descriptor; so it ends the command at once, as a closed pipe does.
    if standard_output_is_closed() {
        common::write_stderr(format_args!(
            "error: cannot write to standard output: it is closed\n"
        ));
        return ExitCode::from(common::EXIT_MODEL);
    }
    let args = join_spaced_units(std::env::args_os().collect());
    let cli = match Cli::try_parse_from(args) {
        Ok(cli) => cli,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match cli.command {
        Command::Check(a) => check::run(&a),
        Command::Fmt(a) => fmt::run(&a),
        Command::Analyze(a) => analyze::run(&a),
        Command::Derive(a) => derive::run(&a),
        Command::Emit(a) => emit::run(&a),
        Command::Run(a) => run::run(&a),
        Command::Steady(a) => steady::run(&a),
        Command::Scan(a) => scan::run(&a),
        Command::Diff(a) => diff::run(&a),
        Command::Fit(a) => fit::run(&a),
        Command::Sensitivity(a) => sensitivity::run(&a),
        Command::Control(a) => control::run(&a),
        Command::Sample(a) => sample::run(&a),
        Command::Lsp(a) => lsp::run(&a),
    }
}

/// Rust's runtime reopens a closed standard descriptor on /dev/null,
/// read-write, before `main`; a shell's `> /dev/null` opens it write-only.
/// So standard output that is /dev/null opened read-write was closed.
#[cfg(unix)]
fn standard_output_is_closed() -> bool {
    use std::os::unix::fs::MetadataExt;
    // SAFETY: F_GETFL only queries the descriptor's status flags.
    let flags = unsafe { libc::fcntl(1, libc::F_GETFL) };
    if flags == -1 {
        return true;
    }
    if flags & libc::O_ACCMODE != libc::O_RDWR {
        return false;
    }
    let (Ok(out), Ok(null)) = (
        std::fs::metadata("/dev/stdout"),
        std::fs::metadata("/dev/null"),
    ) else {
        return false;
    };
    out.rdev() == null.rdev() && out.dev() == null.dev()
}

#[cfg(not(unix))]
fn standard_output_is_closed() -> bool {
    false
}

#[allow(dead_code)]
pub(crate) type Paths = Vec<PathBuf>;

/// Options whose value is a quantity, which users write as the language
/// writes quantities: `--until 20 min`, `--set S=5 mM`.
const QUANTITY_OPTIONS: [&str; 5] = ["--until", "--every", "--at", "--set", "--hist"];

/// Joins a quantity option's number and a following unit word given as two
/// arguments (`--until 20 min` → `--until` `20 min`), so the spelling of the
/// design works unquoted. Only a bare number (or `NAME=number`) followed by
/// a word that parses as a unit is joined.
fn join_spaced_units(args: Vec<std::ffi::OsString>) -> Vec<std::ffi::OsString> {
    let mut out: Vec<std::ffi::OsString> = Vec::with_capacity(args.len());
    let mut i = 0;
    while i < args.len() {
        out.push(args[i].clone());
        let is_quantity_option = args[i]
            .to_str()
            .is_some_and(|a| QUANTITY_OPTIONS.contains(&a));
        if is_quantity_option
            && let (Some(value), Some(unit)) = (
                args.get(i + 1).and_then(|v| v.to_str()),
                args.get(i + 2).and_then(|u| u.to_str()),
            )
        {
            let number = value.rsplit('=').next().unwrap_or(value);
            let unit_like = !unit.starts_with('-') && crate::model::units::parse_unit(unit).is_ok();
            if number.trim().parse::<f64>().is_ok() && unit_like {
                out.push(format!("{value} {unit}").into());
                i += 3;
                continue;
            }
        }
        // A volume's units are not the language's, so `--volume 1 pL` is
        // joined by its own list.
        if args[i].to_str() == Some("--volume")
            && let (Some(value), Some(unit)) = (
                args.get(i + 1).and_then(|v| v.to_str()),
                args.get(i + 2).and_then(|u| u.to_str()),
            )
            && value.trim().parse::<f64>().is_ok()
            && crate::stochastic::convert::VOLUME_UNITS
                .iter()
                .any(|(u, _)| *u == unit)
        {
            out.push(format!("{value} {unit}").into());
            i += 3;
            continue;
        }
        i += 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::join_spaced_units;

    fn joined(args: &[&str]) -> Vec<String> {
        join_spaced_units(args.iter().map(|a| (*a).into()).collect())
            .into_iter()
            .map(|a| a.into_string().unwrap())
            .collect()
    }

    #[test]
    fn a_unit_after_a_quantity_option_joins_its_number() {
        assert_eq!(
            joined(&["rw", "run", "m.mech", "--until", "20", "min"]),
            ["rw", "run", "m.mech", "--until", "20 min"]
        );
        assert_eq!(
            joined(&["rw", "run", "m.mech", "--set", "S=5", "mM", "-o", "x.csv"]),
            ["rw", "run", "m.mech", "--set", "S=5 mM", "-o", "x.csv"]
        );
        assert_eq!(
            joined(&["rw", "run", "--until", "20", "m.mech"]),
            ["rw", "run", "--until", "20", "m.mech"]
        );
        assert_eq!(
            joined(&["rw", "run", "--until", "20min", "--points", "5"]),
            ["rw", "run", "--until", "20min", "--points", "5"]
        );
        assert_eq!(
            joined(&[
                "rw", "sample", "m.mech", "--volume", "1", "pL", "--hist", "5", "min"
            ]),
            [
                "rw", "sample", "m.mech", "--volume", "1 pL", "--hist", "5 min"
            ]
        );
    }
}
