//! Orbit calibration section: hard iron, soft iron, regressor biases and temperature
//! slope with ±1σ, the ground comparison, and plots of the residual along the orbit,
//! against latitude, and of each regressor's fitted bias.

#![allow(clippy::needless_range_loop)] // x, y, z indexed in step with AXES

use super::{figure, pm, short, to_json, verdict_tone};
use crate::check::orbit::OrbitResult;
use crate::report::model::{Cell, Figure, Section, Table, Tone};
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

const AXES: [&str; 3] = ["x", "y", "z"];

/// Build the orbit section of a report.
pub fn orbit_section(r: &OrbitResult) -> Result<Section, Error> {
    let mut tables = vec![regressor_table(r)];
    if let Some(t) = ground_table(r) {
        tables.push(t);
    }
    tables.push(super::gates_table(&r.gates));
    Ok(Section {
        kind: "orbit".into(),
        title: "Magnetometer calibration on orbit".into(),
        verdict: r.verdict,
        figures_of_merit: figures_of_merit(r),
        tables,
        figures: figures(r)?,
        warnings: crate::check::outcome::tally(&r.warnings),
        notes: notes(r),
        result: to_json(r)?,
    })
}

fn figures_of_merit(r: &OrbitResult) -> Vec<(String, String)> {
    let mut out = vec![
        ("positions".to_string(), r.reference.word().to_string()),
        (
            "reference".into(),
            format!(
                "{} magnitude, mean {} nT; grid {} s, largest interpolation error {} nT",
                r.model,
                short(r.mean_model_nt),
                short(r.model_grid_s),
                short(r.model_grid_error_nt)
            ),
        ),
    ];
    out.push(("ground comparison".into(), ground_word(r)));
    if let Some(age) = r.tle_age_days {
        out.push((
            "element set age".into(),
            format!("{age:.2} days at the first sample"),
        ));
    }
    for a in 0..3 {
        out.push((
            format!("hard iron {} (sensor)", AXES[a]),
            pm(r.hard_iron_nt[a], Some(r.hard_iron_sigma_nt[a]), "nT"),
        ));
    }
    for a in 0..3 {
        out.push((
            format!("soft iron row {}", AXES[a]),
            (0..3)
                .map(|b| pm(r.soft_iron[a][b], Some(r.soft_iron_sigma[a][b]), ""))
                .collect::<Vec<_>>()
                .join(", "),
        ));
    }
    if let (Some(s), Some(ss)) = (
        r.temperature_slope_nt_per_c,
        r.temperature_slope_sigma_nt_per_c,
    ) {
        for a in 0..3 {
            out.push((
                format!("temperature slope {}", AXES[a]),
                pm(s[a], Some(ss[a]), "nT/°C"),
            ));
        }
    }
    if let Some(t) = r.reference_temperature_c {
        out.push(("reference temperature".into(), format!("{t:.1} °C")));
    }
    out.push((
        "residual".into(),
        format!(
            "{} nT RMS (robust σ {} nT)",
            short(r.residual_rms_nt),
            short(r.residual_sigma_nt)
        ),
    ));
    out.push((
        "samples".into(),
        format!(
            "{} used of {} rows; {} rejected by the robust weights, {} saturated",
            r.samples_used, r.rows, r.samples_rejected, r.samples_saturated
        ),
    ));
    out
}

fn regressor_table(r: &OrbitResult) -> Table {
    let rows = r
        .regressors
        .iter()
        .map(|g| {
            let mut row = vec![Cell::plain(g.name.clone())];
            for a in 0..3 {
                row.push(Cell::plain(pm(
                    g.bias_nt_per_unit[a],
                    Some(g.sigma[a]),
                    &format!("nT/{}", g.unit),
                )));
            }
            row
        })
        .collect();
    Table {
        caption: "Bias per unit of each regressor, sensor frame (±1σ)".into(),
        header: vec!["regressor".into(), "x".into(), "y".into(), "z".into()],
        rows,
    }
}

fn ground_table(r: &OrbitResult) -> Option<Table> {
    let g = r.ground.as_ref()?;
    let rows = (0..3)
        .map(|a| {
            let big = g.hard_iron_delta_nt[a].abs() > 3.0 * g.sigma_nt[a];
            vec![
                Cell::plain(AXES[a]),
                Cell::plain(format!("{:.0} nT", g.ground_hard_iron_nt[a])),
                Cell::plain(pm(r.hard_iron_nt[a], Some(r.hard_iron_sigma_nt[a]), "nT")),
                Cell::plain(pm(g.hard_iron_delta_nt[a], Some(g.sigma_nt[a]), "nT")),
                if big {
                    Cell::toned("changed (> 3σ)", Tone::Warn)
                } else {
                    Cell::toned("consistent", Tone::Good)
                },
            ]
        })
        .collect();
    Some(Table {
        caption: format!(
            "Hard iron: ground (build {}, recorded {}) against orbit, sensor frame",
            g.build, g.recorded_at
        ),
        header: vec![
            "axis".into(),
            "ground".into(),
            "orbit".into(),
            "orbit − ground".into(),
            "".into(),
        ],
        rows,
    })
}

