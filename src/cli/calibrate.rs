//! `magproof calibrate LOG [--plan P] [--reference-nt F] [--json] [--report DIR]
//! [--params-out FILE]`: cage fit when the log has `hx hy hz`, else tumble fit
//! (DESIGN §6), with a terminal summary that fits 80 columns.

use std::path::{Path, PathBuf};

use anyhow::Context;
use clap::{Args as ClapArgs, ValueEnum};

use super::common::{InputArgs, Outcome, OutputArgs};
use magproof::check::calibrate::{
    run_calibrate, run_calibrate_with_progress, CalibrateRequest, CalibrationResult, Method,
    ReferenceSource,
};
use magproof::fit::tumble::Robust;
use magproof::log::{read_plan, ReadOptions};
use magproof::report::flight_params::{write_flight_params, ParamsFormat};
use magproof::report::sections::calibration_section;

use super::report_out::write_section_report;

/// Robust reweighting of the tumble fit.
#[derive(Debug, Clone, Copy, ValueEnum)]
enum RobustArg {
    /// Tukey biweight: gross outliers get zero weight and are counted.
    Tukey,
    /// Plain least squares.
    None,
}

/// Flags of `magproof calibrate`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Sweep log (CSV): a cage sweep (with hx hy hz) or a tumble test.
    log: PathBuf,
    /// Test plan (TOML): [site], [cage], [magnetometer] and [limits] are used.
    #[arg(long)]
    plan: Option<PathBuf>,
    /// Reference field magnitude for a tumble, nT (beats the plan's [site]).
    #[arg(long, value_name = "NT")]
    reference_nt: Option<f64>,
    /// Write flight-software parameters: FILE.json or FILE.h.
    #[arg(long, value_name = "FILE")]
    params_out: Option<PathBuf>,
    /// Robust reweighting of the tumble fit.
    #[arg(long, value_enum, default_value = "tukey")]
    robust: RobustArg,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// Run `calibrate`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    if let Some(p) = &args.params_out {
        ParamsFormat::for_path(p)?;
    }
    let plan = match &args.plan {
        Some(p) => Some(read_plan(p).map_err(magproof::Error::from)?),
        None => None,
    };
    let unit = args
        .input
        .unit
        .or_else(|| plan.as_ref().and_then(|p| p.magnetometer.as_ref()?.unit))
        .unwrap_or_default();
    let req = CalibrateRequest {
        log: args.log.clone(),
        plan,
        reference_nt: args.reference_nt,
        read: ReadOptions {
            default_unit: unit,
            skip_bad_rows: args.input.skip_bad_rows,
        },
        range_nt: args.input.range,
        robust: match args.robust {
            RobustArg::Tukey => Robust::Tukey,
            RobustArg::None => Robust::Off,
        },
        // Only the report's plots use the corrected samples.
        keep_samples: args.output.report.is_some(),
    };
    let result = match super::report_out::progress_bar(&args.log) {
        None => run_calibrate(&req)?,
        Some(bar) => {
            let r = run_calibrate_with_progress(&req, &mut |b| bar.set_position(b));
            bar.finish_and_clear();
            r?
        }
    };
    super::record::record_if_asked(
        &args.record,
        req.plan.as_ref(),
        magproof::log::plan::StepKind::Calibrate,
        &args.log,
        &result,
    )?;
    if let Some(p) = &args.params_out {
        write_flight_params(&result, p, args.output.force)
            .with_context(|| format!("writing flight parameters to {}", p.display()))?;
    }
    if let Some(dir) = &args.output.report {
        let mut inputs: Vec<&Path> = vec![&args.log];
        if let Some(p) = &args.plan {
            inputs.push(p);
        }
        write_section_report(
            dir,
            args.output.force,
            "Magnetometer calibration",
            req.plan.as_ref(),
            &inputs,
            calibration_section(&result)?,
            &serde_json::to_value(&result)?,
        )?;
    }
    if args.output.json {
        println!("{}", serde_json::to_string_pretty(&result)?);
    } else {
        print!("{}", render(&result));
        if let Some(p) = &args.params_out {
            println!("  parameters   written to {}", p.display());
        }
    }
    Ok(Outcome::from_pass(result.pass))
}

fn fmt_w(v: f64, s: f64) -> String {
    // Five or six decimals: six when the 1σ needs them to show; the line stays ≤ 80 columns.
    let d = magproof::report::terminal::decimals_for(s).clamp(5, 6);
    format!("{v:+.d$} ±{s:.d$}")
}

