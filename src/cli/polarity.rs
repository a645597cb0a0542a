//! `magproof polarity LOG --plan P [--json] [--report DIR] [--params-out FILE]`: per-rod
//! polarity verdict and coupling (DESIGN §6–§7), printed as an 80-column table or one
//! JSON object; optionally the coupling matrix for flight software.

use std::path::PathBuf;

use anyhow::Context;
use clap::{Args as ClapArgs, ValueEnum};

use super::common::{InputArgs, Outcome, OutputArgs};
use magproof::check::polarity::{
    run_polarity, DriftModel, PolarityRequest, PolarityResult, SensorChoice, DEFAULT_SNR_MIN,
};
use magproof::log::{read_plan, ReadOptions};
use magproof::report::polarity_params::write_polarity_params;
use magproof::report::sections::polarity_section;

use super::report_out::{read_log, write_section_report};

/// Flags of `magproof polarity`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Pulse log (CSV) with t, bx by bz and one cmd_<rod> column per rod.
    log: PathBuf,
    /// Test plan (TOML) with [[rod]] and the sensor's geometry.
    #[arg(long)]
    plan: PathBuf,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
    /// Write the coupling matrix (nT per command, sensor frame) for flight software:
    /// a C header if FILE ends in .h, else JSON.
    #[arg(long, value_name = "FILE")]
    params_out: Option<PathBuf>,
    /// Which sensor recorded the log: the plan's [probe] if it has one (auto), or say.
    #[arg(long, value_enum, default_value_t = SensorArg::Auto)]
    sensor: SensorArg,
    /// SNR below which a rod is called no-response.
    #[arg(long, default_value_t = DEFAULT_SNR_MIN)]
    snr_min: f64,
    /// Drift terms: auto, knots:SECONDS (piecewise-linear baseline) or poly:DEGREE.
    #[arg(long, default_value = "auto", value_parser = parse_drift)]
    drift: DriftModel,
    /// Largest lag searched, s (default: half the shortest pulse, at most 2 s).
    #[arg(long, value_name = "SECONDS")]
    max_lag_s: Option<f64>,
}

#[derive(Debug, Clone, Copy, ValueEnum)]
enum SensorArg {
    Auto,
    Magnetometer,
    Probe,
}

fn parse_drift(s: &str) -> Result<DriftModel, String> {
    let s = s.trim();
    if s.eq_ignore_ascii_case("auto") {
        return Ok(DriftModel::Auto);
    }
    if let Some(v) = s.strip_prefix("knots:") {
        let spacing_s: f64 = v
            .parse()
            .map_err(|_| format!("knots:SECONDS needs a number, found \"{v}\""))?;
        if !(spacing_s.is_finite() && spacing_s > 0.0) {
            return Err(format!("knot spacing must be positive, found {v}"));
        }
        return Ok(DriftModel::Knots { spacing_s });
    }
    if let Some(v) = s.strip_prefix("poly:") {
        let degree: usize = v
            .parse()
            .map_err(|_| format!("poly:DEGREE needs a whole number, found \"{v}\""))?;
        if degree > 5 {
            return Err(format!("polynomial degree must be 0..=5, found {degree}"));
        }
        return Ok(DriftModel::Polynomial { degree });
    }
    Err(format!(
        "expected auto, knots:SECONDS or poly:DEGREE, found \"{s}\""
    ))
}

/// Run `polarity`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    if let Some(m) = args.max_lag_s {
        if !(m.is_finite() && m > 0.0) {
            return Err(
                magproof::Error::Usage(format!("--max-lag-s must be positive, found {m}")).into(),
            );
        }
    }
    let plan = read_plan(&args.plan).map_err(magproof::Error::from)?;
    let sensor = match args.sensor {
        SensorArg::Auto => SensorChoice::Auto,
        SensorArg::Magnetometer => SensorChoice::Magnetometer,
        SensorArg::Probe => SensorChoice::Probe,
    };
    let unit = args
        .input
        .unit
        .or_else(|| plan.magnetometer.as_ref()?.unit)
        .unwrap_or_default();
    let opts = ReadOptions {
        default_unit: unit,
        skip_bad_rows: args.input.skip_bad_rows,
    };
    let log = read_log(&args.log, &opts).map_err(magproof::Error::from)?;
    let req = PolarityRequest {
        sensor,
        snr_min: args.snr_min,
        drift: args.drift,
        max_lag_s: args.max_lag_s,
        range_nt: args.input.range,
        ..PolarityRequest::new(&log, &plan)
    };
    let mut result = run_polarity(&req)?;
    if !log.skipped_rows.is_empty() {
        result.warnings.push(format!(
            "{} bad rows were skipped (--skip-bad-rows); the first: {}",
            log.skipped_rows.len(),
            log.skipped_rows[0].reason
        ));
    }
    super::record::record_if_asked(
        &args.record,
        Some(&plan),
        magproof::log::plan::StepKind::Polarity,
        &args.log,
        &result,
    )?;
    if let Some(path) = &args.params_out {
        write_polarity_params(&result, path, args.output.force)
            .with_context(|| format!("writing {}", path.display()))?;
    }
    if let Some(dir) = &args.output.report {
        write_section_report(
            dir,
            args.output.force,
            "Torque-rod polarity",
            Some(&plan),
            &[args.log.as_path(), args.plan.as_path()],
            polarity_section(&result)?,
            &serde_json::to_value(&result)?,
        )?;
    }
    let text = if args.output.json {
        serde_json::to_string_pretty(&result)? + "\n"
    } else {
        let mut t = render_table(&result);
        if let Some(p) = &args.params_out {
            t.push_str(&format!("coupling matrix written to {}\n", p.display()));
        }
        t
    };
    write_stdout(&text)?;
    Ok(Outcome::from_pass(Some(result.pass)))
}

