//! `magproof history [--serial S] [--kind K] [--json] [--export csv|changes-csv
//! [--out FILE]]`: the ledger's runs per build and what changed from one build to the
//! next (DESIGN §6, §7). Reads only: a missing ledger is an error, never created.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::{Args as ClapArgs, ValueEnum};
use serde::Serialize;

use super::common::{LedgerArgs, Outcome};
use magproof::check::CheckKind;
use magproof::ledger::export::{write_changes_csv, write_values_csv};
use magproof::ledger::{
    changes, group_by_build, Change, ChangeRules, Flag, Ledger, Run, RunFilter,
};

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
    #[arg(long, value_name = "K", default_value_t = 3.0)]
    significance_sigma: f64,
    #[command(flatten)]
    ledger: LedgerArgs,
}

/// A kind from the registry of checks.
fn parse_kind(s: &str) -> Result<CheckKind, String> {
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

/// The §7 history object.
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
    let ledger = Ledger::open_existing(&path).map_err(magproof::Error::from)?;
    let filter = RunFilter {
        serial: args.serial.clone(),
        kind: args.kind,
    };
    let runs = ledger.runs(&filter).map_err(magproof::Error::from)?;
    if runs.is_empty() {
        let all = ledger
            .runs(&RunFilter::default())
            .map_err(magproof::Error::from)?;
        let serials: Vec<&str> = group_by_build(&all).iter().map(|s| s.serial).collect();
        eprintln!(
            "magproof: {}: no run matches; serials in the ledger: {}",
            path.display(),
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
        println!("{}", serde_json::to_string_pretty(&doc)?);
        return Ok(Outcome::Passed);
    }
    print!("{}", render(&path, &runs, &changes, &rules));
    Ok(Outcome::Passed)
}

/// Write a file through a temporary file in the same folder and a rename, so a reader
/// never sees half of it ([`magproof::report::atomic::write_atomic`]).
fn write_atomically(file: &Path, bytes: &[u8], force: bool) -> anyhow::Result<()> {
    Ok(magproof::report::atomic::write_atomic(file, bytes, force)?)
}

// ---- terminal view (80 columns) ----------------------------------------------------

/// Terminal text: runs per serial and build, then the changes with a flag each.
pub(crate) fn render(path: &Path, runs: &[Run], changes: &[Change], rules: &ChangeRules) -> String {
    let grouped = group_by_build(runs);
    let mut s = format!(
        "Ledger {}: {} run{}, {} serial{}\n",
        path.display(),
        runs.len(),
        plural(runs.len()),
        grouped.len(),
        plural(grouped.len())
    );
    for serial in &grouped {
        s += &format!("\n{}  (builds in order of first record)\n", serial.serial);
        for build in &serial.builds {
            let first = build
                .runs
                .first()
                .map(|r| r.recorded_at.as_str())
                .unwrap_or("");
            s += &format!(
                "  {}  first recorded {}\n",
                clip(build.build, 20),
                show_time(first)
            );
            for run in &build.runs {
                let line = format!(
                    "    {:<5} {:<9} {:<4}  {}",
                    run.id.to_string(),
                    run.kind.as_str(),
                    verdict(run.pass),
                    summary(run)
                );
                s += &clip(&line, 80);
                s.push('\n');
            }
        }
        let mine: Vec<&Change> = changes
            .iter()
            .filter(|c| c.serial == serial.serial)
            .collect();
        if mine.is_empty() {
            continue;
        }
        s += &format!(
            "\n  Changes (Δ = later − earlier ± combined 1σ; significant beyond {}σ)\n",
            rules.significance_sigma()
        );
        let mut pair = (String::new(), String::new());
        for c in mine {
            if (c.from_build.as_str(), c.to_build.as_str()) != (pair.0.as_str(), pair.1.as_str()) {
                pair = (c.from_build.clone(), c.to_build.clone());
                s += &format!("  {} → {}\n", clip(&pair.0, 30), clip(&pair.1, 30));
            }
            let flag = if c.flag.is_alert() {
                format!("{} !", c.flag.as_str())
            } else {
                c.flag.as_str().to_string()
            };
            let line = format!("    {:<22} {:<33} {}", clip(&label(c), 22), amount(c), flag);
            s += &clip(&line, 80);
            s.push('\n');
        }
        s += "  ! = look at this: significant change, limit crossed or rod verdict changed\n";
    }
    s
}

fn plural(n: usize) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
    }
}

/// Cut a string to at most `n` characters, marking the cut with "…".
fn clip(s: &str, n: usize) -> String {
    if s.chars().count() <= n {
        s.to_string()
    } else {
        let mut out: String = s.chars().take(n.saturating_sub(1)).collect();
        out.push('…');
        out
    }
}

fn show_time(iso: &str) -> String {
    // 2026-11-20T09:14:03.250Z → 2026-11-20 09:14:03 UTC
    match (iso.get(..10), iso.get(11..19)) {
        (Some(d), Some(t)) => format!("{d} {t} UTC"),
        _ => iso.to_string(),
    }
}

