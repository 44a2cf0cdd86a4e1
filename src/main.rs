//! The `ratewright` binary: a thin shell over the library's `cli` stage.

/// Stack for the command thread. Expression trees are recursive and a
/// generated mechanism can nest deeply (a 100,000-term sum is a tree of that
/// depth); the main thread's default stack would overflow long before the
/// input limits are reached. The memory is reserved, not committed.
const COMMAND_STACK_BYTES: usize = 1 << 30;

use std::io::Write;

fn main() -> std::process::ExitCode {
    let worker = std::thread::Builder::new()
        .name("ratewright".into())
        .stack_size(COMMAND_STACK_BYTES)
        .spawn(ratewright::cli::main);
    match worker.map(|handle| handle.join()) {
        Ok(Ok(code)) => code,
        // `eprintln!` would panic again on a closed standard error.
        Ok(Err(_)) => {
            let _ = writeln!(
                std::io::stderr(),
                "error: internal failure (a bug: please report it with the input that caused it)"
            );
            std::process::ExitCode::from(1)
        }
        Err(e) => {
            let _ = writeln!(
                std::io::stderr(),
                "error: cannot start the command thread: {e}"
            );
            std::process::ExitCode::from(1)
        }
    }
}
