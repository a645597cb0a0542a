//! The alignment check's report section: figures of merit, the axes against the plan,
//! the misalignment components and the method's notes.

use crate::check::align::{AlignResult, AxisVerdict};
use crate::check::CheckResult;
use crate::report::{Cell, Section, Table, Tone};
use crate::Error;

fn opt(v: Option<f64>, digits: usize) -> String {
    v.map(|x| format!("{x:.digits$}"))
        .unwrap_or_else(|| "unobservable".into())
}

/// The section of one alignment result.
pub fn align_section(r: &AlignResult, title: &str) -> Result<Section, Error> {
    let f = r.field_table_nt;
    let mut figures_of_merit = vec![
        (
            "misalignment".into(),
            format!(
                "{:.2} ± {:.3}° (limit {:.1}°)",
                r.misalignment_total_deg, r.misalignment_total_sigma_deg, r.alignment_max_deg
            ),
        ),
        (
            "handedness".into(),
            format!("{:?}", r.handedness).to_lowercase(),
        ),
        (
            "field, table frame".into(),
            format!(
                "({:.0}, {:.0}, {:.0}) nT, {:.0}° off the table axis",
                f[0], f[1], f[2], r.field_off_axis_deg
            ),
        ),
        (
            "residual RMS".into(),
            format!("{:.1} nT over {} readings", r.residual_rms_nt, r.samples),
        ),
    ];
    if let Some(h) = r.hard_iron_nt {
        figures_of_merit.push((
            "hard iron (fitted)".into(),
            format!("({:.0}, {:.0}, {:.0}) nT", h[0], h[1], h[2]),
        ));
    }
    let axes = Table {
        caption: "body axes against the plan".into(),
        header: vec![
            "body axis".into(),
            "plan".into(),
            "measured".into(),
            "verdict".into(),
        ],
        rows: r
            .axes
            .iter()
            .map(|a| {
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
            })
            .collect(),
    };
    let mis = Table {
        caption: "misalignment rotation vector, body frame".into(),
        header: vec!["component".into(), "value, deg".into(), "1σ, deg".into()],
        rows: (0..3)
            .map(|i| {
                vec![
                    Cell::plain(["x", "y", "z"][i]),
                    Cell::plain(opt(r.misalignment_deg[i], 3)),
                    Cell::plain(opt(r.misalignment_sigma_deg[i], 3)),
                ]
            })
            .collect(),
    };
    Ok(Section {
        kind: "align".into(),
        title: title.into(),
        verdict: r.verdict,
        figures_of_merit,
        tables: vec![axes, mis],
        figures: vec![],
        warnings: r.warnings(),
        notes: vec![
            "Mapping by Wahba's problem solved with the SVD (Markley 1988), without the \
             determinant fix so that a reversed axis shows as a reflection; the field in the \
             table frame (and the hard iron when no calibration is given) fitted with it; σ \
             from the residuals (QUEST-type covariance, Shuster & Oh 1981)."
                .into(),
            "A flipped or swapped axis is named against the plan's mapping, never reported as \
             a large misalignment; the misalignment is then measured from the detected axes."
                .into(),
            "Gyro axes are not checked by this version.".into(),
        ],
        result: r.json()?,
    })
}
