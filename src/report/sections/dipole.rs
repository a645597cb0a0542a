//! Dipole section: the residual moment with ±1σ, the worst-case orbit torque, the limit
//! verdict, and per mount a plot of measured and model field against table angle.

#![allow(clippy::needless_range_loop)] // x, y, z indexed in step with AXES

use super::{figure, pm, short, to_json, verdict_tone};
use crate::check::dipole::{DipoleMethod, DipoleResult};
use crate::report::model::{Cell, Figure, Section, Table};
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

const AXES: [&str; 3] = ["x", "y", "z"];

/// Build the dipole section of a report.
pub fn dipole_section(r: &DipoleResult) -> Result<Section, Error> {
    Ok(Section {
        kind: "dipole".into(),
        title: "Residual magnetic dipole".into(),
        verdict: r.verdict,
        figures_of_merit: dipole_figures_of_merit(r),
        tables: vec![verdict_table(r), super::gates_table(&r.gates)],
        figures: dipole_figures(r)?,
        warnings: crate::check::outcome::tally(&r.warnings),
        notes: dipole_notes(r),
        result: to_json(r)?,
    })
}

/// Every figure of merit, in display order: method and samples, the moment (A·m²) and
/// position (m), the residual (nT), then the orbit and its torques (N·m).
fn dipole_figures_of_merit(r: &DipoleResult) -> Vec<(String, String)> {
    let mut fom = vec![
        ("method".to_string(), method_text(r.method).to_string()),
        (
            "samples".into(),
            format!(
                "{} article-present in {} mount(s); background {} rows in {} segment(s)",
                r.samples_used,
                r.mount_labels.len(),
                r.background_samples,
                r.background_segments
            ),
        ),
    ];
    fom.extend(moment_and_position_rows(r));
    fom.push((
        "residual RMS".into(),
        format!("{} nT", short(r.residual_rms_nt)),
    ));
    fom.extend(orbit_torque_rows(r));
    fom
}

/// How the field was mapped, in words.
fn method_text(method: DipoleMethod) -> &'static str {
    match method {
        DipoleMethod::Turntable => "turntable, fixed probe",
        DipoleMethod::Static => "static map, probe moved",
    }
}

/// The body-frame moment (A·m²) per axis and its magnitude, then the fitted position
/// (m) per axis when the fit had one.
fn moment_and_position_rows(r: &DipoleResult) -> Vec<(String, String)> {
    let mut rows = Vec::new();
    for a in 0..3 {
        rows.push((
            format!("moment {} (body)", AXES[a]),
            pm(r.moment_body_am2[a], Some(r.moment_sigma_am2[a]), "A·m²"),
        ));
    }
    rows.push((
        "|m|".into(),
        pm(r.magnitude_am2, Some(r.magnitude_sigma_am2), "A·m²"),
    ));
    if let (Some(o), Some(so)) = (r.offset_m, r.offset_sigma_m) {
        for a in 0..3 {
            rows.push((
                format!("position {} (body)", AXES[a]),
                pm(o[a], Some(so[a]), "m"),
            ));
        }
    }
    rows
}

/// The orbit (km, °, nT) and the worst-case and mean torques (N·m) it gives.
fn orbit_torque_rows(r: &DipoleResult) -> Vec<(String, String)> {
    vec![
        (
            "orbit".into(),
            format!(
                "{:.0} km, {:.1}° inclination; |B| max {:.0} nT, mean {:.0} nT",
                r.altitude_km, r.inclination_deg, r.orbit_field_max_nt, r.orbit_field_mean_nt
            ),
        ),
        (
            "torque, worst case".into(),
            pm(
                r.orbit_torque_max_n_m,
                Some(r.orbit_torque_max_sigma_n_m),
                "N·m",
            ),
        ),
        (
            "torque, orbit mean (m ⊥ B)".into(),
            pm(
                r.orbit_torque_mean_n_m,
                Some(r.orbit_torque_mean_sigma_n_m),
                "N·m",
            ),
        ),
    ]
}

/// The verdict table: |m| (A·m²) against the plan's limit, then |m| as a share (%) of
/// each rod's nominal dipole.
fn verdict_table(r: &DipoleResult) -> Table {
    let mut rows = vec![vec![
        Cell::plain("|m|"),
        Cell::plain(pm(r.magnitude_am2, Some(r.magnitude_sigma_am2), "A·m²")),
        Cell::plain(
            r.residual_dipole_max_am2
                .map_or("none in the plan".into(), |l| format!("≤ {l} A·m²")),
        ),
        Cell::toned(r.verdict.word(), verdict_tone(r.verdict)),
    ]];
    for rod in &r.rods {
        rows.push(vec![
            Cell::plain(format!("|m| / rod {} nominal", rod.name)),
            Cell::plain(pm(
                100.0 * rod.residual_fraction,
                Some(100.0 * rod.residual_fraction_sigma),
                "%",
            )),
            Cell::plain(format!("of {} A·m²", short(rod.nominal_dipole_am2))),
            Cell::plain("-"),
        ]);
    }
    Table {
        caption: "Verdict".into(),
        header: vec![
            "quantity".into(),
            "value".into(),
            "limit".into(),
            "verdict".into(),
        ],
        rows,
    }
}

