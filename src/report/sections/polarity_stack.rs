//! The stacked, pulse-aligned view of a polarity log: every pulse of a rod overlaid on
//! its turn-off edge (t = 0 when the command returns to zero), sign-normalised so that
//! positive and negative pulses stack, with the blanking window marked. An hour-long log
//! of hundreds of pulses reads as one bundle of curves instead of a comb.

use super::figure;
use crate::check::polarity::{PolarityResult, PolaritySeries, PulseResult};
use crate::report::flight::blanking::rod_window;
use crate::report::model::Figure;
use crate::report::plot::{draw_xy, Series, XyPlot};
use crate::Error;

/// Most pulses drawn per rod (the blanking window uses them all).
const MAX_PULSES_DRAWN: usize = PolaritySeries::STACK_PULSES_MAX;

/// Width of the stacked plot, px.
const PLOT_WIDTH_PX: u32 = 540;

/// A curve of time-sorted points reduced to the first and last point and, in each of
/// `columns` equal slices of its time span, the lowest and the highest point (in time
/// order): every extreme a pixel column would show is kept. Curves of at most two points
/// per column are returned whole.
fn envelope(points: Vec<(f64, f64)>, columns: usize) -> Vec<(f64, f64)> {
    let (Some(first), Some(last)) = (points.first().copied(), points.last().copied()) else {
        return points;
    };
    let span = last.0 - first.0;
    if points.len() <= 2 * columns.max(1) || span.is_nan() || span <= 0.0 {
        return points;
    }
    let column = |t: f64| (((t - first.0) / span * columns as f64) as usize).min(columns - 1);
    let mut out = vec![first];
    let mut k = 0;
    while k < points.len() {
        let c = column(points[k].0);
        let end = k + points[k..].partition_point(|p| column(p.0) == c);
        let slice = &points[k..end];
        let lo = (0..slice.len()).fold(0, |m, i| if slice[i].1 < slice[m].1 { i } else { m });
        let hi = (0..slice.len()).fold(0, |m, i| if slice[i].1 > slice[m].1 { i } else { m });
        for i in [lo.min(hi), lo.max(hi)] {
            out.push(slice[i]);
        }
        if lo == hi {
            out.pop();
        }
        k = end;
    }
    out.push(last);
    out
}

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
        let pts = envelope(pts, PLOT_WIDTH_PX as usize);
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
    plot.size = (PLOT_WIDTH_PX, 340);
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

    #[test]
    fn a_one_sample_spike_survives_the_envelope() {
        // 20 000 samples of a slow ramp with one sample 500 nT high at row 12 345.
        let mut pts: Vec<(f64, f64)> = (0..20_000)
            .map(|i| (i as f64 * 1e-3, (i as f64 * 1e-3).sin()))
            .collect();
        pts[12_345].1 = 500.0;
        let spike = pts[12_345];
        let drawn = envelope(pts.clone(), 540);
        assert!(drawn.len() <= 2 * 540 + 2, "{}", drawn.len());
        assert!(drawn.contains(&spike));
        assert!(drawn.windows(2).all(|w| w[0].0 <= w[1].0), "time order");
        assert_eq!(drawn.first(), pts.first());
        assert_eq!(drawn.last(), pts.last());
        // Short curves are drawn whole.
        let short = pts[..900].to_vec();
        assert_eq!(envelope(short.clone(), 540), short);
    }
}
