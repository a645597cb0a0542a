//! The `magproof` binary: parse the command line, call the library, map the outcome to
//! an exit code (README.md): 0 ran and every verdict passed, 1 ran and a verdict failed,
//! 2 bad input or usage, 3 internal error.

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    restore_sigpipe();
    match cli::run() {
        Ok(outcome) => ExitCode::from(outcome.exit_code()),
        Err(err) => {
            eprintln!("magproof: error: {err:#}");
            ExitCode::from(cli::exit_code_for(&err))
        }
    }
}

/// Let a closed pipe end the program quietly (`magproof calibrate … | head`), as command-line
/// tools on Unix do, instead of a panic from `println!` on a broken pipe.
fn restore_sigpipe() {
    #[cfg(unix)]
    // SAFETY: called first thing in main, before any other thread exists; setting the
    // default disposition of SIGPIPE has no other effect on the program's state.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
}
