//! The m(I) curve of a rod from its level moments (docs/rods.md, "Definitions"): the
//! slope through the levels with |I| ≤ half the largest current (both polarities, both
//! sweep directions, with an intercept), the linearity up to the rated current, the
//! saturation knee on the rising branches, and the remanence from the rod-off levels
//! after +I and after −I.

use super::levels::Level;

/// The line m = a + b·I and its 1σ.
#[derive(Debug, Clone, Copy)]
pub struct Line {
    /// Slope b, A·m²/A.
    pub slope: f64,
    /// 1σ of the slope.
    pub slope_sigma: f64,
    /// Intercept a, A·m².
    pub intercept: f64,
}

impl Line {
    /// The line's moment at `current_a`, A·m².
    pub fn at(&self, current_a: f64) -> f64 {
        self.intercept + self.slope * current_a
    }
}

/// Axial moment and its 1σ of a level, A·m².
pub fn axial(l: &Level) -> (f64, f64) {
    (l.moment_am2.z, l.moment_cov[(2, 2)].max(0.0).sqrt())
}

/// Least-squares line through the driven levels with |I| ≤ half the largest current.
/// The slope's σ is the larger of the propagated measurement σ and the scatter about
/// the line (hysteresis widens it). `None` with fewer than two distinct currents.
pub fn fit_line(levels: &[Level], i_max_a: f64) -> Option<Line> {
    let pts: Vec<(f64, f64, f64)> = levels
        .iter()
        .filter(|l| !l.off && l.current_a.abs() <= 0.5 * i_max_a * (1.0 + 1e-6) + 1e-12)
        .map(|l| {
            let (m, s) = axial(l);
            (l.current_a, m, s)
        })
        .collect();
    let n = pts.len() as f64;
    let xm = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let ym = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - xm).powi(2)).sum();
    if pts.len() < 2 || sxx <= 0.0 {
        return None;
    }
    let slope = pts.iter().map(|p| (p.0 - xm) * (p.1 - ym)).sum::<f64>() / sxx;
    let intercept = ym - slope * xm;
    let propagated = pts
        .iter()
        .map(|p| ((p.0 - xm) * p.2 / sxx).powi(2))
        .sum::<f64>()
        .sqrt();
    let scatter = if pts.len() > 2 {
        let rss: f64 = pts
            .iter()
            .map(|p| (p.1 - intercept - slope * p.0).powi(2))
            .sum();
        (rss / (n - 2.0) / sxx).sqrt()
    } else {
        0.0
    };
    Some(Line {
        slope,
        slope_sigma: propagated.max(scatter),
        intercept,
    })
}

/// Largest |m − line| over the driven levels with |I| ≤ the rated current, % of the
/// line's |value| at the rated current.
pub fn linearity_pct(levels: &[Level], line: &Line, rated_a: f64, tol_a: f64) -> f64 {
    let scale = line.at(rated_a).abs();
    levels
        .iter()
        .filter(|l| !l.off && l.current_a.abs() <= rated_a + tol_a)
        .map(|l| (axial(l).0 - line.at(l.current_a)).abs())
        .fold(0.0, f64::max)
        / scale
        * 100.0
}

/// Measured |m| at the rated current: the mean over the driven levels within the level
/// tolerance of ±rated, with its 1σ. `None` when no level lies there.
pub fn moment_at(levels: &[Level], rated_a: f64, tol_a: f64) -> Option<(f64, f64)> {
    let at: Vec<(f64, f64)> = levels
        .iter()
        .filter(|l| !l.off && (l.current_a.abs() - rated_a).abs() <= 2.0 * tol_a)
        .map(axial)
        .collect();
    if at.is_empty() {
        return None;
    }
    let n = at.len() as f64;
    let mean = at.iter().map(|(m, _)| m.abs()).sum::<f64>() / n;
    let sigma = at.iter().map(|(_, s)| s * s).sum::<f64>().sqrt() / n;
    Some((mean, sigma))
}

/// Saturation knee: on each polarity's rising branch (the first visit of each |I| in
/// time order, from the demagnetised rod at 0), the midpoint current of the first pair
/// of consecutive levels whose incremental gain falls below half the slope; the smaller
/// of the two polarities, A. `None` if the gain never falls that far.
pub fn saturation_current(levels: &[Level], line: &Line, tol_a: f64) -> Option<f64> {
    let mut knee: Option<f64> = None;
    for (positive, sign) in [(true, 1.0), (false, -1.0)] {
        let mut rising: Vec<(f64, f64)> = vec![(0.0, 0.0)];
        for l in levels
            .iter()
            .filter(|l| !l.off && (l.current_a > 0.0) == positive)
        {
            let a = l.current_a.abs();
            if rising.iter().all(|(i, _)| (i - a).abs() > tol_a) && a > rising[rising.len() - 1].0 {
                rising.push((a, sign * axial(l).0));
            }
        }
        for w in rising.windows(2) {
            let gain = (w[1].1 - w[0].1) / (w[1].0 - w[0].0);
            if gain * line.slope.signum() < 0.5 * line.slope.abs() {
                let mid = 0.5 * (w[0].0 + w[1].0);
                knee = Some(knee.map_or(mid, |k: f64| k.min(mid)));
                break;
            }
        }
    }
    knee
}

/// Remanence: half the difference of the mean moments of the rod-off levels after +I
/// and after −I, along the +axis, with its 1σ, A·m². `None` without both.
pub fn remanence(levels: &[Level]) -> Option<(f64, f64)> {
    let mean = |sign: i8| -> Option<(f64, f64)> {
        let v: Vec<(f64, f64)> = levels
            .iter()
            .filter(|l| l.off && l.after_sign == sign)
            .map(axial)
            .collect();
        if v.is_empty() {
            return None;
        }
        let n = v.len() as f64;
        Some((
            v.iter().map(|x| x.0).sum::<f64>() / n,
            v.iter().map(|x| x.1 * x.1).sum::<f64>().sqrt() / n,
        ))
    };
    let (p, sp) = mean(1)?;
    let (m, sm) = mean(-1)?;
    Some(((p - m) / 2.0, 0.5 * (sp * sp + sm * sm).sqrt()))
}
