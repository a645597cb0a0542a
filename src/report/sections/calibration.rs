//! Calibration section: hard and soft iron with ±1σ, residual against the limit, and
//! plots — raw and corrected samples in three projections with the fitted ellipsoid's
//! outline and the reference circle, the residual histogram, residual against time and
//! the coverage of the sphere by corrected directions.

#![allow(clippy::needless_range_loop)] // x, y, z indexed in step with AXES

use nalgebra::{Matrix2, Matrix3, Vector3};

use super::{figure, pm, short, to_json};
use crate::check::calibrate::{CalibrationResult, Method, ReferenceSource};
use crate::report::model::{Cell, Figure, Section, Table};
use crate::report::plot::{draw_histogram, draw_xy, ellipse_points, Series, XyPlot};
use crate::Error;

const AXES: [&str; 3] = ["x", "y", "z"];
/// The three projections: (file suffix, first axis, second axis).
const PROJECTIONS: [(&str, usize, usize); 3] = [("xy", 0, 1), ("yz", 1, 2), ("zx", 2, 0)];

/// Build the calibration section of a report.
pub fn calibration_section(r: &CalibrationResult) -> Result<Section, Error> {
    let mut fom = Vec::new();
    let method = match r.method {
        Method::Cage => "coil-cage sweep (linear least squares)",
        Method::Tumble => "tumble (ellipsoid fit + Levenberg–Marquardt)",
    };
    fom.push(("method".to_string(), method.to_string()));
    fom.push((
        "samples".into(),
        format!("{} used, {} rejected", r.samples_used, r.samples_rejected),
    ));
    if let Some(x) = r.reference_nt {
        let from = match r.reference_source {
            ReferenceSource::Flag => "as given",
            ReferenceSource::Plan => "from the plan's [site]",
            ReferenceSource::Model => "IGRF at the plan's [site]",
            ReferenceSource::Unanchored | ReferenceSource::AppliedField => "",
        };
        fom.push(("reference |B|".into(), format!("{x:.1} nT {from}")));
    } else if r.method == Method::Tumble {
        fom.push(("reference |B|".into(), "none: scale unanchored".into()));
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
    if let Some(s) = r.robust_sigma_nt {
        fom.push(("robust noise σ".into(), format!("{} nT", short(s))));
    }
    fom.push((
        "coverage".into(),
        format!("{:.2} of the sphere (48 equal-area cells)", r.coverage),
    ));
    if let Some(c) = &r.cage {
        fom.push((
            "scale factors".into(),
            format!(
                "x {}  y {}  z {}",
                pm(c.scale_factors[0], Some(c.scale_factor_sigma[0]), ""),
                pm(c.scale_factors[1], Some(c.scale_factor_sigma[1]), ""),
                pm(c.scale_factors[2], Some(c.scale_factor_sigma[2]), "")
            )
            .replace("  ", " ")
            .replace(" x", "  x"),
        ));
        fom.push((
            "misalignment".into(),
            format!(
                "{} (rotation of A = R·S)",
                pm(c.misalignment_deg, Some(c.angle_sigma_deg), "°")
            ),
        ));
        fom.push((
            "non-orthogonality".into(),
            format!(
                "xy {:+.3}°  xz {:+.3}°  yz {:+.3}° (each ± {:.3}°)",
                c.non_orthogonality_deg[0],
                c.non_orthogonality_deg[1],
                c.non_orthogonality_deg[2],
                c.angle_sigma_deg
            ),
        ));
        fom.push((
            "worst residual".into(),
            format!(
                "{} nT at line {}",
                short(c.worst_residual_nt),
                c.worst_residual_line
            ),
        ));
    }
    if let Some(t) = &r.temperature {
        fom.push((
            "bias slope".into(),
            format!(
                "{} / {} / {} nT/°C over {:.1} °C",
                pm(t.slope_nt_per_c[0], Some(t.slope_sigma_nt_per_c[0]), ""),
                pm(t.slope_nt_per_c[1], Some(t.slope_sigma_nt_per_c[1]), ""),
                pm(t.slope_nt_per_c[2], Some(t.slope_sigma_nt_per_c[2]), ""),
                t.span_c
            )
            .replace("  /", " /"),
        ));
    }

    let verdict_table = super::gates_table(&r.gates);
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
    let w_table = Table {
        caption: format!(
            "Soft-iron correction W (sensor → {} frame, dimensionless, ±1σ): b = W (b_meas − hard iron)",
            r.soft_iron_frame
        ),
        header: vec!["row".into(), "x".into(), "y".into(), "z".into()],
        rows: w_rows,
    };

    let mut notes = r.notes.clone();
    notes.push(
        "Projections: each panel shows the samples seen along one sensor axis. The raw \
         ellipse is the outline of the fitted ellipsoid's projection; the corrected circle \
         has the reference radius."
            .into(),
    );
    Ok(Section {
        kind: "calibrate".into(),
        title: "Magnetometer calibration".into(),
        verdict: r.verdict,
        figures_of_merit: fom,
        tables: vec![verdict_table, w_table],
        figures: calibration_figures(r)?,
        warnings: crate::check::outcome::tally(&r.warnings),
        notes,
        result: to_json(r)?,
    })
}

/// Radius of the corrected sphere: the reference, else the mean corrected magnitude.
fn sphere_radius_nt(r: &CalibrationResult) -> Option<f64> {
    if let Some(x) = r.reference_nt {
        return Some(x);
    }
    let d = &r.data;
    let (sum, n) = d
        .corrected_nt
        .iter()
        .zip(d.kept.iter().chain(std::iter::repeat(&true)))
        .filter(|(_, k)| **k)
        .fold((0.0, 0usize), |(s, n), (v, _)| (s + v.norm(), n + 1));
    (n > 0).then(|| sum / n as f64)
}

/// Outline of the projection onto axes (i, j) of the ellipsoid
/// `{c + W⁻¹ u : |u| = radius}`: the image of a disc of that radius under P·W⁻¹, an
/// ellipse with shape matrix `P W⁻¹ W⁻ᵀ Pᵀ · radius²`. Its semi-axes come from the
/// eigen-decomposition of that 2×2 matrix.
pub(crate) fn projected_outline(
    w: &Matrix3<f64>,
    c: &Vector3<f64>,
    radius: f64,
    i: usize,
    j: usize,
) -> Option<Vec<(f64, f64)>> {
    let m = w.try_inverse()?;
    let mmt = m * m.transpose();
    let s = Matrix2::new(mmt[(i, i)], mmt[(i, j)], mmt[(j, i)], mmt[(j, j)]) * radius * radius;
    let eig = nalgebra::SymmetricEigen::new(s);
    let (l0, l1) = (
        eig.eigenvalues[0].max(0.0).sqrt(),
        eig.eigenvalues[1].max(0.0).sqrt(),
    );
    let (v0, v1) = (eig.eigenvectors.column(0), eig.eigenvectors.column(1));
    Some(ellipse_points(
        (c[i], c[j]),
        (l0 * v0[0], l0 * v0[1]),
        (l1 * v1[0], l1 * v1[1]),
        180,
    ))
}

fn calibration_figures(r: &CalibrationResult) -> Result<Vec<Figure>, Error> {
    let d = &r.data;
    let w = Matrix3::from_fn(|i, j| r.soft_iron[i][j]);
    let c = Vector3::from(r.hard_iron_nt);
    let radius = sphere_radius_nt(r).filter(|x| x.is_finite() && *x > 0.0);
    let tumble = r.method == Method::Tumble;
    let mut figs = Vec::new();
    for (name, i, j) in PROJECTIONS {
        let (ai, aj) = (AXES[i], AXES[j]);
        let raw: Vec<(f64, f64)> = d.samples_nt.iter().map(|v| (v[i], v[j])).collect();
        let cor: Vec<(f64, f64)> = d.corrected_nt.iter().map(|v| (v[i], v[j])).collect();
        let mut raw_plot = XyPlot::new(
            &format!("Raw samples, {ai}{aj} projection"),
            &format!("b{ai} [nT]"),
            &format!("b{aj} [nT]"),
        )
        .with(Series::points("raw", raw, 0));
        let mut cor_plot = XyPlot::new(
            &format!("Corrected samples, {ai}{aj} projection"),
            &format!("B{ai} [nT]"),
            &format!("B{aj} [nT]"),
        )
        .with(Series::points("corrected", cor, 2));
        if let (true, Some(rad)) = (tumble, radius) {
            if let Some(outline) = projected_outline(&w, &c, rad, i, j) {
                raw_plot = raw_plot.with(Series::line("fitted ellipsoid", outline, 3));
            }
            let circle = ellipse_points((0.0, 0.0), (rad, 0.0), (0.0, rad), 180);
            cor_plot = cor_plot.with(Series::line("reference sphere", circle, 3));
        }
        raw_plot.equal_aspect = true;
        cor_plot.equal_aspect = true;
        raw_plot.size = (460, 420);
        cor_plot.size = (460, 420);
        figs.push(figure(
            &format!("calibration-raw-{name}.svg"),
            &format!(
                "Raw readings (sensor frame) seen along {}. For a tumble the points fill the \
                 outline of the fitted ellipsoid; offset of its centre = hard iron.",
                AXES[3 - i - j]
            ),
            draw_xy(&raw_plot)?,
        ));
        figs.push(figure(
            &format!("calibration-{name}.svg"),
            &format!(
                "Corrected field W(b − hard iron) ({} frame). For a tumble the points fill \
                 a disc centred on the origin whose edge is the reference circle.",
                r.soft_iron_frame
            ),
            draw_xy(&cor_plot)?,
        ));
    }
    let kept_res: Vec<f64> = d
        .residuals_nt
        .iter()
        .zip(d.kept.iter().chain(std::iter::repeat(&true)))
        .filter(|(_, k)| **k)
        .map(|(x, _)| *x)
        .collect();
    let bins = ((kept_res.len() as f64).sqrt() as usize).clamp(10, 60);
    let what = if tumble {
        "|W(b − c)| − reference"
    } else {
        "|residual vector|"
    };
    figs.push(figure(
        "calibration-residual-histogram.svg",
        &format!(
            "Histogram of the residual {what} over the kept samples; a narrow, centred, \
             single-peaked shape means the model fits."
        ),
        draw_histogram(
            "Residual distribution",
            &format!("{what} [nT]"),
            &kept_res,
            bins,
        )?,
    ));
    let (x_label, xs): (&str, Vec<f64>) = match &d.t_s {
        Some(t) if t.len() == d.residuals_nt.len() => ("time [s]", t.clone()),
        _ => (
            "sample index",
            (0..d.residuals_nt.len()).map(|k| k as f64).collect(),
        ),
    };
    let mut kept_pts = Vec::new();
    let mut rej_pts = Vec::new();
    for (k, (x, y)) in xs.iter().zip(&d.residuals_nt).enumerate() {
        if d.kept.get(k).copied().unwrap_or(true) {
            kept_pts.push((*x, *y));
        } else {
            rej_pts.push((*x, *y));
        }
    }
    let mut time_plot = XyPlot::new("Residual over the run", x_label, &format!("{what} [nT]"))
        .with(Series::points("kept", kept_pts, 0));
    time_plot.size = (520, 340);
    if !rej_pts.is_empty() {
        time_plot = time_plot.with(Series::points("rejected", rej_pts, 3));
    }
    if let Some(l) = r.residual_limit_nt.filter(|_| !tumble) {
        let (x0, x1) = xs
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        if x0 < x1 {
            time_plot = time_plot.with(Series::dashed("RMS limit", vec![(x0, l), (x1, l)], 1));
        }
    }
    figs.push(figure(
        "calibration-residual-time.svg",
        "Residual against time (or sample index). Structure over time — steps, slopes — \
         points to drift, temperature or a disturbance, not to the fit.",
        draw_xy(&time_plot)?,
    ));
    let dirs: Vec<(f64, f64)> = d
        .corrected_nt
        .iter()
        .filter_map(|v| {
            let n = v.norm();
            (n > 0.0 && n.is_finite()).then(|| {
                (
                    v[1].atan2(v[0]).to_degrees(),
                    (v[2] / n).clamp(-1.0, 1.0).asin().to_degrees(),
                )
            })
        })
        .collect();
    let mut cov = XyPlot::new(
        &format!("Sphere coverage {:.2}", r.coverage),
        "longitude of the field direction [deg]",
        "latitude [deg]",
    )
    .with(Series::points("", dirs, 5));
    cov.x_range = Some((-180.0, 180.0));
    cov.y_range = Some((-90.0, 90.0));
    cov.size = (620, 340);
    figs.push(figure(
        "calibration-coverage.svg",
        "Direction of each corrected sample as longitude and latitude (corrected frame). \
         Empty regions were not visited; a tumble should spread over the whole map.",
        draw_xy(&cov)?,
    ));
    Ok(figs)
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
    fn outline_of_a_sphere_is_its_circle() {
        // W = I, c = (1, 2, 3): the projection of a sphere of radius 5 is the circle of
        // radius 5 about (c_i, c_j).
        let pts = projected_outline(
            &Matrix3::identity(),
            &Vector3::new(1.0, 2.0, 3.0),
            5.0,
            1,
            2,
        )
        .unwrap();
        for (x, y) in pts {
            assert!((((x - 2.0).powi(2) + (y - 3.0).powi(2)).sqrt() - 5.0).abs() < 1e-9);
        }
    }

    #[test]
    fn outline_touches_the_projected_ellipsoid_extremes() {
        // For ellipsoid c + M u, |u| = R, the largest x of the projection is
        // c_x + R·|row x of M| (support function of an ellipsoid, textbook).
        let w = Matrix3::new(1.1, 0.05, -0.02, 0.05, 0.95, 0.03, -0.02, 0.03, 1.02);
        let c = Vector3::new(300.0, -120.0, 50.0);
        let m = w.try_inverse().unwrap();
        let pts = projected_outline(&w, &c, 48_000.0, 0, 1).unwrap();
        let xmax = pts.iter().map(|p| p.0).fold(f64::MIN, f64::max);
        let expect = c[0] + 48_000.0 * m.row(0).norm();
        assert!(
            (xmax - expect).abs() < 1e-3 * 48_000.0,
            "{xmax} vs {expect}"
        );
        let ymin = pts.iter().map(|p| p.1).fold(f64::MAX, f64::min);
        let expect = c[1] - 48_000.0 * m.row(1).norm();
        assert!(
            (ymin - expect).abs() < 1e-3 * 48_000.0,
            "{ymin} vs {expect}"
        );
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
}
