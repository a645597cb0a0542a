//! `magproof history [--serial S] [--kind K] [--json] [--export csv|changes-csv
//! [--out FILE]]`: the ledger's runs per build and what changed from one build to the
//! next (docs/ledger.md). Reads only: a missing ledger is an error, never created.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::{Args as ClapArgs, ValueEnum};
use serde::Serialize;
use serde_json::Value;

use super::common::{LedgerArgs, Outcome};
use super::numeric::{number, Domain};
use magproof::check::CheckKind;
use magproof::ledger::export::{write_changes_csv, write_values_csv};
use magproof::ledger::{changes, Change, ChangeRules, Ledger, Run, RunFilter};
use magproof::report::model::now_utc_iso;
use magproof::report::terminal::{printable, render as render_text, Style};
use magproof::report::RunReport;

/// Flags of `magproof history`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Only this serial number.
    #[arg(long, value_name = "S")]
    serial: Option<String>,
    /// Only this kind of check (one of the registered kinds: calibrate, polarity, …).
    #[arg(long, value_name = "K", value_parser = parse_kind)]
    kind: Option<CheckKind>,
    /// Print exactly one JSON object {runs, changes} on stdout.
    #[arg(long)]
    json: bool,
    /// Write CSV instead of the terminal view: `csv` = every run's values (one row per
    /// run and quantity, with sigma and unit), `changes-csv` = the build-to-build changes.
    #[arg(long, value_enum, value_name = "FORMAT")]
    export: Option<ExportFormat>,
    /// With --export: write the CSV to this file (replaced atomically) instead of stdout.
    #[arg(long, value_name = "FILE", requires = "export")]
    out: Option<PathBuf>,
    /// With --out: replace an existing file.
    #[arg(long, requires = "out")]
    force: bool,
    /// A change is "significant" beyond this many combined sigma.
    #[arg(long, value_name = "K", default_value_t = 3.0,
          value_parser = |s: &str| number(s, Domain::positive(100.0, "sigma")), allow_hyphen_values = true)]
    significance_sigma: f64,
    #[command(flatten)]
    ledger: LedgerArgs,
}

/// A kind from the registry of checks.
fn parse_kind(s: &str) -> Result<CheckKind, String> {
    // The sign chain is filed by closeout, not run as a step (docs/sign-chain.md).
    if s == magproof::check::sign_chain::KIND.as_str() {
        return Ok(magproof::check::sign_chain::KIND);
    }
    CheckKind::parse(s).ok_or_else(|| {
        format!(
            "unknown check kind \"{s}\"; the kinds are {}",
            CheckKind::names()
        )
    })
}

#[derive(Debug, Clone, Copy, ValueEnum)]
enum ExportFormat {
    /// Values of every run, one row per run and quantity.
    Csv,
    /// Build-to-build changes, one row per change.
    ChangesCsv,
}

/// The history object (docs/ledger.md).
#[derive(Serialize)]
struct History<'a> {
    runs: &'a [Run],
    changes: &'a [Change],
}

/// Run `history`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    if args.json && args.export.is_some() && args.out.is_none() {
        return Err(magproof::Error::Usage(
            "--json and --export both write to stdout: give --out FILE for the CSV".into(),
        )
        .into());
    }
    let rules = ChangeRules::with_significance_sigma(args.significance_sigma)
        .map_err(|e| magproof::Error::Usage(format!("--significance-sigma: {e}")))?;
    let path = args.ledger.path();
    let ledger = Ledger::open_for_reading(&path)
        .map_err(magproof::Error::from)
        .with_context(|| {
            "reading the ledger (runs are recorded by `magproof closeout` or a check given \
             --record; another ledger: --ledger or MAGPROOF_LEDGER)"
        })?;
    let filter = RunFilter {
        serial: args.serial.clone(),
        kind: args.kind,
    };
    let runs = ledger.runs(&filter).map_err(magproof::Error::from)?;
    if runs.is_empty() {
        let serials: Vec<String> = ledger
            .serials()
            .map_err(magproof::Error::from)?
            .iter()
            .map(|s| printable(s))
            .collect();
        eprintln!(
            "magproof: {}: no run matches; serials in the ledger: {}",
            printable(&path.display().to_string()),
            if serials.is_empty() {
                "none".to_string()
            } else {
                serials.join(", ")
            }
        );
    }
    let changes = changes(&runs, &rules);

    if let Some(format) = args.export {
        let mut buf = Vec::new();
        match format {
            ExportFormat::Csv => write_values_csv(&runs, &mut buf),
            ExportFormat::ChangesCsv => write_changes_csv(&changes, &mut buf),
        }
        .context("writing CSV")?;
        match &args.out {
            Some(file) if same_file(file, &path) => {
                return Err(magproof::Error::Usage(format!(
                    "--out {} is the ledger being read; choose another file",
                    file.display()
                ))
                .into())
            }
            Some(file) => write_atomically(file, &buf, args.force)?,
            None => std::io::stdout().write_all(&buf)?,
        }
        if !args.json {
            return Ok(Outcome::Passed);
        }
    }
    if args.json {
        let doc = History {
            runs: &runs,
            changes: &changes,
        };
        outln!(
            "{}",
            magproof::text::json_for_terminal(serde_json::to_string_pretty(&doc)?)
        )?;
        return Ok(Outcome::Passed);
    }
    out!("{}", render(&path, &runs, &changes)?)?;
    Ok(Outcome::Passed)
}

/// Whether `a` and `b` name one existing file (or the same path).
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// Write a file through a temporary file in the same folder and a rename, so a reader
/// never sees half of it ([`magproof::report::atomic::write_atomic`]).
fn write_atomically(file: &Path, bytes: &[u8], force: bool) -> anyhow::Result<()> {
    magproof::report::atomic::write_atomic(file, bytes, force)
        .map_err(anyhow::Error::from)
        .context("--out (add --force to replace)")
}

/// The terminal view: the history section (builds, verdicts per kind, the changes with
/// their flags), rendered by the terminal writer.
pub(crate) fn render(path: &Path, runs: &[Run], changes: &[Change]) -> anyhow::Result<String> {
    let section = magproof::report::sections::history_text_section(runs, changes)?;
    let report = RunReport {
        title: format!("History in {}", path.display()),
        article: None,
        generated_at: now_utc_iso(),
        tool_version: magproof::VERSION.to_string(),
        inputs: Vec::new(),
        result: Value::Null,
        sections: vec![section],
    };
    Ok(render_text(&report, &Style::detect()))
}