/// Notes: the orbit field model, body directions the mounts leave unresolved, and how
/// the torque is reckoned.
fn dipole_notes(r: &DipoleResult) -> Vec<String> {
    let mut notes = vec![format!("orbit field model: {}", r.orbit_field_model)];
    if !r.hidden_components.is_empty() {
        notes.push(format!(
            "body direction(s) {} are not resolved by the table's turning with these \
             mounts: seen only against the background level",
            r.hidden_components.join(", ")
        ));
    }
    notes.push(
        "Torque τ = m × B; the worst case |m|·|B|max assumes m ⊥ B at the field maximum.".into(),
    );
    notes
}

/// One figure per mount: the three table-frame components of measured − background
/// (dots) and the fitted model (lines) against table angle in degrees (or sample order
/// for a static map).
fn dipole_figures(r: &DipoleResult) -> Result<Vec<Figure>, Error> {
    let turntable = r.method == DipoleMethod::Turntable;
    let mut figs = Vec::new();
    let n_mounts = r
        .points
        .iter()
        .map(|p| p.mount + 1)
        .max()
        .unwrap_or(0)
        .max(r.mount_labels.len());
    for m in 0..n_mounts {
        let mut pts: Vec<_> = r.points.iter().filter(|p| p.mount == m).collect();
        if pts.is_empty() {
            continue;
        }
        if turntable {
            pts.sort_by(|a, b| wrap_deg(a.angle_rad).total_cmp(&wrap_deg(b.angle_rad)));
        }
        let x_of = |k: usize, angle: f64| {
            if turntable {
                wrap_deg(angle)
            } else {
                k as f64
            }
        };
        let label = r
            .mount_labels
            .get(m)
            .cloned()
            .unwrap_or_else(|| format!("#{m}"));
        let mut plot = XyPlot::new(
            &format!("Mount {label}"),
            if turntable {
                "table angle [deg]"
            } else {
                "sample (probe positions in log order)"
            },
            "field minus background [nT]",
        );
        for a in 0..3 {
            let meas = pts
                .iter()
                .enumerate()
                .map(|(k, p)| (x_of(k, p.angle_rad), p.measured_nt[a]))
                .collect();
            plot = plot.with(Series::points(&format!("B{}", AXES[a]), meas, a));
        }
        for a in 0..3 {
            let model = pts
                .iter()
                .enumerate()
                .map(|(k, p)| (x_of(k, p.angle_rad), p.model_nt[a]))
                .collect();
            plot = plot.with(Series::line("", model, a));
        }
        plot.size = (540, 360);
        if turntable {
            plot.x_range = Some((-5.0, 365.0));
        }
        figs.push(figure(
            &format!("dipole-mount-{}.svg", m + 1),
            &format!(
                "Mount {label}: field at the probe minus the interpolated background, table \
                 frame (dots), and the fitted dipole's field (lines), same colour per \
                 component; angles folded into 0–360°. A pure dipole gives sinusoids in the angle; misfit shows as dots \
                 off their line."
            ),
            draw_xy(&plot)?,
        ));
    }
    Ok(figs)
}

/// A table angle in degrees within [0, 360).
fn wrap_deg(angle_rad: f64) -> f64 {
    angle_rad.to_degrees().rem_euclid(360.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::dipole::run_dipole;
    use crate::check::{CheckInput, CheckRequest};
    use crate::log::read_plan;
    use crate::report::model::Tone;
    use crate::sim::dipole::{simulate_turntable, TurntableConfig};

    #[test]
    fn turntable_section_has_one_plot_per_mount_and_the_json() {
        let dir = tempfile::tempdir().unwrap();
        let sim = simulate_turntable(&TurntableConfig::default(), 7).unwrap();
        let files = sim.write_to(dir.path()).unwrap();
        let plan = read_plan(&files.plan).unwrap();
        let input = CheckInput::read(&files.log, Some(&plan), &Default::default()).unwrap();
        let r = run_dipole(&CheckRequest::new(&input, Some(&plan), Default::default())).unwrap();
        let s = dipole_section(&r).unwrap();
        assert_eq!(s.figures.len(), r.mount_labels.len());
        assert!(s.figures[0].file_name == "dipole-mount-1.svg");
        assert_eq!(s.result, serde_json::to_value(&r).unwrap());
        let m = s.figures_of_merit.iter().find(|(k, _)| k == "|m|").unwrap();
        assert!(m.1.contains(" ± ") && m.1.ends_with("A·m²"), "{}", m.1);
        let verdict = &s.tables[0].rows[0][3];
        assert_eq!(verdict.text, r.verdict.word());
        if r.pass == Some(true) {
            assert_eq!(verdict.tone, Tone::Good);
        }
    }
}
