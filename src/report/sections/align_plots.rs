//! The alignment section's plots: the residual per heading and mount, the field in the
//! body against heading with the fitted sinusoid per mount, a picture of the sensor axes
//! against the body axes, and the gyro's scale per body axis.

// Index loops mirror the axes x, y, z.
#![allow(clippy::needless_range_loop)]

use super::figure;
use crate::check::align::{GyroResult, MagAlignment};
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::report::Figure;
use crate::Error;

const AXES: [&str; 3] = ["x", "y", "z"];

/// Residual length per reading against heading, one series per mount.
pub fn residual_figure(m: &MagAlignment, mounts: &[String]) -> Result<Figure, Error> {
    let mut plot = XyPlot::new(
        "Residual per heading",
        "table heading [deg]",
        "|measured − fitted| [nT]",
    );
    plot.x_range = Some((-5.0, 365.0));
    for (k, label) in mounts.iter().enumerate() {
        let pts: Vec<(f64, f64)> = m
            .points
            .iter()
            .filter(|p| p.mount == k)
            .map(|p| {
                let r: f64 = (0..3)
                    .map(|i| (p.measured_body_nt[i] - p.fitted_body_nt[i]).powi(2))
                    .sum();
                (p.heading_deg.rem_euclid(360.0), r.sqrt())
            })
            .collect();
        plot = plot.with(Series::points(&format!("mount {label}"), pts, k % 6));
    }
    let svg = draw_xy(&plot)?;
    Ok(figure(
        "align_residual.svg",
        "Length of the residual vector (reading mapped to the body less the fitted field) \
         against table heading, per mount, nT.",
        svg,
    ))
}

/// Per mount: the three body-frame field components against heading (points: readings
/// through the measured mapping; lines: the fitted field, a sinusoid in heading).
pub fn circle_figures(m: &MagAlignment, mounts: &[String]) -> Result<Vec<Figure>, Error> {
    let mut out = Vec::new();
    for (k, label) in mounts.iter().enumerate() {
        let mut pts: Vec<_> = m.points.iter().filter(|p| p.mount == k).collect();
        pts.sort_by(|a, b| {
            a.heading_deg
                .rem_euclid(360.0)
                .total_cmp(&b.heading_deg.rem_euclid(360.0))
        });
        let mut plot = XyPlot::new(
            &format!("Field in the body, mount {label}"),
            "table heading [deg]",
            "body-frame field [nT]",
        );
        plot.x_range = Some((-5.0, 365.0));
        for i in 0..3 {
            let h = |p: &&crate::check::align::AlignPoint| p.heading_deg.rem_euclid(360.0);
            let measured = pts.iter().map(|p| (h(p), p.measured_body_nt[i])).collect();
            let fitted = pts.iter().map(|p| (h(p), p.fitted_body_nt[i])).collect();
            plot = plot
                .with(Series::points(
                    &format!("B{} measured", AXES[i]),
                    measured,
                    i,
                ))
                .with(Series::line(&format!("B{} fitted", AXES[i]), fitted, i));
        }
        let name = format!("align_field_{}.svg", file_safe(label));
        out.push(figure(
            &name,
            &format!(
                "Mount {label}: the field in the body frame against table heading, nT; \
                 points are readings through the measured mapping (hard iron removed), lines \
                 the fitted steady field turned by the table."
            ),
            draw_xy(&plot)?,
        ));
    }
    Ok(out)
}

fn file_safe(label: &str) -> String {
    label
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
        .collect()
}

/// Isometric projection of a body-frame unit vector onto the page.
fn iso(v: [f64; 3]) -> (f64, f64) {
    let c = 30f64.to_radians();
    ((v[0] - v[1]) * c.cos(), v[2] - (v[0] + v[1]) * c.sin())
}

/// The body axes (dashed) and the measured sensor axes (solid, each sensor axis where the
/// measured mapping puts it in the body), in an isometric view.
pub fn axes_figure(file: &str, sensor: &str, a: &[[f64; 3]; 3]) -> Result<Figure, Error> {
    let mut plot = XyPlot::new(
        &format!("{sensor} axes in the body (isometric view)"),
        "page x [unit vectors, projected]",
        "page y [unit vectors, projected]",
    );
    plot.equal_aspect = true;
    plot.x_range = Some((-1.2, 1.2));
    plot.y_range = Some((-1.2, 1.2));
    for i in 0..3 {
        let e = [0, 1, 2].map(|k| if k == i { 1.0 } else { 0.0 });
        plot = plot.with(Series::dashed(
            &format!("body +{}", AXES[i]),
            vec![(0.0, 0.0), iso(e)],
            i,
        ));
    }
    for j in 0..3 {
        // Sensor axis j in the body: column j of sensor → body, drawn a little shorter.
        let col = [a[0][j], a[1][j], a[2][j]].map(|x| 0.85 * x);
        let near = (0..3)
            .max_by(|p, q| col[*p].abs().total_cmp(&col[*q].abs()))
            .unwrap_or(j);
        let sign = if col[near] < 0.0 { "−" } else { "+" };
        plot = plot.with(Series::line(
            &format!("{sensor} +{} → body {sign}{}", AXES[j], AXES[near]),
            vec![(0.0, 0.0), iso(col)],
            3 + j,
        ));
    }
    Ok(figure(
        file,
        &format!(
            "The body axes (dashed) and the {sensor}'s measured sensor axes (solid) in an \
             isometric view; a sensor axis on a dashed line of another colour is swapped, one \
             pointing away from its body axis is flipped."
        ),
        draw_xy(&plot)?,
    ))
}

/// The gyro's scale per body axis with its 1σ, against the band of the tolerance about
/// +1 (and about −1 when an axis reads reversed).
pub fn gyro_scale_figure(g: &GyroResult) -> Result<Figure, Error> {
    let mut plot = XyPlot::new(
        "Gyro scale per body axis",
        "body axis [x, y, z]",
        "scale factor [measured ÷ true rate]",
    );
    plot.x_range = Some((0.5, 3.5));
    plot.x_names = AXES.iter().map(|a| a.to_string()).collect();
    let tol = g.gyro_scale_tol;
    let mut bands = vec![1.0];
    if g.scale.iter().flatten().any(|s| *s < 0.0) {
        bands.push(-1.0);
    }
    for (k, c) in bands.into_iter().enumerate() {
        for (edge, name) in [(c + tol, "limit"), (c - tol, "")] {
            let label = if k == 0 && !name.is_empty() {
                "±tolerance"
            } else {
                ""
            };
            plot = plot.with(Series::dashed(label, vec![(0.5, edge), (3.5, edge)], 3));
        }
    }
    let (mut pts, mut sig) = (Vec::new(), Vec::new());
    for i in 0..3 {
        if let (Some(v), Some(s)) = (g.scale[i], g.scale_sigma[i]) {
            pts.push((i as f64 + 1.0, v));
            sig.push(s);
        }
    }
    plot = plot.with(Series::points("scale ± 1σ", pts, 0).with_sigma(sig));
    Ok(figure(
        "align_gyro_scale.svg",
        "The gyro's scale factor per body axis through the plan's mapping (±1σ bars) and \
         the tolerance band about +1 (dashed; about −1 too when an axis reads reversed). \
         Axes never spun have no point.",
        draw_xy(&plot)?,
    ))
}