/// The terminal summary (each line ≤ 80 columns).
pub(crate) fn render(r: &CalibrationResult) -> String {
    let mut o = String::new();
    let name = Path::new(&r.log)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| r.log.clone());
    let method = match r.method {
        Method::Cage => "cage-sweep",
        Method::Tumble => "tumble",
    };
    o += &format!("{method} calibration of {name}\n");
    o += &format!(
        "  samples      {} used, {} rejected\n",
        r.samples_used, r.samples_rejected
    );
    match r.reference_nt {
        Some(x) => {
            let from = match r.reference_source {
                ReferenceSource::Flag => "from --reference-nt",
                ReferenceSource::Plan => "from the plan's [site]",
                ReferenceSource::Model => "geomagnetic model at the plan's [site]",
                _ => "",
            };
            o += &format!("  reference    {x:.1} nT ({from})\n");
        }
        None if r.method == Method::Tumble => o += "  reference    none: scale unanchored\n",
        None => {}
    }
    for (a, axis) in ["x", "y", "z"].iter().enumerate() {
        let lead = if a == 0 {
            "  hard iron    "
        } else {
            "               "
        };
        o += &format!(
            "{lead}{axis} {:+10.1} ± {:6.1} nT   (sensor frame)\n",
            r.hard_iron_nt[a], r.hard_iron_sigma_nt[a]
        );
    }
    o += &format!(
        "  soft iron W  sensor → {} frame, dimensionless, ±1σ\n",
        r.soft_iron_frame
    );
    for i in 0..3 {
        o += &format!(
            "               [ {}  {}  {} ]\n",
            fmt_w(r.soft_iron[i][0], r.soft_iron_sigma[i][0]),
            fmt_w(r.soft_iron[i][1], r.soft_iron_sigma[i][1]),
            fmt_w(r.soft_iron[i][2], r.soft_iron_sigma[i][2])
        );
    }
    // RMS of n samples: relative 1σ ≈ 1/√(2n).
    let rms_sd = r.residual_rms_nt / (2.0 * r.samples_used.max(1) as f64).sqrt();
    let verdict = match (r.residual_limit_nt, r.pass) {
        (Some(l), Some(true)) => format!(" (limit {l:.1} nT: PASS)"),
        (Some(l), Some(false)) => format!(" (limit {l:.1} nT: FAIL)"),
        _ => String::new(),
    };
    o += &format!(
        "  residual     {}{verdict}\n",
        magproof::report::terminal::value_sigma(r.residual_rms_nt, rms_sd, "nT RMS")
    );
    o += &format!(
        "  coverage     {:.2} of the sphere (48 equal-area cells)\n",
        r.coverage
    );
    if let Some(t) = &r.temperature {
        o += &format!(
            "  temp slope   over {:.1} °C, about {:.1} °C, nT/°C:\n",
            t.span_c, t.reference_c
        );
        o += &format!(
            "               x {:+.2} ± {:.2}  y {:+.2} ± {:.2}  z {:+.2} ± {:.2}\n",
            t.slope_nt_per_c[0],
            t.slope_sigma_nt_per_c[0],
            t.slope_nt_per_c[1],
            t.slope_sigma_nt_per_c[1],
            t.slope_nt_per_c[2],
            t.slope_sigma_nt_per_c[2]
        );
    }
    if let Some(c) = &r.cage {
        let sd_row = |i: usize| {
            let row = c.response[i];
            let n = (row[0] * row[0] + row[1] * row[1] + row[2] * row[2]).sqrt();
            let var: f64 = (0..3)
                .map(|j| (row[j] / n * c.response_sigma[i][j]).powi(2))
                .sum();
            (n, var.sqrt())
        };
        let s: Vec<(f64, f64)> = (0..3).map(sd_row).collect();
        o += &format!(
            "  scale        x {:.5} ± {:.5}  y {:.5} ± {:.5}  z {:.5} ± {:.5}\n",
            s[0].0, s[0].1, s[1].0, s[1].1, s[2].0, s[2].1
        );
        let mean_sd = c.response_sigma.iter().flatten().sum::<f64>() / 9.0;
        let ang_sd = (2.0f64).sqrt() * mean_sd.to_degrees();
        o += &format!(
            "  non-orth.    xy {:+.3}°  xz {:+.3}°  yz {:+.3}°  (± {:.3}°)\n",
            c.non_orthogonality_deg[0],
            c.non_orthogonality_deg[1],
            c.non_orthogonality_deg[2],
            ang_sd
        );
        o += &format!(
            "  misalignment {:.3}° ± {:.3}° (rotation of A = R·S)\n",
            c.misalignment_deg, ang_sd
        );
        o += &format!(
            "  worst resid. {:.1} nT at line {}\n",
            c.worst_residual_nt, c.worst_residual_line
        );
    }
    for w in &r.warnings {
        o += &wrap("  warning: ", w);
    }
    for n in &r.notes {
        o += &wrap("  note: ", n);
    }
    o
}

/// Wrap `text` after `lead` to 80 columns, continuation lines indented.
fn wrap(lead: &str, text: &str) -> String {
    let indent = " ".repeat(lead.chars().count());
    let mut out = String::new();
    let mut line = lead.to_string();
    let mut len = line.chars().count();
    let mut first = true;
    for word in text.split_whitespace() {
        let wl = word.chars().count();
        if !first && len + 1 + wl > 80 {
            out += line.trim_end();
            out.push('\n');
            line = indent.clone();
            len = indent.len();
            first = true;
        }
        if !first {
            line.push(' ');
            len += 1;
        }
        line += word;
        len += wl;
        first = false;
    }
    out += line.trim_end();
    out.push('\n');
    out
}
