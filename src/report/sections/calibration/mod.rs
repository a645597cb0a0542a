//! Calibration section: hard and soft iron with ±1σ, residual against the limit, and
//! plots — raw and corrected samples in three projections with the fitted ellipsoid's
//! outline and the reference circle, the residual histogram, residual against time and
//! the coverage of the sphere by corrected directions. The figures live in `figures`.

#![allow(clippy::needless_range_loop)] // x, y, z indexed in step with AXES

mod figures;

use super::{pm, short, to_json};
use crate::check::calibrate::{
    CageDetails, CalibrationResult, Method, ReferenceSource, TemperatureFit,
};
use crate::report::model::{Cell, Section, Table};
use crate::Error;
use figures::calibration_figures;

const AXES: [&str; 3] = ["x", "y", "z"];

/// Build the calibration section of a report.
pub fn calibration_section(r: &CalibrationResult) -> Result<Section, Error> {
    Ok(Section {
        kind: "calibrate".into(),
        title: "Magnetometer calibration".into(),
        verdict: r.verdict,
        figures_of_merit: calibration_figures_of_merit(r),
        tables: vec![super::gates_table(&r.gates), soft_iron_table(r)],
        figures: calibration_figures(r)?,
        warnings: crate::check::outcome::tally(&r.warnings),
        notes: calibration_notes(r),
        result: to_json(r)?,
    })
}

/// Every figure of merit of the run, in display order: method, samples, reference,
/// hard iron and residual (nT), coverage, then the cage and temperature details.
fn calibration_figures_of_merit(r: &CalibrationResult) -> Vec<(String, String)> {
    let mut fom = Vec::new();
    fom.push(("method".to_string(), method_text(r.method).to_string()));
    fom.push((
        "samples".into(),
        format!("{} used, {} rejected", r.samples_used, r.samples_rejected),
    ));
    if let Some(row) = reference_row_nt(r) {
        fom.push(row);
    }
    for a in 0..3 {
        fom.push((
            format!("hard iron {} (sensor)", AXES[a]),
            pm(r.hard_iron_nt[a], Some(r.hard_iron_sigma_nt[a]), "nT"),
        ));
    }
    let rms_sd = r.residual_rms_sigma_nt;
    fom.push((
        "residual RMS".into(),
        pm(r.residual_rms_nt, Some(rms_sd), "nT"),
    ));
    if let Some((deg, sd)) = direction_error_deg(r) {
        fom.push((
            "as a direction error".into(),
            format!(
                "{} (a residual across the field tilts the measured direction)",
                pm(deg, Some(sd), "°").replace(" °", "°")
            ),
        ));
    }
    if let Some(s) = r.robust_sigma_nt {
        fom.push(("robust noise σ".into(), format!("{} nT", short(s))));
    }
    fom.push((
        "coverage".into(),
        format!("{:.2} of the sphere (48 equal-area cells)", r.coverage),
    ));
    if let Some(c) = &r.cage {
        fom.extend(cage_rows(c));
    }
    if let Some(t) = &r.temperature {
        fom.push(bias_slope_row_nt_per_c(t));
    }
    fom
}

/// How the calibration was fitted, in words.
fn method_text(method: Method) -> &'static str {
    match method {
        Method::Cage => "coil-cage sweep (linear least squares)",
        Method::Tumble => "tumble (ellipsoid fit + Levenberg–Marquardt)",
    }
}

/// The reference |B| row (nT) and where it came from; `None` when a cage run has none.
fn reference_row_nt(r: &CalibrationResult) -> Option<(String, String)> {
    if let Some(x) = r.reference_nt {
        let from = match r.reference_source {
            ReferenceSource::Flag => "as given",
            ReferenceSource::Plan => "from the plan's [site]",
            ReferenceSource::Model => "IGRF at the plan's [site]",
            ReferenceSource::Unanchored | ReferenceSource::AppliedField => "",
        };
        Some(("reference |B|".into(), format!("{x:.1} nT {from}")))
    } else if r.method == Method::Tumble {
        Some(("reference |B|".into(), "none: scale unanchored".into()))
    } else {
        None
    }
}

/// The coil-cage rows: scale factors, misalignment and non-orthogonality (°), and the
/// worst residual (nT) with its line.
fn cage_rows(c: &CageDetails) -> Vec<(String, String)> {
    vec![
        (
            "scale factors".into(),
            format!(
                "x {}  y {}  z {}",
                pm(c.scale_factors[0], Some(c.scale_factor_sigma[0]), ""),
                pm(c.scale_factors[1], Some(c.scale_factor_sigma[1]), ""),
                pm(c.scale_factors[2], Some(c.scale_factor_sigma[2]), "")
            )
            .replace("  ", " ")
            .replace(" x", "  x"),
        ),
        (
            "misalignment".into(),
            format!(
                "{} (rotation of A = R·S)",
                pm(c.misalignment_deg, Some(c.angle_sigma_deg), "°")
            ),
        ),
        (
            "non-orthogonality".into(),
            format!(
                "xy {:+.3}°  xz {:+.3}°  yz {:+.3}° (each ± {:.3}°)",
                c.non_orthogonality_deg[0],
                c.non_orthogonality_deg[1],
                c.non_orthogonality_deg[2],
                c.angle_sigma_deg
            ),
        ),
        (
            "worst residual".into(),
            format!(
                "{} nT at line {}",
                short(c.worst_residual_nt),
                c.worst_residual_line
            ),
        ),
    ]
}