fn verdict(pass: Option<bool>) -> &'static str {
    match pass {
        Some(true) => "pass",
        Some(false) => "FAIL",
        None => "-",
    }
}

/// One-line digest of a run from its stored quantities, with units: every verdict
/// word, and the magnitudes and residuals among its numbers.
fn summary(run: &Run) -> String {
    use magproof::ledger::QuantityValue;
    let mut parts = Vec::new();
    for q in &run.quantities {
        match &q.value {
            QuantityValue::Number { value, sigma }
                if q.name.contains("_magnitude_") || q.name.contains("_rms_") =>
            {
                let label = q
                    .name
                    .split('_')
                    .take_while(|w| *w != "nt" && *w != "am2")
                    .collect::<Vec<_>>()
                    .join(" ");
                parts.push(format!(
                    "{label} {}",
                    fmt_pm(*value, *sigma, &q.unit, false)
                ));
            }
            QuantityValue::Verdict(word) => {
                let label = q.name.trim_end_matches("_verdict").replace('_', " ");
                parts.push(format!("{label} {word}"));
            }
            _ => {}
        }
    }
    if parts.is_empty() {
        "(no numbers in the result)".into()
    } else {
        parts.join(", ")
    }
}

/// Decimals for about three significant digits of the larger of `a` and `b`.
fn decimals(a: f64, b: f64) -> usize {
    let m = a.abs().max(b.abs());
    if m == 0.0 || !m.is_finite() {
        return 1;
    }
    (2 - m.log10().floor() as i64).clamp(0, 9) as usize
}

/// `value ± sigma unit`, e.g. `+30.0 ± 5.0 nT`; `signed` puts a + on positive values.
fn fmt_pm(value: f64, sigma: Option<f64>, unit: &str, signed: bool) -> String {
    let d = decimals(value, sigma.unwrap_or(0.0));
    let v = if signed {
        format!("{value:+.d$}")
    } else {
        format!("{value:.d$}")
    };
    let unit = if unit == "1" { "" } else { unit };
    let sep = if unit.is_empty() { "" } else { " " };
    match sigma {
        Some(s) => format!("{v} ± {s:.d$}{sep}{unit}"),
        None => format!("{v}{sep}{unit}"),
    }
}

fn label(c: &Change) -> String {
    let q = c.quantity.as_str();
    let axis = |stem: &str, unit: &str| {
        q.strip_prefix(stem)
            .and_then(|r| r.strip_suffix(unit))
            .map(str::to_string)
    };
    if q == "hard_iron_magnitude_nt" {
        "|hard iron|".into()
    } else if let Some(a) = axis("hard_iron_", "_nt") {
        format!("hard iron {a}")
    } else if q == "soft_iron_max_element" {
        match &c.detail {
            Some(d) => format!("soft iron {}", d.trim_start_matches("element ")),
            None => "soft iron".into(),
        }
    } else if q == "calibration_residual_rms_nt" {
        "calibration rms".into()
    } else if q == "dipole_magnitude_am2" {
        "|dipole|".into()
    } else if let Some(a) = axis("dipole_", "_am2") {
        format!("dipole {a}")
    } else if let Some(rod) = axis("rod_", "_verdict") {
        format!("rod {rod}")
    } else if let Some(kind) = q.strip_suffix("_pass") {
        format!("{kind} verdict")
    } else {
        q.to_string()
    }
}

fn word(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::Bool(true) => "pass".into(),
        serde_json::Value::Bool(false) => "fail".into(),
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Null => "(none)".into(),
        other => other.to_string(),
    }
}

/// The change itself: `+30.0 ± 5.0 nT (6.0σ)` or `ok → reversed`.
fn amount(c: &Change) -> String {
    match c.delta {
        Some(d) => {
            let mut s = fmt_pm(d, c.sigma, &c.unit, true);
            if let Some(sig) = c.sigma.filter(|s| *s > 0.0) {
                s += &format!(" ({:.1}σ)", d.abs() / sig);
            }
            s
        }
        None if c.flag == Flag::Unchanged => word(&c.to),
        None => format!("{} → {}", word(&c.from), word(&c.to)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_carry_three_significant_digits_and_their_unit() {
        assert_eq!(fmt_pm(30.0, Some(5.0), "nT", true), "+30.0 ± 5.0 nT");
        assert_eq!(
            fmt_pm(0.004, Some(0.00014), "A·m²", false),
            "0.00400 ± 0.00014 A·m²"
        );
        assert_eq!(fmt_pm(812.44, None, "nT", false), "812 nT");
        assert_eq!(fmt_pm(0.02, None, "1", true), "+0.0200");
    }

    #[test]
    fn long_text_is_clipped_to_the_width() {
        assert_eq!(clip("abcdef", 4), "abc…");
        assert_eq!(clip("abc", 4), "abc");
    }
}
