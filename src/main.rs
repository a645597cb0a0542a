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
            // Paths and ledger text in a message are shown, never acted on.
            eprintln!(
                "magproof: error: {}",
                magproof::text::printable(&message(&err))
            );
            ExitCode::from(cli::exit_code_for(&err))
        }
    }
}

/// The error and its causes on one line, each cause once: a cause whose text the
/// message already holds (an I/O error a library error quotes) is not repeated.
fn message(err: &anyhow::Error) -> String {
    let mut out = String::new();
    for cause in err.chain() {
        let text = cause.to_string();
        if out.contains(&text) {
            continue;
        }
        if !out.is_empty() {
            out.push_str(": ");
        }
        out.push_str(&text);
    }
    out
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
