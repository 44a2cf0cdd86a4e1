//! `ratewright scan` (being built; see the issue that owns it).

use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Mechanism file.
    pub file: PathBuf,
}

pub fn run(_args: &Args) -> ExitCode {
    super::common::usage_error("`scan` is not built yet")
}
