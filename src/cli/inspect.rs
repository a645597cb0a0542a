//! `magproof inspect LOG [--plan P]`: read a log (and a plan) the way every check would,
//! and say what was found: recognised columns, rows, time span, ignored columns and
//! skipped rows. A quick way to find a bad cell before the real run.

use std::path::{Path, PathBuf};

use clap::Args as ClapArgs;
use serde::Serialize;

use super::common::{InputArgs, Outcome};
use magproof::log::{read_plan, read_sweep, Plan, ReadOptions, SweepLog};

/// Flags of `magproof inspect`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Sweep log (CSV).
    log: PathBuf,
    /// Test plan (TOML); checked too, and its [magnetometer] unit applies.
    #[arg(long)]
    plan: Option<PathBuf>,
    #[command(flatten)]
    input: InputArgs,
    /// Print one JSON object on stdout.
    #[arg(long)]
    json: bool,
}

#[derive(Serialize)]
struct Inspection {
    file: String,
    rows: usize,
    header_line: u64,
    columns: Vec<String>,
    ignored_columns: Vec<String>,
    rows_skipped: usize,
    skipped: Vec<Skipped>,
    time_span_s: Option<f64>,
    field_magnitude_nt: Option<[f64; 3]>,
    mounts: Vec<String>,
    plan_ok: Option<bool>,
}

#[derive(Serialize)]
struct Skipped {
    line: u64,
    reason: String,
}

/// Run `inspect`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = args
        .plan
        .as_deref()
        .map(read_plan)
        .transpose()
        .map_err(magproof::Error::from)?;
    let opts = read_options(&args.input, plan.as_ref());
    let log = read_sweep(&args.log, &opts).map_err(magproof::Error::from)?;
    let report = inspection(&args.log, &log, plan.as_ref().map(|_| true));
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
        return Ok(Outcome::Passed);
    }
    print_inspection(&report, args.plan.as_deref());
    Ok(Outcome::Passed)
}

/// Read options: the unit from the flag, else the plan's [magnetometer], else nT.
fn read_options(input: &InputArgs, plan: Option<&Plan>) -> ReadOptions {
    let unit = input
        .unit
        .or_else(|| plan.and_then(|p| p.magnetometer.as_ref()?.unit))
        .unwrap_or_default();
    ReadOptions {
        default_unit: unit,
        skip_bad_rows: input.skip_bad_rows,
    }
}

/// What was found in the log, ready to print or to serialise.
fn inspection(path: &Path, log: &SweepLog, plan_ok: Option<bool>) -> Inspection {
    Inspection {
        file: path.display().to_string(),
        rows: log.len(),
        header_line: log.header_line,
        columns: used_columns(log),
        ignored_columns: log.ignored_columns.clone(),
        rows_skipped: log.skipped_rows.len(),
        skipped: log
            .skipped_rows
            .iter()
            .map(|s| Skipped {
                line: s.line,
                reason: s.reason.clone(),
            })
            .collect(),
        time_span_s: log.t_s.as_ref().and_then(|t| Some(t.last()? - t.first()?)),
        field_magnitude_nt: field_magnitude_stats_nt(log),
        mounts: log.mount_labels.clone(),
        plan_ok,
    }
}

/// The recognised columns, with their units, in a fixed order.
fn used_columns(log: &SweepLog) -> Vec<String> {
    let mut columns = Vec::new();
    if log.t_s.is_some() {
        columns.push("t [s]".to_string());
    }
    if log.b_nt.is_some() {
        columns.extend(["bx [nT]", "by [nT]", "bz [nT]"].map(String::from));
    }
    if log.h_nt.is_some() {
        columns.extend(["hx [nT]", "hy [nT]", "hz [nT]"].map(String::from));
    }
    if log.temp_c.is_some() {
        columns.push("temp [°C]".into());
    }
    for c in &log.commands {
        columns.push(format!("cmd_{}", c.rod));
    }
    if log.angle_rad.is_some() {
        columns.push("angle [rad]".into());
    }
    if log.mount.is_some() {
        columns.push("mount".into());
    }
    if log.probe_m.is_some() {
        columns.extend(["px [m]", "py [m]", "pz [m]"].map(String::from));
    }
    columns
}

/// Minimum, mean and maximum of the measured |B| in nT, when the log has a field.
fn field_magnitude_stats_nt(log: &SweepLog) -> Option<[f64; 3]> {
    log.b_nt.as_ref().map(|b| {
        let mags: Vec<f64> = (0..log.len())
            .map(|i| (b[0][i].powi(2) + b[1][i].powi(2) + b[2][i].powi(2)).sqrt())
            .collect();
        let min = mags.iter().copied().fold(f64::INFINITY, f64::min);
        let max = mags.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let mean = mags.iter().sum::<f64>() / mags.len() as f64;
        [min, mean, max]
    })
}

/// Print the inspection as text; `plan` is the plan's path when one was checked.
fn print_inspection(report: &Inspection, plan: Option<&Path>) {
    println!(
        "{}: {} rows (header on line {})",
        report.file, report.rows, report.header_line
    );
    println!("  columns used : {}", report.columns.join(", "));
    if !report.ignored_columns.is_empty() {
        println!("  ignored      : {}", report.ignored_columns.join(", "));
    }
    if let Some(span) = report.time_span_s {
        println!("  time span    : {span:.3} s");
    }
    if let Some([min, mean, max]) = report.field_magnitude_nt {
        println!("  |B|          : min {min:.1} nT, mean {mean:.1} nT, max {max:.1} nT");
    }
    if !report.mounts.is_empty() {
        println!("  mounts       : {}", report.mounts.join(", "));
    }
    print_skipped_rows(report);
    if let Some(p) = plan {
        println!("  plan         : {} is valid", p.display());
    }
}

/// Print how many rows were skipped and why, the first ten in full.
fn print_skipped_rows(report: &Inspection) {
    if report.rows_skipped > 0 {
        println!("  skipped rows : {}", report.rows_skipped);
        for s in report.skipped.iter().take(10) {
            println!("    {}", s.reason);
        }
        if report.rows_skipped > 10 {
            println!("    … and {} more", report.rows_skipped - 10);
        }
    }
}
