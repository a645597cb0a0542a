//! History trend plots: the residual dipole, the hard iron and the calibration residual
//! of the latest run per build, one line per serial, with the plan's limits as steps.

use serde_json::Value;

use super::BuildRow;
use crate::report::model::Figure;
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::report::sections::figure;
use crate::Error;

/// A finite number stored under `key` of a run's result.
fn num(v: &Value, key: &str) -> Option<f64> {
    v.get(key)?.as_f64().filter(|x| x.is_finite())
}

/// A three-vector of finite numbers stored under `key` of a run's result.
fn vec3(v: &Value, key: &str) -> Option<[f64; 3]> {
    let a = v.get(key)?.as_array()?;
    if a.len() != 3 {
        return None;
    }
    let mut out = [0.0; 3];
    for (o, x) in out.iter_mut().zip(a) {
        *o = x.as_f64().filter(|f| f.is_finite())?;
    }
    Some(out)
}

/// A limit drawn as a step across each build (±0.4 around its ordinal).
fn limit_steps(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    points
        .iter()
        .flat_map(|&(x, l)| [(x - 0.4, l), (x + 0.4, l)])
        .collect()
}

/// The trend figures that have data, in order: dipole, hard iron, calibration residual.
pub(super) fn history_figures(rows: &[BuildRow<'_>]) -> Result<Vec<Figure>, Error> {
    let mut serials: Vec<&str> = rows.iter().map(|r| r.serial).collect();
    serials.dedup();
    let mut figs = Vec::new();
    let n_builds = rows.iter().map(|r| r.ordinal).fold(1.0, f64::max);
    let x_range = Some((0.5, n_builds + 0.5));

    let dip = XyPlot::new("Residual dipole across builds", "build", "|m| [A·m²]");
    let trend = Trend {
        kind: "dipole",
        key: "magnitude_am2",
        limit_key: "residual_dipole_max_am2",
    };
    let (dip, has_dipole) = trend_with_limit(dip, rows, &serials, &trend, x_range);
    if has_dipole {
        figs.push(figure(
            "history-dipole.svg",
            "Residual dipole magnitude of the latest dipole run per build (line per serial) \
             and the plan's limit (dashed).",
            draw_xy(&dip)?,
        ));
    }

    let hi = hard_iron_plot_nt(rows, &serials, x_range);
    if !hi.series.is_empty() {
        figs.push(figure(
            "history-hard-iron.svg",
            "Hard iron per sensor axis from the latest calibration per build. A jump between \
             builds means magnetic material was added near the magnetometer.",
            draw_xy(&hi)?,
        ));
    }

    let res = XyPlot::new("Calibration residual across builds", "build", "RMS [nT]");
    let trend = Trend {
        kind: "calibrate",
        key: "residual_rms_nt",
        limit_key: "residual_limit_nt",
    };
    let (res, has_res) = trend_with_limit(res, rows, &serials, &trend, x_range);
    if has_res {
        figs.push(figure(
            "history-calibration-residual.svg",
            "Calibration residual RMS per build and the plan's limit (dashed).",
            draw_xy(&res)?,
        ));
    }
    Ok(figs)
}

/// Which stored number to follow across builds, and which holds its limit.
struct Trend {
    /// Kind of check whose latest run per build is read.
    kind: &'static str,
    /// Key of the plotted number in that run's result.
    key: &'static str,
    /// Key of the limit in that run's result.
    limit_key: &'static str,
}

/// Add to `plot` one dotted line per serial of `trend` against build ordinal and the
/// limits as dashed steps; also says whether any serial had data.
fn trend_with_limit(
    mut plot: XyPlot,
    rows: &[BuildRow<'_>],
    serials: &[&str],
    trend: &Trend,
    x_range: Option<(f64, f64)>,
) -> (XyPlot, bool) {
    let mut limits = Vec::new();
    for (k, s) in serials.iter().enumerate() {
        let pts: Vec<(f64, f64)> = rows
            .iter()
            .filter(|r| r.serial == *s)
            .filter_map(|r| Some((r.ordinal, num(&r.of(trend.kind)?.result, trend.key)?)))
            .collect();
        for r in rows.iter().filter(|r| r.serial == *s) {
            if let Some(l) = r
                .of(trend.kind)
                .and_then(|run| num(&run.result, trend.limit_key))
            {
                limits.push((r.ordinal, l));
            }
        }
        if !pts.is_empty() {
            plot = plot
                .with(Series::points("", pts.clone(), k % 3))
                .with(Series::line(s, pts, k % 3));
        }
    }
    let has_data = !plot.series.is_empty();
    if !limits.is_empty() {
        plot = plot.with(Series::dashed("limit", limit_steps(&limits), 3));
    }
    plot.x_range = x_range;
    plot.size = (540, 340);
    (plot, has_data)
}

/// Hard iron (nT) per sensor axis against build ordinal, one line per serial and axis.
fn hard_iron_plot_nt(
    rows: &[BuildRow<'_>],
    serials: &[&str],
    x_range: Option<(f64, f64)>,
) -> XyPlot {
    let mut hi = XyPlot::new("Hard iron across builds", "build", "hard iron [nT]");
    for s in serials {
        for a in 0..3 {
            let pts: Vec<(f64, f64)> = rows
                .iter()
                .filter(|r| r.serial == *s)
                .filter_map(|r| {
                    Some((
                        r.ordinal,
                        vec3(&r.of("calibrate")?.result, "hard_iron_nt")?[a],
                    ))
                })
                .collect();
            if !pts.is_empty() {
                hi = hi.with(Series::points("", pts.clone(), a));
                let name = if serials.len() > 1 {
                    format!("{s} {}", ["x", "y", "z"][a])
                } else {
                    ["x", "y", "z"][a].to_string()
                };
                hi = hi.with(Series::line(&name, pts, a));
            }
        }
    }
    hi.x_range = x_range;
    hi.size = (540, 340);
    hi
}
