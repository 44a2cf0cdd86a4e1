//! The command line: clap definitions and one module per subcommand. This is
//! the only stage that prints, reads arguments or exits; every other stage
//! returns data and diagnostics.
//!
//! Exit codes (CLI.md): 0 success, 1 model errors or a failed numerical run,
//! 2 usage errors (bad options, unreadable arguments).

pub mod common;

mod analyze;
mod check;
mod derive;
mod diff;
mod emit;
mod fmt;
mod plot;
mod run;
mod scan;
mod steady;

use clap::{Parser, Subcommand, ValueEnum};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser, Debug)]
#[command(name = "ratewright", version, about = "Compile, analyse, derive and simulate reaction mechanisms written in .mech files")]
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
}

/// Parses arguments and runs one command. Usage errors exit with 2.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
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
    }
}

#[allow(dead_code)]
pub(crate) type Paths = Vec<PathBuf>;
