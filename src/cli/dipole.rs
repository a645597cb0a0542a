//! `magproof dipole LOG --plan P [--altitude-km H] [--inclination-deg I] [--fit-offset]
//! [--json] [--report DIR]`: the article's residual magnetic dipole from a turntable or
//! static field map, and the disturbance torque it makes in orbit (DESIGN §6–§8).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{InputArgs, Outcome, OutputArgs};
use magproof::check::dipole::{
    evaluate_dipole, DipolePosition, DipoleRequest, DipoleResult, DEFAULT_ALTITUDE_KM,
};
use magproof::log::{read_plan, ReadOptions};
use magproof::report::sections::dipole_section;

use super::report_out::{read_log, write_section_report};

/// Flags of `magproof dipole`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Sweep log (CSV) with `mount` and either `angle` (turntable) or `px py pz`
    /// (static map); rows with `mount` empty or `none` are the background.
    log: PathBuf,
    /// Test plan (TOML) with [dipole_test] mounts (and the probe position for a turntable).
    #[arg(long)]
    plan: PathBuf,
    /// Orbit altitude for the disturbance torque, km.
    #[arg(long, default_value_t = DEFAULT_ALTITUDE_KM, value_name = "KM")]
    altitude_km: f64,
    /// Orbit inclination, deg [default: 97.4, sun-synchronous; the result says so].
    #[arg(long, value_name = "DEG")]
    inclination_deg: Option<f64>,
    /// Fit the dipole's position as well (three more unknowns) instead of placing it at
    /// the table origin.
    #[arg(long)]
    fit_offset: bool,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// Run `dipole`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = read_plan(&args.plan).map_err(magproof::Error::from)?;
    let unit = args
        .input
        .unit
        .or_else(|| plan.magnetometer.as_ref().and_then(|m| m.unit))
        .unwrap_or_default();
    let mut req = DipoleRequest::new(args.log.clone(), plan);
    req.read_options = ReadOptions {
        default_unit: unit,
        skip_bad_rows: args.input.skip_bad_rows,
    };
    req.range_nt = args.input.range;
    req.altitude_km = args.altitude_km;
    req.inclination_deg = args.inclination_deg;
    req.position = if args.fit_offset {
        DipolePosition::Fitted
    } else {
        DipolePosition::AtTableOrigin
    };
    let log = read_log(&args.log, &req.read_options).map_err(magproof::Error::from)?;
    let result = evaluate_dipole(&log, &req)?;
    super::record::record_if_asked(
        &args.record,
        Some(&req.plan),
        magproof::log::plan::StepKind::Dipole,
        &args.log,
        &result,
    )?;
    drop(log);
    if let Some(dir) = &args.output.report {
        write_section_report(
            dir,
            args.output.force,
            "Residual magnetic dipole",
            Some(&req.plan),
            &[args.log.as_path(), args.plan.as_path()],
            dipole_section(&result)?,
            &serde_json::to_value(&result)?,
        )?;
    }
    if args.output.json {
        println!("{}", serde_json::to_string_pretty(&result)?);
    } else {
        print!("{}", render(&args.log, &result));
    }
    Ok(Outcome::from_pass(result.pass))
}

/// `value ± sigma` with the value rounded to the sigma's second significant digit;
/// scientific with one shared exponent for very small or large numbers.
fn pm(value: f64, sigma: f64) -> String {
    format_pm(value, sigma, true)
}

/// As [`pm`] for a quantity that is never negative (no sign shown).
fn pm_abs(value: f64, sigma: f64) -> String {
    format_pm(value, sigma, false)
}

fn format_pm(value: f64, sigma: f64, signed: bool) -> String {
    let big = value.abs().max(sigma);
    if !(big.is_finite() && big > 0.0) {
        return format!("{value} ± {sigma}");
    }
    if (1e-3..1e5).contains(&big) {
        let dec = magproof::report::terminal::decimals_for(sigma);
        return if signed {
            format!("{value:+.dec$} ± {sigma:.dec$}")
        } else {
            format!("{value:.dec$} ± {sigma:.dec$}")
        };
    }
    let exp = big.log10().floor() as i32;
    let scale = 10f64.powi(exp);
    let dec = magproof::report::terminal::decimals_for(sigma / scale);
    let (v, sg) = (value / scale, sigma / scale);
    if signed {
        format!("({v:+.dec$} ± {sg:.dec$})e{exp}")
    } else {
        format!("({v:.dec$} ± {sg:.dec$})e{exp}")
    }
}

