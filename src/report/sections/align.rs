//! The alignment check's report section: figures of merit, the axes against the plan,
//! the misalignment components, the gyro's table and the plots (align_plots.rs).

use super::align_plots::{axes_figure, circle_figures, gyro_scale_figure, residual_figure};
use super::pm;
use crate::check::align::{
    AlignResult, AxisResult, AxisVerdict, GyroReference, GyroResult, MagAlignment,
};
use crate::check::CheckResult;
use crate::report::{Cell, Figure, Section, Table, Tone};
use crate::Error;

const AXES: [&str; 3] = ["x", "y", "z"];

/// `value ± σ` with both rounded to σ's second significant digit, or a word.
fn opt_pm(v: Option<f64>, s: Option<f64>, unit: &str, none: &str) -> String {
    match v {
        Some(v) => degree(pm(v, s, unit)),
        None => none.into(),
    }
}

/// `1.87 ± 0.04 °` → `1.87 ± 0.04°`.
fn degree(text: String) -> String {
    text.replace(" °", "°")
}

fn axes_table(caption: &str, axes: &[AxisResult]) -> Table {
    Table {
        caption: caption.into(),
        header: vec![
            "body axis".into(),
            "plan".into(),
            "measured".into(),
            "verdict".into(),
        ],
        rows: axes.iter().map(axis_cells).collect(),
    }
}

fn axis_cells(a: &AxisResult) -> Vec<Cell> {
    let tone = match a.verdict {
        AxisVerdict::Ok => Tone::Good,
        AxisVerdict::Inconclusive => Tone::Warn,
        _ => Tone::Bad,
    };
    vec![
        Cell::plain(a.axis),
        Cell::plain(a.planned.clone()),
        Cell::plain(a.measured.clone().unwrap_or_else(|| "—".into())),
        Cell::toned(a.verdict.word(), tone),
    ]
}

fn misalignment_table(caption: &str, v: &[Option<f64>; 3], s: &[Option<f64>; 3]) -> Table {
    Table {
        caption: caption.into(),
        header: vec!["component".into(), "value ± 1σ, deg".into()],
        rows: (0..3)
            .map(|i| {
                vec![
                    Cell::plain(AXES[i]),
                    Cell::plain(
                        opt_pm(v[i], s[i], "", "unobservable")
                            .trim_end()
                            .to_string(),
                    ),
                ]
            })
            .collect(),
    }
}

fn mag_figures_of_merit(m: &MagAlignment, limit_deg: f64, samples: usize) -> Vec<(String, String)> {
    let f = m.field_table_nt;
    let mis = pm(
        m.misalignment_total_deg,
        Some(m.misalignment_total_sigma_deg),
        "°",
    );
    let mut out = vec![
        (
            "misalignment".into(),
            format!("{} (limit {limit_deg:.1}°)", degree(mis)),
        ),
        (
            "handedness".into(),
            format!("{:?}", m.handedness).to_lowercase(),
        ),
        (
            "field, table frame".into(),
            format!(
                "({:.0}, {:.0}, {:.0}) nT, {:.0}° off the table axis",
                f[0], f[1], f[2], m.field_off_axis_deg
            ),
        ),
        (
            "residual RMS".into(),
            format!("{:.1} nT over {samples} readings", m.residual_rms_nt),
        ),
    ];
    if let Some(h) = m.hard_iron_nt {
        out.push((
            "hard iron (fitted)".into(),
            format!("({:.0}, {:.0}, {:.0}) nT", h[0], h[1], h[2]),
        ));
    }
    out
}

fn gyro_table(g: &GyroResult) -> Table {
    let against = match g.reference {
        GyroReference::Table => "the table's rate",
        GyroReference::Magnetometer => "the magnetometer (hand tumble)",
    };
    Table {
        caption: format!("gyro body axes against the plan's [gyro], judged by {against}"),
        header: vec![
            "body axis".into(),
            "plan".into(),
            "measured".into(),
            "verdict".into(),
            "scale ± 1σ".into(),
            "bias ± 1σ, deg/s".into(),
        ],
        rows: g
            .axes
            .iter()
            .enumerate()
            .map(|(i, a)| {
                let mut row = axis_cells(a);
                let scale = opt_pm(g.scale[i], g.scale_sigma[i], "", "not spun");
                row.push(Cell::plain(scale.trim_end().to_string()));
                let bias = opt_pm(g.bias_deg_s[i], g.bias_sigma_deg_s[i], "", "—");
                row.push(Cell::plain(bias.trim_end().to_string()));
                row
            })
            .collect(),
    }
}

