//! Calibration figures: raw and corrected samples in three projections with the fitted
//! ellipsoid's outline and the reference circle, the residual histogram, residual against
//! time and the coverage of the sphere by corrected directions.

use nalgebra::{Matrix2, Matrix3, Vector3};

use super::AXES;
use crate::check::calibrate::{CalibrationData, CalibrationResult, Method};
use crate::report::model::Figure;
use crate::report::plot::{draw_histogram, draw_xy, ellipse_points, Series, XyPlot};
use crate::report::sections::figure;
use crate::Error;

/// The three projections: (file suffix, first axis, second axis).
const PROJECTIONS: [(&str, usize, usize); 3] = [("xy", 0, 1), ("yz", 1, 2), ("zx", 2, 0)];

/// Every calibration figure, in report order: the projections, the residual histogram,
/// the residual against time and the sphere coverage.
pub(super) fn calibration_figures(r: &CalibrationResult) -> Result<Vec<Figure>, Error> {
    let mut figs = projection_figures(r)?;
    let kept_res = kept_residuals_nt(&r.data);
    let what = residual_label(r.method == Method::Tumble);
    figs.push(residual_histogram_figure(&kept_res, what)?);
    figs.push(residual_time_figure(r, what)?);
    figs.push(coverage_figure(r)?);
    Ok(figs)
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

/// Raw and corrected samples (nT) in each projection, two figures per projection; a
/// tumble with a known radius also gets the fitted outline and the reference circle.
fn projection_figures(r: &CalibrationResult) -> Result<Vec<Figure>, Error> {
    let w = Matrix3::from_fn(|i, j| r.soft_iron[i][j]);
    let c = Vector3::from(r.hard_iron_nt);
    let radius = sphere_radius_nt(r).filter(|x| x.is_finite() && *x > 0.0);
    let tumble = r.method == Method::Tumble;
    let mut figs = Vec::new();
    for (name, i, j) in PROJECTIONS {
        let mut raw_plot = raw_projection_plot_nt(&r.data, i, j);
        let mut cor_plot = corrected_projection_plot_nt(&r.data, i, j);
        if let (true, Some(rad)) = (tumble, radius) {
            if let Some(outline) = projected_outline(&w, &c, rad, i, j) {
                raw_plot = raw_plot.with(Series::line("fitted ellipsoid", outline, 3));
            }
            let circle = ellipse_points((0.0, 0.0), (rad, 0.0), (0.0, rad), 180);
            cor_plot = cor_plot.with(Series::line("reference sphere", circle, 3));
        }
        figs.push(figure(
            &format!("calibration-raw-{name}.svg"),
            &if tumble {
                format!(
                    "Raw readings (sensor frame) seen along {}. The points fill the outline \
                     of the fitted ellipsoid; offset of its centre = hard iron.",
                    AXES[3 - i - j]
                )
            } else {
                format!(
                    "Raw readings (sensor frame) seen along {} during the cage sweep: one \
                     cluster per applied field, spread as the coils drove it, shifted by the \
                     hard iron and turned by the mounting.",
                    AXES[3 - i - j]
                )
            },
            draw_xy(&raw_plot)?,
        ));
        figs.push(figure(
            &format!("calibration-{name}.svg"),
            &if tumble {
                format!(
                    "Corrected field W(b − hard iron) ({} frame). The points fill a disc \
                     centred on the origin whose edge is the reference circle.",
                    r.soft_iron_frame
                )
            } else {
                format!(
                    "Corrected field W(b − hard iron) ({} frame) of the cage sweep: each \
                     cluster should sit on the field the coils applied; a cluster off its \
                     place is a coil or logging fault, not a calibration error.",
                    r.soft_iron_frame
                )
            },
            draw_xy(&cor_plot)?,
        ));
    }
    Ok(figs)
}

/// The raw samples (nT) projected onto axes (i, j), equal aspect.
fn raw_projection_plot_nt(d: &CalibrationData, i: usize, j: usize) -> XyPlot {
    let (ai, aj) = (AXES[i], AXES[j]);
    let raw: Vec<(f64, f64)> = d.samples_nt.iter().map(|v| (v[i], v[j])).collect();
    let mut plot = XyPlot::new(
        &format!("Raw samples, {ai}{aj} projection"),
        &format!("b{ai} [nT]"),
        &format!("b{aj} [nT]"),
    )
    .with(Series::points("raw", raw, 0));
    plot.equal_aspect = true;
    plot.size = (460, 420);
    plot
}

/// The corrected samples (nT) projected onto axes (i, j), equal aspect.
fn corrected_projection_plot_nt(d: &CalibrationData, i: usize, j: usize) -> XyPlot {
    let (ai, aj) = (AXES[i], AXES[j]);
    let cor: Vec<(f64, f64)> = d.corrected_nt.iter().map(|v| (v[i], v[j])).collect();
    let mut plot = XyPlot::new(
        &format!("Corrected samples, {ai}{aj} projection"),
        &format!("B{ai} [nT]"),
        &format!("B{aj} [nT]"),
    )
    .with(Series::points("corrected", cor, 2));
    plot.equal_aspect = true;
    plot.size = (460, 420);
    plot
}

/// The residuals (nT) of the kept samples; samples past the end of `kept` count as kept.
fn kept_residuals_nt(d: &CalibrationData) -> Vec<f64> {
    d.residuals_nt
        .iter()
        .zip(d.kept.iter().chain(std::iter::repeat(&true)))
        .filter(|(_, k)| **k)
        .map(|(x, _)| *x)
        .collect()
}

/// What the residual measures: the magnitude error for a tumble, else the vector.
fn residual_label(tumble: bool) -> &'static str {
    if tumble {
        "|W(b − c)| − reference"
    } else {
        "|residual vector|"
    }
}

