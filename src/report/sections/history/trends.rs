//! The history section's trend plots: per serial, one quantity of the latest run of its
//! kind at each build, ±1σ, with the plan's limit where the run keeps one.

use super::{num, quantity, BuildRow};
use crate::report::model::Figure;
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::report::sections::figure;
use crate::Error;

/// The build axis of the history plots: builds numbered in ledger order.
pub(super) const BUILD_AXIS: &str = "build [number in ledger order]";

/// The build axis with one serial: the builds by name, in ledger order.
pub(super) const NAMED_BUILD_AXIS: &str = "build [name, in ledger order]";

/// A limit drawn as a step across each build (±0.4 around its ordinal).
fn limit_steps(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    points
        .iter()
        .flat_map(|&(x, l)| [(x - 0.4, l), (x + 0.4, l)])
        .collect()
}

/// One quantity's trend across builds: which run it comes from, its ledger name, and
/// where its limit is kept in the run's result.
pub(super) struct Trend {
    kind: &'static str,
    quantity: &'static str,
    limit_key: Option<&'static str>,
    title: &'static str,
    y_label: &'static str,
    file_name: &'static str,
    caption: &'static str,
}

/// The trends plotted, each on its own scale.
pub(super) const TRENDS: [Trend; 5] = [
    Trend {
        kind: "dipole",
        quantity: "dipole_magnitude_am2",
        limit_key: Some("residual_dipole_max_am2"),
        title: "Residual dipole across builds",
        y_label: "|m| [A·m²]",
        file_name: "history-dipole.svg",
        caption: "Residual dipole magnitude ±1σ of the latest dipole run per build (line per \
                  serial) and the plan's limit (dashed).",
    },
    Trend {
        kind: "calibrate",
        quantity: "hard_iron_x_nt",
        limit_key: None,
        title: "Hard iron x across builds",
        y_label: "hard iron x, sensor frame [nT]",
        file_name: "history-hard-iron-x.svg",
        caption: "Hard iron along sensor x ±1σ from the latest calibration per build, on its \
                  own scale. A jump between builds means magnetic material was added or moved \
                  near the magnetometer.",
    },
    Trend {
        kind: "calibrate",
        quantity: "hard_iron_y_nt",
        limit_key: None,
        title: "Hard iron y across builds",
        y_label: "hard iron y, sensor frame [nT]",
        file_name: "history-hard-iron-y.svg",
        caption: "Hard iron along sensor y ±1σ, as for x.",
    },
    Trend {
        kind: "calibrate",
        quantity: "hard_iron_z_nt",
        limit_key: None,
        title: "Hard iron z across builds",
        y_label: "hard iron z, sensor frame [nT]",
        file_name: "history-hard-iron-z.svg",
        caption: "Hard iron along sensor z ±1σ, as for x.",
    },
    Trend {
        kind: "calibrate",
        quantity: "calibration_residual_rms_nt",
        limit_key: Some("residual_limit_nt"),
        title: "Calibration residual across builds",
        y_label: "residual RMS [nT]",
        file_name: "history-calibration-residual.svg",
        caption: "Calibration residual RMS ±1σ per build and the plan's limit (dashed).",
    },
];

/// The trend figures that have data, in the order of [`TRENDS`].
pub(super) fn history_figures(rows: &[BuildRow<'_>]) -> Result<Vec<Figure>, Error> {
    // Rows come grouped by serial (see `build_rows`): each group is walked once, so the
    // figures cost time linear in the builds.
    let groups: Vec<&[BuildRow<'_>]> = rows.chunk_by(|a, b| a.serial == b.serial).collect();
    let mut figs = Vec::new();
    for t in &TRENDS {
        if let Some(plot) = trend_plot(t, &groups) {
            figs.push(figure(t.file_name, t.caption, draw_xy(&plot)?));
        }
    }
    Ok(figs)
}

/// The plot of one trend: per serial, the value ±1σ at each build, a line through them,
/// and the limit as a dashed step; `None` when no build has the quantity. Builds are named
/// on the axis when only one serial has the quantity (one serial in the ledger, or a
/// vehicle's calibrations beside its rods' bench tests).
pub(super) fn trend_plot(t: &Trend, groups: &[&[BuildRow<'_>]]) -> Option<XyPlot> {
    let mut plot = XyPlot::new(t.title, BUILD_AXIS, t.y_label);
    let mut plotted: Vec<usize> = Vec::new();
    let mut limits = Vec::new();
    for (k, g) in groups.iter().enumerate() {
        let mut pts = Vec::new();
        let mut sigma = Vec::new();
        for r in g.iter() {
            let Some(run) = r.of(t.kind) else { continue };
            if let Some((v, s)) = quantity(run, t.quantity) {
                pts.push((r.ordinal, v));
                sigma.push(s.unwrap_or(0.0));
            }
            if let Some(l) = t.limit_key.and_then(|key| num(&run.result, key)) {
                limits.push((r.ordinal, l));
            }
        }
        if !pts.is_empty() {
            plotted.push(k);
            plot = plot
                .with(Series::points("", pts.clone(), k % 3).with_sigma(sigma))
                .with(Series::line(g[0].serial, pts, k % 3));
        }
    }
    if plot.series.is_empty() {
        return None;
    }
    if !limits.is_empty() {
        plot = plot.with(Series::dashed("limit", limit_steps(&limits), 3));
    }
    let n_builds = groups.iter().map(|g| g.len()).max().unwrap_or(1) as f64;
    plot.x_range = Some((0.5, n_builds + 0.5));
    if let [k] = plotted.as_slice() {
        plot.x_label = NAMED_BUILD_AXIS.to_string();
        plot.x_names = groups[*k].iter().map(|r| r.build.to_string()).collect();
    }
    plot.size = (540, 340);
    Some(plot)
}