/// The bias-temperature slope row (nT/°C per axis, ±1σ) and the span it was fitted over.
fn bias_slope_row_nt_per_c(t: &TemperatureFit) -> (String, String) {
    (
        "bias slope".into(),
        format!(
            "{} / {} / {} nT/°C over {:.1} °C",
            pm(t.slope_nt_per_c[0], Some(t.slope_sigma_nt_per_c[0]), ""),
            pm(t.slope_nt_per_c[1], Some(t.slope_sigma_nt_per_c[1]), ""),
            pm(t.slope_nt_per_c[2], Some(t.slope_sigma_nt_per_c[2]), ""),
            t.span_c
        )
        .replace("  /", " /"),
    )
}

/// The soft-iron matrix W (dimensionless) with ±1σ per element, one row per axis.
fn soft_iron_table(r: &CalibrationResult) -> Table {
    let mut w_rows = Vec::new();
    for i in 0..3 {
        let mut row = vec![Cell::plain(AXES[i])];
        for j in 0..3 {
            row.push(Cell::plain(format!(
                "{:+.5} ± {:.5}",
                r.soft_iron[i][j], r.soft_iron_sigma[i][j]
            )));
        }
        w_rows.push(row);
    }
    Table {
        caption: format!(
            "Soft-iron correction W (sensor → {} frame, dimensionless, ±1σ): b = W (b_meas − hard iron)",
            r.soft_iron_frame
        ),
        header: vec!["row".into(), "x".into(), "y".into(), "z".into()],
        rows: w_rows,
    }
}

/// The run's own notes followed by the note on how to read the projections.
fn calibration_notes(r: &CalibrationResult) -> Vec<String> {
    let mut notes = r.notes.clone();
    notes.push(
        "Projections: each panel shows the samples seen along one sensor axis. The raw \
         ellipse is the outline of the fitted ellipsoid's projection; the corrected circle \
         has the reference radius."
            .into(),
    );
    notes
}

/// The residual RMS as the error in the field's direction it can cause, deg, with its
/// 1σ: a residual of r nT across a field of |B| nT turns the measured direction by
/// atan(r / |B|) (a magnetometer-based attitude or heading estimate inherits it). |B| is
/// the reference magnitude of a tumble or the mean applied field of a cage sweep.
fn direction_error_deg(r: &CalibrationResult) -> Option<(f64, f64)> {
    let b = r
        .reference_nt
        .or_else(|| r.cage.as_ref().map(|c| c.applied_mean_nt))
        .filter(|b| *b > 0.0)?;
    let deg = (r.residual_rms_nt / b).atan().to_degrees();
    let sd = (r.residual_rms_sigma_nt / b).to_degrees();
    Some((deg, sd))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::check::calibrate::{run_calibrate, CalibrateOptions};
    use crate::check::{CheckInput, CheckRequest};
    use crate::fit::tumble::Robust;
    use crate::report::Verdict;
    use crate::sim::{simulate_tumble, write_tumble_csv, TumbleConfig};

    fn tumble_result() -> CalibrationResult {
        let sim = simulate_tumble(&TumbleConfig::default(), 11).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("tumble.csv");
        let mut f = std::fs::File::create(&path).unwrap();
        write_tumble_csv(&sim, &mut f).unwrap();
        let input = CheckInput::read(&path, None, &Default::default()).unwrap();
        let options = CalibrateOptions {
            reference_nt: Some(sim.truth.reference_nt),
            robust: Robust::Tukey,
            keep_samples: true,
        };
        run_calibrate(&CheckRequest::new(&input, None, options)).unwrap()
    }

    #[test]
    fn section_has_every_plot_units_and_the_json() {
        let r = tumble_result();
        let s = calibration_section(&r).unwrap();
        let names: Vec<&str> = s.figures.iter().map(|f| f.file_name.as_str()).collect();
        for n in [
            "calibration-raw-xy.svg",
            "calibration-xy.svg",
            "calibration-raw-yz.svg",
            "calibration-yz.svg",
            "calibration-raw-zx.svg",
            "calibration-zx.svg",
            "calibration-residual-histogram.svg",
            "calibration-residual-time.svg",
            "calibration-coverage.svg",
        ] {
            assert!(names.contains(&n), "missing {n} in {names:?}");
        }
        assert!(s.figures.iter().all(|f| f.svg.starts_with("<svg")));
        assert!(s.figures.iter().all(|f| f.svg.len() < 600_000));
        let hard: Vec<&String> = s
            .figures_of_merit
            .iter()
            .filter(|(k, _)| k.starts_with("hard iron"))
            .map(|(_, v)| v)
            .collect();
        assert_eq!(hard.len(), 3);
        assert!(hard.iter().all(|v| v.contains(" ± ") && v.ends_with("nT")));
        assert_eq!(s.result, serde_json::to_value(&r).unwrap());
        assert!(s
            .notes
            .iter()
            .any(|n| n.contains("cannot see misalignment")));
        // A plan-less run is judged by its gates alone; every gate is listed in words.
        assert_eq!(s.verdict, Verdict::Pass);
        assert_eq!(s.tables[0].rows.len(), r.gates.len());
        assert!(s.tables[0].rows.iter().all(|row| row[3].text == "met"));
    }

    #[test]
    fn the_residual_reads_as_a_direction_error() {
        // Hand computation: atan(150 / 48 000) = 0.003 125 rad (to 3·10⁻⁸) = 0.179 05°.
        let mut r = tumble_result();
        r.reference_nt = Some(48_000.0);
        r.residual_rms_nt = 150.0;
        let (deg, _) = direction_error_deg(&r).unwrap();
        assert!((deg - 0.179_05).abs() < 1e-4, "{deg}");
    }
}
