//! The stacked, pulse-aligned view of a polarity log: every pulse of a rod overlaid on
//! its turn-off edge (t = 0 when the command returns to zero), sign-normalised so that
//! positive and negative pulses stack, with the blanking window marked. An hour-long log
//! of hundreds of pulses reads as one bundle of curves instead of a comb.

use super::figure;
use crate::check::polarity::{PolarityResult, PulseResult};
use crate::report::flight::blanking::rod_window;
use crate::report::model::Figure;
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

/// Most pulses drawn per rod (the blanking window uses them all).
const MAX_PULSES_DRAWN: usize = 200;

/// The points of `series` (time-sorted (t, value)) within `[t0, t1]`.
fn window(series: &[(f64, f64)], t0: f64, t1: f64) -> &[(f64, f64)] {
    let a = series.partition_point(|p| p.0 < t0);
    let b = series.partition_point(|p| p.0 <= t1);
    &series[a..b.max(a)]
}

/// How long after the edge to show: enough for the slowest settle seen (or a fifth of
/// the pulse), never into the next pulse of any rod.
fn tail_s(p: &PulseResult, next_on_s: Option<f64>, longest_s: Option<f64>) -> f64 {
    let dur = p.t_off_s - p.t_on_s;
    let want = longest_s.map_or(0.2 * dur, |l| 1.5 * l).max(0.2 * dur);
    match next_on_s {
        Some(n) => want.min(n - p.t_off_s),
        None => want,
    }
}

/// The stacked view of rod `k`; `along_nt` is the field along the rod's expected
/// direction against time (s, nT), as the rod's time plot draws it. `None` when the rod
/// has no pulse with points.
pub fn stacked_pulses(
    r: &PolarityResult,
    k: usize,
    along_nt: &[(f64, f64)],
    file_stem: &str,
) -> Result<Option<Figure>, Error> {
    let Some(rod) = r.rods.get(k) else {
        return Ok(None);
    };
    let mine: Vec<&PulseResult> = r.pulses.iter().filter(|p| p.rod == rod.name).collect();
    let blank = rod_window(&r.pulses, &rod.name);
    let longest = blank.as_ref().and_then(|b| b.longest_s);
    let mut plot = XyPlot::new(
        &format!(
            "Rod {}: {} pulses on their turn-off edge",
            rod.name,
            mine.len()
        ),
        "time from command off [s]",
        "field along expected direction × sign of command [nT]",
    );
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in mine.iter().take(MAX_PULSES_DRAWN) {
        let next_on = r
            .pulses
            .iter()
            .map(|q| q.t_on_s)
            .filter(|t| *t > p.t_off_s)
            .reduce(f64::min);
        let sign = if p.command < 0.0 { -1.0 } else { 1.0 };
        let start = p.t_on_s - 0.2 * (p.t_off_s - p.t_on_s);
        let pts: Vec<(f64, f64)> = window(along_nt, start, p.t_off_s + tail_s(p, next_on, longest))
            .iter()
            .map(|&(t, v)| (t - p.t_off_s, sign * v))
            .collect();
        for &(_, v) in &pts {
            lo = lo.min(v);
            hi = hi.max(v);
        }
        if !pts.is_empty() {
            let name = if plot.series.is_empty() { "pulses" } else { "" };
            plot = plot.with(Series::line(name, pts, 0));
        }
    }
    if plot.series.is_empty() || !lo.is_finite() || hi <= lo {
        return Ok(None);
    }
    plot = plot.with(Series::dashed("command off", vec![(0.0, lo), (0.0, hi)], 4));
    let blank_text = match blank.as_ref().and_then(|b| b.window_s.map(|w| (w, b))) {
        Some((w, b)) => {
            plot = plot.with(Series::dashed("blanking window", vec![(w, lo), (w, hi)], 3));
            format!(
                "the blanking window (dashed, {w:.3} s: the {}th percentile of the per-pulse \
                 settle times; {} of {} pulses settle later)",
                b.percentile, b.beyond_window, b.pulses
            )
        }
        None => "no blanking window (too many pulses did not settle)".to_string(),
    };
    plot.size = (540, 340);
    let drawn = if mine.len() > MAX_PULSES_DRAWN {
        format!(" The first {MAX_PULSES_DRAWN} pulses are drawn.")
    } else {
        String::new()
    };
    Ok(Some(figure(
        &format!("polarity-stack-{file_stem}.svg"),
        &format!(
            "Rod {}: every pulse overlaid on its turn-off edge (t = 0), multiplied by the \
             sign of its command so that both polarities stack; a correctly wired rod's \
             curves sit above zero during the pulse. The grey dashed line is command off, \
             and {blank_text}.{drawn}",
            rod.name
        ),
        draw_xy(&plot)?,
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_window_is_the_points_between_its_ends() {
        let s: Vec<(f64, f64)> = (0..10).map(|i| (i as f64, i as f64)).collect();
        assert_eq!(window(&s, 2.5, 5.0), &s[3..6]);
        assert!(window(&s, 20.0, 30.0).is_empty());
    }
}
