//! The loop check's report section: power and energy, the rods' verdicts, the power over
//! time and each rod's command against the law's ideal command, with the cautions of a
//! closed-loop test on flight hardware.

use super::{figure, gates_table, pm};
use crate::check::loop_law::{seam::energy_word, Comparison, LoopResult, RodVerdict};
use crate::check::CheckResult;
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::report::{Cell, Figure, Section, Table, Tone};
use crate::Error;

fn rods_table(r: &LoopResult) -> Table {
    let opt = |v: Option<f64>| v.map_or("—".to_string(), |x| format!("{x:+.3}"));
    Table {
        caption: "rods: command regressed on the law's ideal command (both at unit RMS)".into(),
        header: vec![
            "rod".into(),
            "slope".into(),
            "correlation".into(),
            "best other rod".into(),
            "at limit".into(),
            "compared".into(),
            "verdict".into(),
        ],
        rows: r
            .rods
            .iter()
            .map(|f| {
                let tone = match f.verdict {
                    RodVerdict::Consistent | RodVerdict::Unused => Tone::Good,
                    RodVerdict::Inconclusive => Tone::Warn,
                    _ => Tone::Bad,
                };
                vec![
                    Cell::plain(f.name.clone()),
                    Cell::plain(opt(f.slope)),
                    Cell::plain(opt(f.correlation)),
                    Cell::plain(
                        f.best_other
                            .as_ref()
                            .map_or("—".into(), |(n, c)| format!("{n} ({c:+.2})")),
                    ),
                    Cell::plain(format!("{}", f.saturated)),
                    Cell::plain(match f.comparison {
                        Comparison::Regression => format!("{} rows", f.samples),
                        Comparison::SignAgreement => format!("{} rows, signs only", f.samples),
                    }),
                    Cell::toned(f.verdict.word(), tone),
                ]
            })
            .collect(),
    }
}

fn power_figure(r: &LoopResult) -> Result<Figure, Error> {
    let pts: Vec<(f64, f64)> = r.samples.power.iter().map(|(t, p)| (*t, p * 1e6)).collect();
    let (t0, t1) = pts
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), (t, _)| {
            (a.min(*t), b.max(*t))
        });
    let mean = r.power_mean_w * 1e6;
    let plot = XyPlot::new(
        "Rotational power of the commanded torque",
        "time t [s]",
        "power P = ω·(m × B) [µW]",
    )
    .with(Series::line("P per sample", pts, 0))
    .with(Series::dashed(
        "mean",
        vec![(t0.min(t1), mean), (t1.max(t0), mean)],
        3,
    ))
    .with(Series::dashed(
        "zero",
        vec![(t0.min(t1), 0.0), (t1.max(t0), 0.0)],
        4,
    ));
    Ok(figure(
        "loop-power.svg",
        "Power the commanded torque does on the rotation, per sample: a damping law keeps it \
         mostly below zero. The dashed lines are its mean and zero.",
        draw_xy(&plot)?,
    ))
}

fn scatter_figure(r: &LoopResult) -> Result<Figure, Error> {
    let mut plot = XyPlot::new(
        "Each rod's command against the law's ideal command",
        "ideal command [× its RMS]",
        "logged command [× its RMS]",
    );
    for (k, (name, pts)) in r.samples.scatter.iter().enumerate() {
        plot = plot.with(Series::points(&format!("rod {name}"), pts.clone(), k % 6));
    }
    plot = plot.with(Series::dashed(
        "consistent (slope +1)",
        vec![(-3.0, -3.0), (3.0, 3.0)],
        4,
    ));
    Ok(figure(
        "loop-rods.svg",
        "A consistent rod lies along the rising diagonal, a reversed one along the falling \
         one; a cloud with no slope is a rod not driven by its own ideal command, and \
         commands at the limit form flat rows.",
        draw_xy(&plot)?,
    ))
}

/// The section of one loop result.
pub fn loop_section(r: &LoopResult) -> Result<Section, Error> {
    let mut figures_of_merit = vec![
        (
            "mean power".into(),
            pm(r.power_mean_w * 1e6, Some(r.power_sigma_w * 1e6), "µW"),
        ),
        ("energy".into(), energy_word(r).to_string()),
        (
            "law".into(),
            format!("{:?}, intent {}", r.law, r.intent).to_lowercase(),
        ),
        ("body rate from".into(), r.rate_source.words().into()),
        (
            "motion and field".into(),
            format!(
                "{:.1} deg/s RMS, |B| {:.0} nT mean, {} of {} rows used, derivative window \
                 {:.2} s",
                r.rate_rms_deg_s, r.field_mean_nt, r.samples_used, r.rows, r.derivative_window_s
            ),
        ),
    ];
    if let Some(s) = &r.spin {
        figures_of_merit.push((
            "spin term (ω·a − ω_t)(τ·a)".into(),
            format!(
                "{}; rate about the axis {:.2} deg/s (target {:.2})",
                pm(s.mean_w * 1e6, Some(s.sigma_w * 1e6), "µW"),
                s.rate_about_axis_deg_s,
                r.spin_rate_deg_s.unwrap_or(0.0)
            ),
        ));
    }
    let mut figures = Vec::new();
    if !r.samples.power.is_empty() {
        figures.push(power_figure(r)?);
        figures.push(scatter_figure(r)?);
    }
    Ok(Section {
        kind: "loop".into(),
        title: "Control law's sign (closed loop)".into(),
        verdict: r.verdict,
        figures_of_merit,
        tables: vec![rods_table(r), gates_table(&r.gates)],
        figures,
        warnings: r.warnings(),
        notes: notes(),
        result: r.json()?,
    })
}

fn notes() -> Vec<String> {
    vec![
        "Torque τ = m × B from the logged commands and the plan's rods (axis_body, \
         dipole_per_command_am2); power P = ω·τ; the σ of its mean allows for correlated \
         samples (the larger of the lag-1 effective-N and batch-means estimates). Energy is \
         \"none\" when |mean| < 3σ. Ḃ by a centred straight-line least-squares window \
         (Savitzky–Golay first derivative)."
            .into(),
        "Each element of the sign chain needs its own proof: a flipped magnetometer axis and a \
         flipped rod on the same axis cancel in a B-dot law, so a law that detumbles on the \
         table proves neither; align, polarity and this check each judge one element."
            .into(),
        "Caution: during this test the flight software drives the rods; keep the rods within \
         their rated current and duty, keep people with pacemakers or other implants away \
         from the energised rods and any strong fields nearby, keep the article's motion \
         within the table's or bearing's limits, handle the flight hardware as the facility \
         requires, and follow the facility's procedures and the project's verification \
         authority. magproof informs that decision; it does not replace it."
            .into(),
    ]
}
