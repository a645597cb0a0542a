//! `magproof inspect LOG [--plan P]`: read a log (and a plan) the way every check would,
//! and say what was found: recognised columns, rows, time span, ignored columns and
//! skipped rows. A quick way to find a bad cell before the real run.

use std::path::PathBuf;

use clap::Args as ClapArgs;
use serde::Serialize;

use super::common::{InputArgs, Outcome};
use magproof::log::{read_plan, read_sweep, ReadOptions};

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
    let unit = args
        .input
        .unit
        .or_else(|| plan.as_ref().and_then(|p| p.magnetometer.as_ref()?.unit))
        .unwrap_or_default();
    let opts = ReadOptions {
        default_unit: unit,
        skip_bad_rows: args.input.skip_bad_rows,
    };
    let log = read_sweep(&args.log, &opts).map_err(magproof::Error::from)?;

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
    let time_span_s = log.t_s.as_ref().and_then(|t| Some(t.last()? - t.first()?));
    let field_magnitude_nt = log.b_nt.as_ref().map(|b| {
        let mags: Vec<f64> = (0..log.len())
            .map(|i| (b[0][i].powi(2) + b[1][i].powi(2) + b[2][i].powi(2)).sqrt())
            .collect();
        let min = mags.iter().copied().fold(f64::INFINITY, f64::min);
        let max = mags.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let mean = mags.iter().sum::<f64>() / mags.len() as f64;
        [min, mean, max]
    });
    let report = Inspection {
        file: args.log.display().to_string(),
        rows: log.len(),
        header_line: log.header_line,
        columns,
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
        time_span_s,
        field_magnitude_nt,
        mounts: log.mount_labels.clone(),
        plan_ok: plan.as_ref().map(|_| true),
    };
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&report)?)?;
        return Ok(Outcome::Passed);
    }
    outln!(
        "{}: {} rows (header on line {})",
        report.file,
        report.rows,
        report.header_line
    )?;
    outln!("  columns used : {}", report.columns.join(", "))?;
    if !report.ignored_columns.is_empty() {
        outln!("  ignored      : {}", report.ignored_columns.join(", "))?;
    }
    if let Some(span) = report.time_span_s {
        outln!("  time span    : {span:.3} s")?;
    }
    if let Some([min, mean, max]) = report.field_magnitude_nt {
        outln!("  |B|          : min {min:.1} nT, mean {mean:.1} nT, max {max:.1} nT")?;
    }
    if !report.mounts.is_empty() {
        outln!("  mounts       : {}", report.mounts.join(", "))?;
    }
    if report.rows_skipped > 0 {
        outln!("  skipped rows : {}", report.rows_skipped)?;
        for s in report.skipped.iter().take(10) {
            outln!("    {}", s.reason)?;
        }
        if report.rows_skipped > 10 {
            outln!("    … and {} more", report.rows_skipped - 10)?;
        }
    }
    if let Some(p) = &args.plan {
        outln!("  plan         : {} is valid", p.display())?;
    }
    Ok(Outcome::Passed)
}
