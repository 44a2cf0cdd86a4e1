//! `ratewright lsp`: the language server on standard input and output
//! (the work is the `lsp` stage's; this only starts it and maps its end to
//! an exit status).

use super::common::{EXIT_MODEL, EXIT_OK};
use std::process::ExitCode;

#[derive(clap::Args, Debug)]
pub struct Args {}

pub fn run(_args: &Args) -> ExitCode {
    match crate::lsp::run() {
        Ok(true) => ExitCode::from(EXIT_OK),
        // An `exit` without a `shutdown` first: the protocol's status 1.
        Ok(false) => ExitCode::from(EXIT_MODEL),
        Err(why) => {
            stderr_line!("error: the language server stopped: {why}");
            ExitCode::from(EXIT_MODEL)
        }
    }
}