/// The terminal rendering: a table of rods and notes, at most 80 columns wide.
pub fn render_table(r: &PolarityResult) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "{:<10} {:<12} {:>7} {:>20} {:>6} {:>6} {:>8}\n",
        "rod", "verdict", "angle", "|coupling| nT/cmd", "SNR", "gain", "settle"
    ));
    s.push_str(&format!("{}\n", "-".repeat(75)));
    for rod in &r.rods {
        let c = nalgebra::Vector3::from(rod.coupling_nt_per_command);
        let sigma = nalgebra::Vector3::from(rod.coupling_sigma_nt_per_command).norm();
        let name: String = rod.name.chars().take(10).collect();
        s.push_str(&format!(
            "{:<10} {:<12} {:>7} {:>20} {:>6} {:>6} {:>8}\n",
            name,
            rod.verdict.as_str(),
            rod.angle_to_expected_deg
                .map_or("-".into(), |a| format!("{a:.1}°")),
            if sigma < 0.1 {
                format!("{:.1} ± {:.3}", c.norm(), sigma)
            } else {
                format!("{:.1} ± {:.1}", c.norm(), sigma)
            },
            fmt_snr(rod.snr),
            rod.gain_ratio.map_or("-".into(), |g| {
                let mark = if rod.gain_reliable == Some(false) {
                    "*"
                } else {
                    ""
                };
                format!("{g:.2}{mark}")
            }),
            rod.settle_time_s
                .map_or("-".into(), |t| format!("{t:.3} s")),
        ));
    }
    s.push('\n');
    for rod in &r.rods {
        let rem = rod
            .remanent_offset_nt
            .map(|v| {
                format!(
                    "; remanent offset {:.1} nT",
                    nalgebra::Vector3::from(v).norm()
                )
            })
            .unwrap_or_default();
        push_wrapped(&mut s, &format!("{}: {}{rem}", rod.name, rod.note), "  ");
    }
    push_wrapped(
        &mut s,
        &format!(
            "lag {:.4} s (response after command); noise {:.1}/{:.1}/{:.1} nT; angle limit {:.1}° ({}); {}",
            r.lag_s,
            r.noise_sigma_nt[0],
            r.noise_sigma_nt[1],
            r.noise_sigma_nt[2],
            r.angle_max_deg,
            r.angle_max_source,
            r.drift
        ),
        "",
    );
    if r.rods.iter().any(|x| x.gain_reliable == Some(false)) {
        s.push_str("* gain unreliable: sensor closer than three rod lengths\n");
    }
    for w in &r.warnings {
        push_wrapped(&mut s, &format!("warning: {w}"), "  ");
    }
    s.push_str(if r.pass {
        "PASS: every rod pushes the way the plan says\n"
    } else {
        "FAIL: at least one rod is not proven to push the way the plan says\n"
    });
    s
}

/// Print to stdout; a closed pipe (`| head`) is not an error.
fn write_stdout(text: &str) -> anyhow::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|_| out.flush()) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        r => Ok(r.context("writing to stdout")?),
    }
}

fn fmt_snr(x: f64) -> String {
    if !x.is_finite() {
        "inf".into()
    } else if x >= 1e5 {
        format!("{x:.0e}")
    } else {
        format!("{x:.0}")
    }
}

/// Append `text` wrapped at 80 columns; continuation lines start with `indent`.
fn push_wrapped(out: &mut String, text: &str, indent: &str) {
    let mut line = String::new();
    for word in text.split_whitespace() {
        let width = line.chars().count();
        if width > 0 && width + 1 + word.chars().count() > 80 {
            out.push_str(&line);
            out.push('\n');
            line = indent.to_string();
        } else if width > 0 && line != indent {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.trim().is_empty() {
        out.push_str(&line);
        out.push('\n');
    }
}
