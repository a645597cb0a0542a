//! Command-line front end: clap definitions (one file per subcommand), turning flags into
//! validated library requests, and terminal output. The library never sees clap types.

/// `print!` that returns an error (exit 2, "standard output: …") instead of panicking when
/// standard output cannot be written (a full disk, a closed file).
macro_rules! out {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        write!(std::io::stdout().lock(), $($arg)*)
            .and_then(|()| std::io::stdout().lock().flush())
            .map_err(|e| magproof::Error::io("standard output", e))
    }};
}

/// `println!` that returns an error instead of panicking, as `out!`.
macro_rules! outln {
    () => { out!("\n") };
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        writeln!(std::io::stdout().lock(), $($arg)*)
            .and_then(|()| std::io::stdout().lock().flush())
            .map_err(|e| magproof::Error::io("standard output", e))
    }};
}

mod align;
mod calibrate;
mod closeout;
mod common;
mod demo;
mod demo_align;
mod demo_orbit;
mod dipole;
mod field;
mod flight_out;
mod history;
mod inspect;
mod loop_law;
mod numeric;
mod orbit;
mod polarity;
mod present;
mod record;
mod report_out;
mod rod;
mod simulate;
mod simulate_align;
mod simulate_loop;

use clap::{Parser, Subcommand};

pub use common::Outcome;

/// Magnetics checks for small-spacecraft integration day.
///
/// Cautions: cage coils carry amps and heat; strong fields upset pacemakers and pull
/// tools; pulse flight torque rods only within their rated current and duty; follow the
/// facility's procedures and the responsible engineer's sign-off. magproof informs a
/// decision; it does not replace the project's verification authority.
#[derive(Debug, Parser)]
#[command(name = "magproof", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Every step of a plan in order, one summary, one ledger record per step.
    Closeout(closeout::Args),
    /// Read a log (and a plan) and say what was found, without fitting anything.
    Inspect(inspect::Args),
    /// Geomagnetic reference field (IGRF-14) at a site: N/E/down, total, declination, inclination.
    Field(field::Args),
    /// The ledger: runs per serial and build, and what changed since the previous build.
    History(history::Args),
    /// Sensor axes and misalignment against the body frame, from a turntable test.
    Align(align::Args),
    /// Residual magnetic dipole of the article and its in-orbit disturbance torque.
    Dipole(dipole::Args),
    /// Check every torque rod's polarity and coupling from a pulse log.
    Polarity(polarity::Args),
    /// A torque rod on the bench: moment per ampere, linearity, remanence, polarity.
    Rod(rod::Args),
    /// Calibrate the magnetometer: cage fit if the log has hx hy hz, else tumble fit.
    Calibrate(calibrate::Args),
    /// Calibrate the magnetometer from on-orbit telemetry against IGRF-14 along the orbit.
    Orbit(orbit::Args),
    /// The sign of the flight software's control law, from a closed-loop log.
    Loop(loop_law::Args),
    /// Write a synthetic log, its plan and the truth behind them, for rehearsal and tests.
    Simulate(Box<simulate::Args>),
    /// The whole closeout of the bundled, invented demo scenario (three builds), from any folder.
    Demo(demo::Args),
}

/// Parse the command line and run the chosen command.
pub fn run() -> anyhow::Result<Outcome> {
    let cli = Cli::parse();
    match cli.command {
        Command::Closeout(args) => closeout::run(args),
        Command::Inspect(args) => inspect::run(args),
        Command::Field(args) => field::run(args),
        Command::History(args) => history::run(args),
        Command::Align(args) => align::run(args),
        Command::Dipole(args) => dipole::run(args),
        Command::Polarity(args) => polarity::run(args),
        Command::Rod(args) => rod::run(args),
        Command::Calibrate(args) => calibrate::run(args),
        Command::Orbit(args) => orbit::run(args),
        Command::Loop(args) => loop_law::run(args),
        Command::Simulate(args) => simulate::run(*args),
        Command::Demo(args) => demo::run(args),
    }
}

/// Exit code for an error that reached `main`: the library's typed errors know theirs
/// (2 for bad input or usage, 3 internal); anything else is an I/O or usage problem (2).
pub fn exit_code_for(err: &anyhow::Error) -> u8 {
    for cause in err.chain() {
        if let Some(e) = cause.downcast_ref::<magproof::Error>() {
            return e.exit_code();
        }
    }
    2
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn cli_definition_is_consistent() {
        Cli::command().debug_assert();
    }
}