/// Histogram of the kept residuals (nT), with between 10 and 60 bins.
fn residual_histogram_figure(kept_res: &[f64], what: &str) -> Result<Figure, Error> {
    let bins = ((kept_res.len() as f64).sqrt() as usize).clamp(10, 60);
    Ok(figure(
        "calibration-residual-histogram.svg",
        &format!(
            "Histogram of the residual {what} over the kept samples; a narrow, centred, \
             single-peaked shape means the model fits."
        ),
        draw_histogram(
            "Residual distribution",
            &format!("{what} [nT]"),
            kept_res,
            bins,
        )?,
    ))
}

/// Residual (nT) against time (s) or sample index, kept and rejected apart, with the
/// RMS limit dashed for a cage run.
fn residual_time_figure(r: &CalibrationResult, what: &str) -> Result<Figure, Error> {
    let d = &r.data;
    let (x_label, xs) = residual_abscissa(d);
    let (kept_pts, rej_pts) = split_kept_points(d, &xs);
    let mut time_plot = XyPlot::new("Residual over the run", x_label, &format!("{what} [nT]"))
        .with(Series::points("kept", kept_pts, 0));
    time_plot.size = (520, 340);
    if !rej_pts.is_empty() {
        time_plot = time_plot.with(Series::points("rejected", rej_pts, 3));
    }
    if let Some(l) = r.residual_limit_nt.filter(|_| r.method != Method::Tumble) {
        let (x0, x1) = xs
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        if x0 < x1 {
            time_plot = time_plot.with(Series::dashed("RMS limit", vec![(x0, l), (x1, l)], 1));
        }
    }
    Ok(figure(
        "calibration-residual-time.svg",
        "Residual against time (or sample index). Structure over time — steps, slopes — \
         points to drift, temperature or a disturbance, not to the fit.",
        draw_xy(&time_plot)?,
    ))
}

/// The x axis of the residual plot: time (s) when every sample has one, else the index.
fn residual_abscissa(d: &CalibrationData) -> (&'static str, Vec<f64>) {
    match &d.t_s {
        Some(t) if t.len() == d.residuals_nt.len() => ("time [s]", t.clone()),
        _ => (
            "sample [index in the log]",
            (0..d.residuals_nt.len()).map(|k| k as f64).collect(),
        ),
    }
}

/// (x, residual nT) points split into kept and rejected samples.
type KeptAndRejected = (Vec<(f64, f64)>, Vec<(f64, f64)>);

/// Pair each residual (nT) with its abscissa, split into kept and rejected samples.
fn split_kept_points(d: &CalibrationData, xs: &[f64]) -> KeptAndRejected {
    let mut kept_pts = Vec::new();
    let mut rej_pts = Vec::new();
    for (k, (x, y)) in xs.iter().zip(&d.residuals_nt).enumerate() {
        if d.kept.get(k).copied().unwrap_or(true) {
            kept_pts.push((*x, *y));
        } else {
            rej_pts.push((*x, *y));
        }
    }
    (kept_pts, rej_pts)
}

/// Direction of each corrected sample as longitude and latitude (degrees).
fn coverage_figure(r: &CalibrationResult) -> Result<Figure, Error> {
    let dirs: Vec<(f64, f64)> = r
        .data
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
    Ok(figure(
        "calibration-coverage.svg",
        if r.method == Method::Tumble {
            "Direction of each corrected sample as longitude and latitude (corrected frame). \
             Empty regions were not visited; a tumble should spread over the whole map."
        } else {
            "Direction of each corrected sample as longitude and latitude (corrected frame): \
             for a cage sweep, the directions the coils applied. They need not cover the map; \
             the design-condition gate judges whether they span all three axes."
        },
        draw_xy(&cov)?,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

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
}
