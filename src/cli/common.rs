//! Flags shared by several subcommands, and the outcome of a command.

use std::path::PathBuf;

use clap::Args;
use magproof::check::align::Calibration;
use magproof::log::FieldUnit;

use super::numeric::{number, FIELD_NT};

/// What a command ended with, for the exit code.
#[allow(dead_code)]
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Ran; every verdict passed (or there was none to give).
    Passed,
    /// Ran; at least one verdict failed.
    Failed,
}

impl Outcome {
    /// Exit code (README.md, "Commands").
    pub fn exit_code(self) -> u8 {
        match self {
            Outcome::Passed => 0,
            Outcome::Failed => 1,
        }
    }

    /// From an optional pass flag: no verdict counts as passed.
    #[allow(dead_code)]
    pub fn from_pass(pass: Option<bool>) -> Self {
        if pass == Some(false) {
            Outcome::Failed
        } else {
            Outcome::Passed
        }
    }
}

/// How to read logs.
#[derive(Debug, Clone, Args)]
pub struct InputArgs {
    /// Field unit of log columns whose header carries none (T, mT, uT, nT, G, mG).
    /// Beats the plan's [magnetometer] unit.
    #[arg(long, value_parser = parse_unit)]
    pub unit: Option<FieldUnit>,
    /// Skip rows with a bad cell (counted and reported) instead of refusing the log.
    #[arg(long)]
    pub skip_bad_rows: bool,
    /// Sensor full-scale range per axis, nT: readings at or beyond it are flagged as
    /// saturated and left out. Beats the plan's [magnetometer] range_nt.
    #[arg(long, value_name = "NT", value_parser = |s: &str| number(s, FIELD_NT), allow_hyphen_values = true)]
    pub range: Option<f64>,
    /// Numbers in the log are written with a decimal comma (1,5); its delimiter is then
    /// ";" or tab. The plan's [log] decimal = "," says the same.
    #[arg(long)]
    pub decimal_comma: bool,
}

/// Which of the plan's magnetometers recorded the log.
#[derive(Debug, Clone, Args)]
pub struct SensorArgs {
    /// The plan's [[magnetometer]] whose columns to read, by name (needed when the plan
    /// lists several).
    #[arg(long, value_name = "NAME")]
    pub sensor: Option<String>,
}

/// Read the plan at `path` and choose its magnetometer named `sensor`, if given.
pub fn load_plan(
    path: &std::path::Path,
    sensor: Option<&str>,
) -> Result<magproof::log::Plan, magproof::Error> {
    let mut plan = magproof::log::read_plan(path)?;
    if sensor.is_some() {
        plan.select_sensor(sensor)?;
    }
    Ok(plan)
}

fn parse_unit(s: &str) -> Result<FieldUnit, String> {
    s.parse::<FieldUnit>().map_err(|e| e.to_string())
}

/// Where results go.
#[derive(Debug, Clone, Args)]
pub struct OutputArgs {
    /// Print exactly one JSON object on stdout (messages still go to stderr).
    #[arg(long)]
    pub json: bool,
    /// Write report.html, result.json and plots into this folder.
    #[arg(long, value_name = "DIR")]
    pub report: Option<PathBuf>,
    /// Replace an existing report folder or output file.
    #[arg(long)]
    pub force: bool,
}

/// Where the ledger is.
#[derive(Debug, Clone, Args)]
pub struct LedgerArgs {
    /// Ledger file (SQLite). Default: $MAGPROOF_LEDGER, else magproof.db here.
    #[arg(long, value_name = "PATH")]
    pub ledger: Option<PathBuf>,
}

impl LedgerArgs {
    /// The ledger path after the flag, the environment and the default.
    #[allow(dead_code)]
    pub fn path(&self) -> PathBuf {
        if let Some(p) = &self.ledger {
            return p.clone();
        }
        match std::env::var_os("MAGPROOF_LEDGER") {
            Some(p) if !p.is_empty() => PathBuf::from(p),
            _ => PathBuf::from("magproof.db"),
        }
    }
}

/// Refuse an existing non-empty output folder without `--force`; create it otherwise
/// (`demo --out`, `simulate --out`).
pub fn prepare_out(dir: &std::path::Path, force: bool) -> Result<(), magproof::Error> {
    use magproof::Error;
    if dir.exists() {
        let mut entries = std::fs::read_dir(dir).map_err(|e| Error::io(dir, e))?;
        if entries.next().is_some() && !force {
            return Err(Error::Usage(format!(
                "{} exists and is not empty; choose another --out or add --force",
                dir.display()
            )));
        }
    }
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))
}

/// An input file beside the log, with its SHA-256 (hex).
pub type InputFile = (PathBuf, String);

/// A calibration file given with `--calibration`, read once: the check applies these
/// bytes, and the ledger's dedupe key and the report's inputs carry their SHA-256, so a
/// file corrected in place is a new run. `(calibration, (path, sha256))`.
pub fn read_calibration(
    path: Option<&std::path::Path>,
) -> Result<(Option<Calibration>, Option<InputFile>), magproof::Error> {
    let Some(p) = path else {
        return Ok((None, None));
    };
    let text = std::fs::read_to_string(p).map_err(|e| magproof::Error::io(p, e))?;
    let calibration = Calibration::parse(&text, p)?;
    let sha256 = magproof::log::hash::sha256_bytes(text.as_bytes());
    Ok((Some(calibration), Some((p.to_path_buf(), sha256))))
}