fn figures(r: &OrbitResult) -> Result<Vec<Figure>, Error> {
    let s = &r.samples;
    if s.residual_nt.is_empty() {
        return Ok(Vec::new());
    }
    let along: Vec<(f64, f64)> = s
        .t_s
        .iter()
        .map(|t| t / 60.0)
        .zip(s.residual_nt.iter().copied())
        .collect();
    let mut out = vec![
        figure(
            "orbit-residual-time.svg",
            "Residual |W(b − c − Σk·x)| − |B_IGRF| along the orbit",
            draw_xy(&XyPlot::new("Residual along the orbit", "time after first sample [min]", "residual [nT]").with(
                Series::points("residual", along, 0),
            ))?,
        ),
        figure(
            "orbit-residual-latitude.svg",
            "Residual against geodetic latitude (at the model nodes): structure here points at the model or the positions",
            draw_xy(&XyPlot::new("Residual against latitude", "geodetic latitude [deg]", "residual [nT]").with(
                Series::points("residual", s.latitude_residual.clone(), 1),
            ))?,
        ),
    ];
    for (k, (name, pts)) in s.regressor_effect.iter().enumerate() {
        // The regressor's own unit on its axis (A for a current, command for a rod).
        let unit = r
            .regressors
            .iter()
            .find(|g| &g.name == name)
            .map_or("as logged", |g| g.unit.as_str());
        out.push(figure(
            &format!("orbit-regressor-{k}.svg"),
            &format!("Fitted bias of {name} on its largest axis, sensor frame"),
            draw_xy(
                &XyPlot::new(
                    &format!("Bias from {name}"),
                    &format!("{name} [{unit}]"),
                    "bias on its largest axis [nT]",
                )
                .with(Series::line("fitted bias", pts.clone(), 2)),
            )?,
        ));
        if let Some(partial) = s.regressor_partial.get(k) {
            out.push(regressor_fit_figure(k, name, unit, partial)?);
        }
    }
    Ok(out)
}

/// How a regressor's bias fits the data: the residual with its bias put back against the
/// regressor, beside the magnitude the fitted bias accounts for.
fn regressor_fit_figure(
    k: usize,
    name: &str,
    unit: &str,
    partial: &[(f64, f64, f64)],
) -> Result<Figure, Error> {
    let data = partial.iter().map(|p| (p.0, p.2)).collect();
    let fitted = partial.iter().map(|p| (p.0, p.1)).collect();
    Ok(figure(
        &format!("orbit-regressor-{k}-fit.svg"),
        &format!(
            "The residual with the fitted {name} bias put back (dots) against {name}, beside \
             the field magnitude that bias accounts for at each sample: when the bias is real \
             the dots follow the fitted values"
        ),
        draw_xy(
            &XyPlot::new(
                &format!("Fit of {name}"),
                &format!("{name} [{unit}]"),
                "field magnitude [nT]",
            )
            .with(Series::points("residual + bias", data, 0))
            .with(Series::points("fitted bias", fitted, 2)),
        )?,
    ))
}

/// The ground comparison in a few words: its build and flag, or why there is none.
fn ground_word(r: &OrbitResult) -> String {
    use crate::check::orbit::OrbitWarning;
    if let Some(g) = &r.ground {
        let flag = if g.flag {
            ", changed beyond 3σ"
        } else {
            ", within 3σ"
        };
        return format!("build {} (recorded {}){flag}", g.build, g.recorded_at);
    }
    match r.warnings.iter().find_map(|w| match w {
        OrbitWarning::NoGround(_) => Some(w.to_string()),
        _ => None,
    }) {
        Some(why) => why.replacen("no ground comparison: ", "none: ", 1),
        None => "not asked for".into(),
    }
}

fn notes(r: &OrbitResult) -> Vec<String> {
    let mut out = vec![
        "Hard iron is the bias at zero current, rods off and the reference temperature; every \
         bias is in the sensor frame. A magnitude fit cannot see a rotation of the sensor: \
         W is symmetric."
            .to_string(),
        "Time tags matter: at 7.6 km/s, 1 s of clock error moves the reference by up to \
         tens of nT in low orbit."
            .to_string(),
    ];
    if r.ground.as_ref().is_some_and(|g| g.flag) {
        out.push(
            "A change from the ground calibration is a warning for the flight team, not a \
             failed verdict: decide with the project's verification authority before replacing \
             the onboard values."
                .into(),
        );
    }
    let _ = verdict_tone(r.verdict);
    out
}
