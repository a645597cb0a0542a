//! `magproof inspect LOG [--plan P]`: read a log (and a plan) the way every check would,
//! and say what was found: the columns used with the plan's mapping applied, rows, time
//! span, ignored columns and skipped rows. A quick way to find a bad cell before the
//! real run. A log without usable field columns exits 2 after the listing.

use std::path::PathBuf;

use clap::Args as ClapArgs;
use serde::Serialize;

use super::common::{load_plan, InputArgs, Outcome, SensorArgs};
use magproof::check::input::read_options;
use magproof::check::InputOptions;
use magproof::log::{read_sweep, LogError, Plan, Shown, SweepLog, UsedColumn};

/// Flags of `magproof inspect`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Sweep log (CSV).
    log: PathBuf,
    /// Test plan (TOML); checked too, and its [magnetometer], [columns] and [log] apply.
    #[arg(long)]
    plan: Option<PathBuf>,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    sensor: SensorArgs,
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
    mapping: Vec<UsedColumn>,
    ignored_columns: Vec<String>,
    rows_skipped: usize,
    skipped: Vec<Skipped>,
    time_span_s: Option<f64>,
    field_magnitude_nt: Option<[f64; 3]>,
    mounts: Vec<String>,
    sensor: Option<String>,
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
        .map(|p| load_plan(p, args.sensor.sensor.as_deref()))
        .transpose()?;
    let log = read_log(&args, plan.as_ref())?;
    let report = gather(&args, plan.as_ref(), &log);
    if args.json {
        outln!("{}", serde_json::to_string_pretty(&report)?)?;
    } else {
        print_text(&report, &args)?;
    }
    if log.b_nt.is_none() {
        return Err(magproof::Error::from(LogError::MissingColumn {
            path: Shown(args.log.clone()),
            column: "bx, by, bz".into(),
            why: "the log holds no usable field columns; name them bx by bz, or map the \
                  log's own names in the plan's [columns] (or a magnetometer's columns)"
                .into(),
        })
        .into());
    }
    Ok(Outcome::Passed)
}

/// Read the log as every check would: the plan's unit, mapping and layout applied.
fn read_log(args: &Args, plan: Option<&Plan>) -> anyhow::Result<SweepLog> {
    let options = InputOptions {
        unit: args.input.unit,
        range_nt: args.input.range,
        skip_bad_rows: args.input.skip_bad_rows,
        plan_range_applies: true,
        decimal_comma: args.input.decimal_comma,
    };
    let read = read_options(plan, &options)?;
    Ok(read_sweep(&args.log, &read).map_err(magproof::Error::from)?)
}

/// Our columns found, each with its internal unit.
fn used_columns(log: &SweepLog) -> Vec<String> {
    let mut columns = Vec::new();
    let mut push3 = |present: bool, names: [&str; 3]| {
        if present {
            columns.extend(names.map(String::from));
        }
    };
    push3(log.t_s.is_some(), ["t [s]", "", ""]);
    push3(log.b_nt.is_some(), ["bx [nT]", "by [nT]", "bz [nT]"]);
    push3(log.h_nt.is_some(), ["hx [nT]", "hy [nT]", "hz [nT]"]);
    push3(log.i_a.is_some(), ["ix [A]", "iy [A]", "iz [A]"]);
    push3(
        log.gyro_rad_s.is_some(),
        ["gx [rad/s]", "gy [rad/s]", "gz [rad/s]"],
    );
    push3(log.temp_c.is_some(), ["temp [°C]", "", ""]);
    columns.retain(|c| !c.is_empty());
    columns.extend(log.commands.iter().map(|c| format!("cmd_{}", c.rod)));
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

/// min, mean and max of |B|, nT.
fn field_magnitude_nt(log: &SweepLog) -> Option<[f64; 3]> {
    let b = log.b_nt.as_ref()?;
    let mags: Vec<f64> = (0..log.len())
        .map(|i| (b[0][i].powi(2) + b[1][i].powi(2) + b[2][i].powi(2)).sqrt())
        .collect();
    let min = mags.iter().copied().fold(f64::INFINITY, f64::min);
    let max = mags.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let mean = mags.iter().sum::<f64>() / mags.len() as f64;
    Some([min, mean, max])
}

fn gather(args: &Args, plan: Option<&Plan>, log: &SweepLog) -> Inspection {
    Inspection {
        file: args.log.display().to_string(),
        rows: log.len(),
        header_line: log.header_line,
        columns: used_columns(log),
        mapping: log.columns_used.clone(),
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
        field_magnitude_nt: field_magnitude_nt(log),
        mounts: log.mount_labels.clone(),
        sensor: plan.and_then(|p| p.sensor_name()).map(String::from),
        plan_ok: plan.map(|_| true),
    }
}

/// `bx ← MAG_X [counts] (× 0.15)`: one entry of the mapping applied.
fn mapping_entry(c: &UsedColumn) -> String {
    let same = c.header.eq_ignore_ascii_case(&c.quantity);
    let mut s = if same {
        c.quantity.clone()
    } else {
        format!("{} ← {}", c.quantity, c.header)
    };
    // The factor to the internal unit, when it is not 1.
    if (c.scale - 1.0).abs() > 1e-15 {
        s.push_str(&format!(" (× {})", c.scale));
    }
    s
}

fn print_text(report: &Inspection, args: &Args) -> anyhow::Result<()> {
    outln!(
        "{}: {} rows (header on line {})",
        report.file,
        report.rows,
        report.header_line
    )?;
    outln!("  columns used : {}", report.columns.join(", "))?;
    let mapping: Vec<String> = report.mapping.iter().map(mapping_entry).collect();
    outln!("  read as      : {}", mapping.join(", "))?;
    let ignored = if report.ignored_columns.is_empty() {
        "none".to_string()
    } else {
        report.ignored_columns.join(", ")
    };
    outln!("  ignored      : {ignored}")?;
    if let Some(sensor) = &report.sensor {
        outln!("  sensor       : {sensor}")?;
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
    print_skipped(report)?;
    if let Some(p) = &args.plan {
        outln!("  plan         : {} is valid", p.display())?;
    }
    Ok(())
}

fn print_skipped(report: &Inspection) -> anyhow::Result<()> {
    if report.rows_skipped == 0 {
        return Ok(());
    }
    outln!("  skipped rows : {}", report.rows_skipped)?;
    for s in report.skipped.iter().take(10) {
        outln!("    {}", s.reason)?;
    }
    if report.rows_skipped > 10 {
        outln!("    … and {} more", report.rows_skipped - 10)?;
    }
    Ok(())
}
