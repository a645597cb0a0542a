//! The `magproof` binary: parse the command line, call the library, map the outcome to
//! an exit code (DESIGN §6): 0 ran and every verdict passed, 1 ran and a verdict failed,
//! 2 bad input or usage, 3 internal error.

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    match cli::run() {
        Ok(outcome) => ExitCode::from(outcome.exit_code()),
        Err(err) => {
            eprintln!("magproof: error: {err:#}");
            ExitCode::from(cli::exit_code_for(&err))
        }
    }
}
