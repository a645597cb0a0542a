//! Rod bench section: the rod's moment per ampere, core gain, linearity, remanence, time
//! constant and fall-off with ±1σ; the gates; the m(I) hysteresis loop with its line,
//! the field against distance on log–log axes with the point dipole's −3 line, and the
//! step responses.

use super::{figure, pm, short, to_json};
use crate::check::rod::RodResult;
use crate::report::model::{Cell, Figure, Section, Table};
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

/// Build the rod section of a report.
pub fn rod_section(r: &RodResult) -> Result<Section, Error> {
    Ok(Section {
        kind: "rod".into(),
        title: format!("Torque rod {} on the bench", r.serial),
        verdict: r.verdict,
        figures_of_merit: figures_of_merit(r),
        tables: vec![stations_table(r), super::gates_table(&r.gates)],
        figures: figures(r)?,
        warnings: crate::check::outcome::tally(&r.warnings),
        notes: notes(r),
        result: to_json(r)?,
    })
}

fn opt(v: Option<f64>, sigma: Option<f64>, unit: &str) -> String {
    v.map_or("not measured".into(), |v| pm(v, sigma, unit))
}

/// Key figures with units and ±1σ.
fn figures_of_merit(r: &RodResult) -> Vec<(String, String)> {
    let predicted = r.core_gain_predicted.map_or(String::new(), |p| {
        format!(
            " (predicted {} with N_d = {}, an approximation)",
            short(p),
            short(r.demag_factor.unwrap_or(f64::NAN))
        )
    });
    vec![
        (
            "moment per ampere".into(),
            pm(
                r.moment_per_amp_am2_per_a,
                Some(r.moment_per_amp_sigma),
                "A·m²/A",
            ),
        ),
        (
            format!("|m| at the rated {} A", short(r.rod_current_max_a)),
            opt(r.moment_at_max_am2, r.moment_at_max_sigma_am2, "A·m²"),
        ),
        (
            "air core N·A".into(),
            format!("{} A·m²/A", short(r.air_core_am2_per_a)),
        ),
        (
            "core gain".into(),
            format!("{}{predicted}", short(r.core_gain)),
        ),
        (
            "linearity (largest deviation)".into(),
            format!(
                "{} % of |m| at the rated current",
                short(r.linearity_max_dev_pct)
            ),
        ),
        (
            "saturation knee".into(),
            r.saturation_current_a
                .map_or("not reached".into(), |i| format!("{} A", short(i))),
        ),
        (
            "remanence".into(),
            match (r.remanence_am2, r.remanence_pct) {
                (Some(m), Some(p)) => format!(
                    "{} ({} % of |m| at the rated current)",
                    pm(m, r.remanence_sigma_am2, "A·m²"),
                    short(p)
                ),
                _ => "not measured".into(),
            },
        ),
        (
            "time constant".into(),
            opt(r.time_constant_s, r.time_constant_sigma_s, "s"),
        ),
        (
            "fall-off exponent".into(),
            match (r.falloff_exponent, r.falloff_exponent_finite_rod) {
                (Some(n), Some(f)) => format!(
                    "{} ({} stations; −3 for a point dipole, {} for a uniform rod of this size)",
                    pm(n, r.falloff_exponent_sigma, ""),
                    r.falloff_stations.unwrap_or("-"),
                    short(f)
                ),
                _ => "not measured".into(),
            },
        ),
        (
            "polarity".into(),
            format!("{:?} (against the marked +axis)", r.polarity).to_lowercase(),
        ),
    ]
}

/// One row per probe station: distance (m, rod lengths) and axial field per ampere.
fn stations_table(r: &RodResult) -> Table {
    Table {
        caption: "Probe stations (rod frame: +z toward the marked end)".into(),
        header: vec![
            "station".into(),
            "kind".into(),
            "distance".into(),
            "rod lengths".into(),
            "B_z per ampere".into(),
        ],
        rows: r
            .stations
            .iter()
            .map(|s| {
                vec![
                    Cell::plain(&s.label),
                    Cell::plain(s.kind),
                    Cell::plain(format!("{} m", short(s.distance_m))),
                    Cell::toned(
                        short(s.rod_lengths),
                        if s.rod_lengths < 3.0 {
                            crate::report::model::Tone::Warn
                        } else {
                            crate::report::model::Tone::Plain
                        },
                    ),
                    Cell::plain(pm(
                        s.field_per_amp_nt_per_a,
                        Some(s.field_per_amp_sigma),
                        "nT/A",
                    )),
                ]
            })
            .collect(),
    }
}

fn figures(r: &RodResult) -> Result<Vec<Figure>, Error> {
    let mut out = vec![loop_figure(r)?];
    if let Some(f) = falloff_figure(r)? {
        out.push(f);
    }
    if !r.responses.is_empty() {
        out.push(response_figure(r)?);
    }
    Ok(out)
}