/// Wrap `text` to lines of at most `width` characters, each after `indent`.
fn wrap(text: &str, indent: &str, width: usize) -> String {
    let mut out = String::new();
    let mut line = String::from(indent);
    for word in text.split_whitespace() {
        if line.chars().count() + word.chars().count() + 1 > width && !line.trim().is_empty() {
            out.push_str(line.trim_end());
            out.push('\n');
            line = String::from(indent) + "  ";
        }
        line.push_str(word);
        line.push(' ');
    }
    out.push_str(line.trim_end());
    out.push('\n');
    out
}

/// The terminal summary (fits 80 columns).
pub(crate) fn render(log: &std::path::Path, r: &DipoleResult) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let method = match r.method {
        magproof::check::dipole::DipoleMethod::Turntable => "turntable",
        magproof::check::dipole::DipoleMethod::Static => "static map",
    };
    let _ = writeln!(s, "dipole: {}", log.display());
    let _ = writeln!(
        s,
        "  {method}, {} mount(s), {} samples; background {} rows in {} segment(s)",
        r.mount_labels.len(),
        r.samples_used,
        r.background_samples,
        r.background_segments
    );
    if r.rows_skipped > 0 {
        let _ = writeln!(s, "  {} bad rows skipped (--skip-bad-rows)", r.rows_skipped);
    }
    for (i, axis) in ["x", "y", "z"].iter().enumerate() {
        let label = if i == 0 { "moment, body" } else { "" };
        let _ = writeln!(
            s,
            "  {label:<14}{axis}  {} A·m²",
            pm(r.moment_body_am2[i], r.moment_sigma_am2[i])
        );
    }
    let _ = writeln!(
        s,
        "  {:<14}   {} A·m²",
        "|m|",
        pm_abs(r.magnitude_am2, r.magnitude_sigma_am2)
    );
    if let (Some(o), Some(so)) = (r.offset_m, r.offset_sigma_m) {
        for (i, axis) in ["x", "y", "z"].iter().enumerate() {
            let label = if i == 0 { "offset, body" } else { "" };
            let _ = writeln!(s, "  {label:<14}{axis}  {} m", pm(o[i], so[i]));
        }
        let _ = writeln!(s, "  {:<14}   {} iterations", "solver", r.iterations);
    }
    let _ = writeln!(s, "  {:<14}   {:.2} nT", "residual RMS", r.residual_rms_nt);
    let _ = writeln!(
        s,
        "  {:<14}   {:.0} km, {:.1}° incl.; |B| max {:.0} nT, mean {:.0} nT",
        "orbit", r.altitude_km, r.inclination_deg, r.orbit_field_max_nt, r.orbit_field_mean_nt
    );
    s.push_str(&wrap(
        &format!("field model: {}", r.orbit_field_model),
        &" ".repeat(19),
        80,
    ));
    let _ = writeln!(
        s,
        "  {:<14}   worst case {} N·m",
        "torque",
        pm_abs(r.orbit_torque_max_n_m, r.orbit_torque_max_sigma_n_m)
    );
    let mean_sigma = r.magnitude_sigma_am2 * r.orbit_field_mean_nt * 1e-9;
    let _ = writeln!(
        s,
        "  {:<14}   orbit mean {} N·m (m ⊥ B)",
        "",
        pm_abs(r.orbit_torque_mean_n_m, mean_sigma)
    );
    for rod in &r.rods {
        let _ = writeln!(
            s,
            "  {:<14}   {} % of its nominal {} A·m²",
            format!("rod {}", rod.name),
            pm_abs(
                100.0 * rod.residual_fraction,
                100.0 * rod.residual_fraction_sigma
            ),
            rod.nominal_dipole_am2
        );
    }
    match (r.residual_dipole_max_am2, r.pass) {
        (Some(l), Some(p)) => {
            let verdict = if p { "PASS" } else { "FAIL" };
            let _ = writeln!(s, "  {:<14}   |m| ≤ {l} A·m²: {verdict}", "limit");
        }
        _ => {
            let _ = writeln!(s, "  {:<14}   none in the plan: no verdict", "limit");
        }
    }
    for w in &r.warnings {
        s.push_str(&wrap(&format!("warning: {w}"), "", 80));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pm_rounds_to_the_sigma() {
        assert_eq!(pm(0.012034, 0.000123), "+0.01203 ± 0.00012");
        assert_eq!(pm_abs(9.15e-7, 6.1e-9), "(9.150 ± 0.061)e-7");
    }

    #[test]
    fn wrap_keeps_lines_within_width() {
        let t = "word ".repeat(60);
        assert!(wrap(&t, "  ", 80).lines().all(|l| l.chars().count() <= 80));
    }
}