fn gyro_figures_of_merit(g: &GyroResult, limit_deg: f64) -> Vec<(String, String)> {
    let mis = if g.misalignment_deg.iter().all(Option::is_some) {
        let v = pm(
            g.misalignment_total_deg,
            Some(g.misalignment_total_sigma_deg),
            "°",
        );
        format!("{} (limit {limit_deg:.1}°)", degree(v))
    } else {
        "not fully observable (an axis never spun)".into()
    };
    vec![
        ("gyro misalignment".into(), mis),
        (
            "gyro handedness".into(),
            format!("{:?}", g.handedness).to_lowercase(),
        ),
        (
            "gyro scale limit".into(),
            format!("||scale| − 1| ≤ {}", g.gyro_scale_tol),
        ),
        (
            "gyro readings".into(),
            match g.reference {
                GyroReference::Table => {
                    format!("{} turning, {} still", g.samples, g.still_samples)
                }
                GyroReference::Magnetometer => format!("{} tumble rows", g.samples),
            },
        ),
    ]
}

const NOTES: [&str; 3] = [
    "Mapping by Wahba's problem solved with the SVD (Markley 1988), without the determinant \
     fix so that a reversed axis shows as a reflection; the field in the table frame (and the \
     hard iron when no calibration is given) fitted with it; σ from the residuals (QUEST-type \
     covariance, Shuster & Oh 1981).",
    "A flipped or swapped axis is named against the plan's mapping, never reported as a large \
     misalignment; the misalignment is then measured from the detected axes.",
    "Gyro: on the turntable, the table rate about +z mapped to the body by the mount against \
     the gyro through the plan's [gyro] mapping (bias from the still rows); on a hand tumble, \
     Poisson's kinematic equation Ḃ = −ω × B against the magnetometer (Wertz 1978, §12).",
];

/// The method notes: the magnetometer's when it was judged, the gyro's when it was.
fn notes(r: &AlignResult) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    if r.magnetometer.0.is_some() {
        out.extend(NOTES[..2].iter().map(|n| n.to_string()));
    }
    if r.gyro.is_some() {
        out.push(NOTES[2].to_string());
    }
    out
}

/// The section of one alignment result.
pub fn align_section(r: &AlignResult, title: &str) -> Result<Section, Error> {
    let mut figures_of_merit = Vec::new();
    let mut tables = Vec::new();
    let mut figures: Vec<Figure> = Vec::new();
    if let Some(m) = &r.magnetometer.0 {
        figures_of_merit.extend(mag_figures_of_merit(m, r.alignment_max_deg, r.samples));
        tables.push(axes_table(
            "magnetometer body axes against the plan",
            &m.axes,
        ));
        tables.push(misalignment_table(
            "magnetometer misalignment rotation vector, body frame",
            &m.misalignment_deg,
            &m.misalignment_sigma_deg,
        ));
        figures.push(residual_figure(m, &r.mounts)?);
        figures.extend(circle_figures(m, &r.mounts)?);
        figures.push(axes_figure(
            "align_axes.svg",
            "magnetometer",
            &m.sensor_to_body_measured,
        )?);
    }
    if let Some(g) = &r.gyro {
        figures_of_merit.extend(gyro_figures_of_merit(g, r.alignment_max_deg));
        tables.push(gyro_table(g));
        tables.push(misalignment_table(
            "gyro misalignment rotation vector, body frame",
            &g.misalignment_deg,
            &g.misalignment_sigma_deg,
        ));
        if g.scale.iter().any(Option::is_some) {
            figures.push(gyro_scale_figure(g)?);
        }
        figures.push(axes_figure(
            "align_gyro_axes.svg",
            "gyro",
            &g.sensor_to_body_measured,
        )?);
    }
    Ok(Section {
        kind: "align".into(),
        title: title.into(),
        verdict: r.verdict,
        figures_of_merit,
        tables,
        figures,
        warnings: r.warnings(),
        notes: notes(r),
        result: r.json()?,
    })
}