/// m against I in time order (the hysteresis loop) with the fitted line.
fn loop_figure(r: &RodResult) -> Result<Figure, Error> {
    let path: Vec<(f64, f64)> = r
        .levels
        .iter()
        .map(|l| (l.current_a, l.moment_am2))
        .collect();
    let i_max = r
        .levels
        .iter()
        .fold(0.0_f64, |m, l| m.max(l.current_a.abs()));
    let line = vec![
        (-i_max, r.intercept_am2 - r.moment_per_amp_am2_per_a * i_max),
        (i_max, r.intercept_am2 + r.moment_per_amp_am2_per_a * i_max),
    ];
    let plot = XyPlot::new("Moment against current", "current I [A]", "moment m [A·m²]")
        .with(Series::line("levels in time order", path.clone(), 0))
        .with(Series::points("level", path, 0))
        .with(Series::dashed("slope fit (|I| ≤ I_max/2)", line, 1));
    Ok(figure(
        "rod-loop.svg",
        "Moment of each current level in the order measured: the loop's width at I = 0 is \
         twice the remanence; the dashed line is the slope fit.",
        draw_xy(&plot)?,
    ))
}

/// log10 |B_z per ampere| against log10 distance, per station kind, with a −3 line.
fn falloff_figure(r: &RodResult) -> Result<Option<Figure>, Error> {
    let pts = |kind: &str| -> Vec<(f64, f64)> {
        r.stations
            .iter()
            .filter(|s| s.kind == kind && s.field_per_amp_nt_per_a != 0.0)
            .map(|s| (s.distance_m.log10(), s.field_per_amp_nt_per_a.abs().log10()))
            .collect()
    };
    let (axis, side) = (pts("on-axis"), pts("broadside"));
    let anchor = axis.last().or(side.last()).copied();
    let Some((x0, y0)) = anchor else {
        return Ok(None);
    };
    let all: Vec<f64> = axis.iter().chain(&side).map(|p| p.0).collect();
    let lo = all.iter().copied().fold(f64::INFINITY, f64::min) - 0.05;
    let hi = all.iter().copied().fold(f64::NEG_INFINITY, f64::max) + 0.05;
    let minus3 = vec![(lo, y0 - 3.0 * (lo - x0)), (hi, y0 - 3.0 * (hi - x0))];
    let mut plot = XyPlot::new(
        "Field against distance (log–log)",
        "log10 distance [m]",
        "log10 |B_z| per ampere [nT/A]",
    );
    // Stations joined by a solid line: it lies on the dashed −3 line when the rod
    // falls off as a dipole, and is seen beside it when not.
    if !axis.is_empty() {
        plot = plot
            .with(Series::line("on-axis stations", axis.clone(), 0))
            .with(Series::points("on-axis stations", axis, 0));
    }
    if !side.is_empty() {
        plot = plot
            .with(Series::line("broadside stations", side.clone(), 2))
            .with(Series::points("broadside stations", side, 2));
    }
    plot = plot.with(Series::dashed("slope −3 (point dipole)", minus3, 1));
    Ok(Some(figure(
        "rod-falloff.svg",
        "Axial field per ampere at each station on log–log axes; a point dipole falls on a \
         line of slope −3 (drawn through the farthest station).",
        draw_xy(&plot)?,
    )))
}

/// The normalised step responses with the fitted first-order decay.
fn response_figure(r: &RodResult) -> Result<Figure, Error> {
    let mut plot = XyPlot::new(
        "Step responses",
        "time since the current step [s]",
        "remaining fraction of the field change [fraction of the step]",
    );
    for (k, resp) in r.responses.iter().enumerate() {
        // Currents to 0.1 mA: a rod-off level reads 0, not its noise.
        let amps = |i: f64| short((i * 1e4).round() / 1e4);
        let name = format!("{} → {} A", amps(resp.from_to_a.0), amps(resp.from_to_a.1));
        plot = plot.with(Series::line(&name, resp.points.clone(), k % 6));
    }
    if let Some(tau) = r.time_constant_s {
        let t_end = r
            .responses
            .iter()
            .flat_map(|s| s.points.last().map(|p| p.0))
            .fold(0.0, f64::max);
        let decay = (0..=50)
            .map(|i| {
                let t = t_end * i as f64 / 50.0;
                (t, (-t / tau).exp())
            })
            .collect();
        plot = plot.with(Series::dashed("exp(−t/τ)", decay, 1));
    }
    Ok(figure(
        "rod-steps.svg",
        "Probe field after each current step, as the fraction of the change still to come \
         (1 at the step, 0 when settled); the dashed curve is the fitted time constant.",
        draw_xy(&plot)?,
    ))
}

fn notes(r: &RodResult) -> Vec<String> {
    let mut n = vec![
        "The moment of each level is fitted over every station with the field of a \
         uniformly magnetised rod along its axis (the point dipole far away); the cored \
         prediction uses the prolate-ellipsoid demagnetising factor (Osborn 1945), an \
         approximation for a cylinder (Chen, Brug & Goldfarb 1991)."
            .to_string(),
        "Drive the rod only within its rated current and duty: windings heat, and the \
         bench field can upset pacemakers; follow the facility's procedures."
            .to_string(),
    ];
    if r.verdict != crate::check::Verdict::Pass {
        n.push(format!("Verdict {}: see the gates.", r.verdict.word()));
    }
    n
}
