//! Time-domain parts of the polarity check: pulses found in the command columns, the
//! noise level, the command-to-response lag (cross-correlation), lag-shifted commands,
//! the drift basis, and the settle time and remanent step after each pulse.

use nalgebra::Vector3;

/// A command counts as "on" above this fraction of its column's largest magnitude.
pub const ON_FRACTION: f64 = 0.01;

/// One pulse of one command column: rows `start..end` are on.
#[derive(Debug, Clone, Copy)]
pub struct Pulse {
    /// Index of the command column.
    pub column: usize,
    /// First row with the command on.
    pub start: usize,
    /// First row after the pulse with the command off (may equal the row count).
    pub end: usize,
    /// Mean command during the pulse, command units.
    pub command: f64,
}

/// Find pulses in every command column (runs of rows whose command is on).
pub fn find_pulses(columns: &[&[f64]]) -> Vec<Pulse> {
    let mut pulses = Vec::new();
    for (ci, col) in columns.iter().enumerate() {
        let max = col.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        if max <= 0.0 {
            continue;
        }
        let thr = ON_FRACTION * max;
        let mut start: Option<usize> = None;
        let mut sum = 0.0;
        for (i, v) in col.iter().enumerate() {
            let on = v.abs() > thr;
            // A sign change without an off row also ends a pulse.
            let flip = start.is_some_and(|s| on && (v.signum() != col[s].signum()));
            if let Some(s) = start {
                if !on || flip {
                    pulses.push(Pulse {
                        column: ci,
                        start: s,
                        end: i,
                        command: sum / (i - s) as f64,
                    });
                    start = None;
                    sum = 0.0;
                }
            }
            if on && start.is_none() {
                start = Some(i);
            }
            if on {
                sum += v;
            }
        }
        if let Some(s) = start {
            pulses.push(Pulse {
                column: ci,
                start: s,
                end: col.len(),
                command: sum / (col.len() - s) as f64,
            });
        }
    }
    pulses.sort_by_key(|p| (p.start, p.column));
    pulses
}

/// Median of a slice (reorders it). `None` when empty.
pub fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, |a, b| a.total_cmp(b));
    Some(*m)
}

/// Median sample interval, s.
pub fn median_interval_s(t_s: &[f64]) -> Option<f64> {
    let mut d: Vec<f64> = t_s.windows(2).map(|w| w[1] - w[0]).collect();
    median(&mut d)
}

/// Per-axis white-noise σ (nT) from first differences of rows where every command is
/// off: 1.4826 · MAD(Δb) / √2 (robust to steps and slow drift).
pub fn noise_sigma_nt(b_nt: &[Vec<f64>; 3], any_on: &[bool]) -> [f64; 3] {
    let mut out = [0.0; 3];
    for (axis, col) in b_nt.iter().enumerate() {
        let mut d: Vec<f64> = (1..col.len())
            .filter(|&i| !any_on[i] && !any_on[i - 1])
            .map(|i| col[i] - col[i - 1])
            .collect();
        if let Some(m) = median(&mut d) {
            let mut dev: Vec<f64> = d.iter().map(|x| (x - m).abs()).collect();
            out[axis] = median(&mut dev).unwrap_or(0.0) * 1.4826 / std::f64::consts::SQRT_2;
        }
    }
    out
}

/// Lag estimate, s (positive: the field follows the command), by cross-correlating each
/// command's first difference with the first difference of the field projected on that
/// rod's coupling (a matched filter). The integer peak is refined by a parabola through
/// the peak and its neighbours. `None` when no edge lies far enough inside the log.
pub fn estimate_lag_s(
    columns: &[&[f64]],
    couplings: &[Vector3<f64>],
    b_nt: &[Vec<f64>; 3],
    dt_s: f64,
    max_lag_samples: usize,
) -> Option<f64> {
    let n = b_nt[0].len();
    let k_max = max_lag_samples as isize;
    let width = 2 * max_lag_samples + 1;
    let mut corr = vec![0.0; width];
    let mut used = false;
    for (col, c) in columns.iter().zip(couplings) {
        for i in 1..col.len() {
            let step = col[i] - col[i - 1];
            if step.abs() <= 0.0 {
                continue;
            }
            let lo = i as isize - k_max;
            let hi = i as isize + k_max;
            if lo < 1 || hi >= n as isize {
                continue;
            }
            used = true;
            for (slot, k) in (-k_max..=k_max).enumerate() {
                let j = (i as isize + k) as usize;
                let db = Vector3::new(
                    b_nt[0][j] - b_nt[0][j - 1],
                    b_nt[1][j] - b_nt[1][j - 1],
                    b_nt[2][j] - b_nt[2][j - 1],
                );
                corr[slot] += step * c.dot(&db);
            }
        }
    }
    if !used {
        return None;
    }
    let (best, _) = corr.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
    let mut frac = 0.0;
    if best > 0 && best + 1 < width {
        let (y0, y1, y2) = (corr[best - 1], corr[best], corr[best + 1]);
        let den = y0 - 2.0 * y1 + y2;
        if den < 0.0 {
            frac = (0.5 * (y0 - y2) / den).clamp(-0.5, 0.5);
        }
    }
    Some((best as f64 - k_max as f64 + frac) * dt_s)
}

/// For each row i, the row whose command applies at `t_i − lag_s` (zero-order hold:
/// the last row at or before that time), or `None` before the log starts.
pub fn shifted_rows(t_s: &[f64], lag_s: f64) -> Vec<Option<usize>> {
    let mut out = Vec::with_capacity(t_s.len());
    let mut j = 0usize;
    for &t in t_s {
        let target = t - lag_s;
        if target < t_s[0] {
            out.push(None);
            continue;
        }
        while j + 1 < t_s.len() && t_s[j + 1] <= target {
            j += 1;
        }
        while j > 0 && t_s[j] > target {
            j -= 1;
        }
        out.push(Some(j));
    }
    out
}

/// Largest number of knot intervals the automatic drift model uses.
pub const MAX_AUTO_KNOTS: usize = 400;

/// Drift terms of the regression: a linear spline (piecewise-linear baseline with
/// evenly spaced knots), or Legendre polynomials of the time scaled to [−1, 1].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum DriftModel {
    /// Knot spacing chosen from the data: four times the longest pulse, but no more
    /// than 400 knot intervals.
    Auto,
    /// Piecewise-linear baseline with knots this far apart, s.
    Knots {
        /// Knot spacing, s.
        spacing_s: f64,
    },
    /// Polynomial in time of this degree (0 = constant offset).
    Polynomial {
        /// Degree, 0..=5.
        degree: usize,
    },
}

/// The drift basis resolved against a log's time span.
#[derive(Debug, Clone)]
pub enum DriftBasis {
    /// Hat functions on knots `t0 + j·spacing`, j = 0..=segments.
    Knots {
        /// First knot, s.
        t0_s: f64,
        /// Knot spacing, s.
        spacing_s: f64,
        /// Number of segments.
        segments: usize,
    },
    /// Legendre polynomials P0..P_degree of `(2(t − t0)/span − 1)`.
    Polynomial {
        /// First time, s.
        t0_s: f64,
        /// Span, s.
        span_s: f64,
        /// Degree.
        degree: usize,
    },
}

impl DriftBasis {
    /// Number of drift parameters.
    pub fn len(&self) -> usize {
        match self {
            DriftBasis::Knots { segments, .. } => segments + 1,
            DriftBasis::Polynomial { degree, .. } => degree + 1,
        }
    }

    /// Largest distance between two basis functions that are non-zero at the same time
    /// (the half-bandwidth of the drift block of the normal matrix): 1 for knots (two
    /// adjacent hat functions), `degree` for polynomials (all of them).
    pub fn bandwidth(&self) -> usize {
        match self {
            DriftBasis::Knots { .. } => 1,
            DriftBasis::Polynomial { degree, .. } => *degree,
        }
    }

    /// Parameter names for messages.
    pub fn names(&self) -> Vec<String> {
        match self {
            DriftBasis::Knots {
                t0_s, spacing_s, ..
            } => (0..self.len())
                .map(|j| format!("baseline@{:.1}s", t0_s + j as f64 * spacing_s))
                .collect(),
            DriftBasis::Polynomial { .. } => {
                (0..self.len()).map(|d| format!("drift_t^{d}")).collect()
            }
        }
    }

    /// Write the basis values at time `t_s` into `out` (length [`Self::len`]) and return
    /// the range written; entries outside it are zero in the basis and left untouched in
    /// `out` (read only the returned range).
    #[inline]
    pub fn fill(&self, t_s: f64, out: &mut [f64]) -> std::ops::Range<usize> {
        match *self {
            DriftBasis::Knots {
                t0_s,
                spacing_s,
                segments,
            } => {
                let x = ((t_s - t0_s) / spacing_s).max(0.0);
                let j = (x.floor() as usize).min(segments - 1);
                let u = (x - j as f64).min(1.0);
                out[j] = 1.0 - u;
                out[j + 1] = u;
                j..j + 2
            }
            DriftBasis::Polynomial {
                t0_s,
                span_s,
                degree,
            } => {
                let x = 2.0 * (t_s - t0_s) / span_s - 1.0;
                out[0] = 1.0;
                if degree >= 1 {
                    out[1] = x;
                }
                // Bonnet's recursion: (n+1) P_{n+1} = (2n+1) x P_n − n P_{n−1}.
                for d in 1..degree {
                    let nf = d as f64;
                    out[d + 1] = ((2.0 * nf + 1.0) * x * out[d] - nf * out[d - 1]) / (nf + 1.0);
                }
                0..degree + 1
            }
        }
    }

    /// A short description for the result.
    pub fn describe(&self) -> String {
        match self {
            DriftBasis::Knots {
                spacing_s,
                segments,
                ..
            } => format!(
                "piecewise-linear baseline, {} knots {:.3} s apart",
                segments + 1,
                spacing_s
            ),
            DriftBasis::Polynomial { degree, .. } => format!("polynomial in time, degree {degree}"),
        }
    }
}

/// Resolve a drift model against the log's time span and its longest pulse.
pub fn drift_basis(model: DriftModel, t0_s: f64, span_s: f64, longest_pulse_s: f64) -> DriftBasis {
    let span = span_s.max(f64::MIN_POSITIVE);
    match model {
        DriftModel::Polynomial { degree } => DriftBasis::Polynomial {
            t0_s,
            span_s: span,
            degree,
        },
        DriftModel::Auto | DriftModel::Knots { .. } => {
            let spacing = match model {
                DriftModel::Knots { spacing_s } => spacing_s,
                _ => (4.0 * longest_pulse_s).max(span / MAX_AUTO_KNOTS as f64),
            };
            // At most 1e9 segments: far beyond the limit the check refuses by name, and
            // no overflow for a spacing near zero.
            let segments = ((span / spacing).ceil().min(1e9) as usize).max(1);
            DriftBasis::Knots {
                t0_s,
                spacing_s: span / segments as f64,
                segments,
            }
        }
    }
}

/// Settle time and remanent step after one pulse.
#[derive(Debug, Clone, Copy)]
pub struct AfterPulse {
    /// From the command turning off until the field stays within 3σ of its settled
    /// level, s; `None` when it did not settle within the off window.
    pub settle_time_s: Option<f64>,
    /// Settled level after the pulse minus the level before it, sensor frame, nT.
    pub step_nt: Vector3<f64>,
    /// 1σ of `step_nt` per axis, nT.
    pub step_sigma_nt: Vector3<f64>,
}

/// Measure settle time and remanent step of one pulse from `d` (field minus the fitted
/// drift, per axis), given the off windows before (`pre`) and after (`post`) the pulse
/// as row ranges, the time the command turned off and the noise σ per axis.
pub fn after_pulse(
    d: &[Vec<f64>; 3],
    t_s: &[f64],
    pre: std::ops::Range<usize>,
    post: std::ops::Range<usize>,
    t_off_s: f64,
    sigma_nt: [f64; 3],
) -> Option<AfterPulse> {
    if pre.len() < 4 || post.len() < 8 {
        return None;
    }
    let half = |r: &std::ops::Range<usize>| (r.start + r.len() / 2)..r.end;
    let level = |r: std::ops::Range<usize>| {
        let n = r.len() as f64;
        Vector3::from_fn(|a, _| d[a][r.clone()].iter().sum::<f64>() / n)
    };
    let (pre_tail, post_tail) = (half(&pre), half(&post));
    let (n_pre, n_post) = (pre_tail.len() as f64, post_tail.len() as f64);
    let before = level(pre_tail);
    let after = level(post_tail.clone());
    let step_sigma_nt = Vector3::from_fn(|a, _| sigma_nt[a] * (1.0 / n_pre + 1.0 / n_post).sqrt());
    // Normalised deviation from the settled level, largest axis; median of 5 so that a
    // lone noise spike does not count as "not settled".
    let z: Vec<f64> = post
        .clone()
        .map(|i| {
            (0..3)
                .map(|a| (d[a][i] - after[a]).abs() / sigma_nt[a].max(1e-12))
                .fold(0.0, f64::max)
        })
        .collect();
    let mut last_out: Option<usize> = None;
    let mut win = [0.0; 5];
    for k in 0..z.len() {
        let lo = k.saturating_sub(2);
        let hi = (k + 3).min(z.len());
        let w = &mut win[..hi - lo];
        w.copy_from_slice(&z[lo..hi]);
        if median(w).unwrap_or(0.0) > 3.0 {
            last_out = Some(k);
        }
    }
    let settle_time_s = match last_out {
        None => Some((t_s[post.start] - t_off_s).max(0.0)),
        Some(k) if post.start + k + 1 < post_tail.start => {
            Some((t_s[post.start + k + 1] - t_off_s).max(0.0))
        }
        Some(_) => None,
    };
    Some(AfterPulse {
        settle_time_s,
        step_nt: after - before,
        step_sigma_nt,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn pulses_split_on_sign_change_and_off_rows() {
        let c = [0.0, 1.0, 1.0, -1.0, -1.0, 0.0, 0.0, 0.5, 0.5];
        let p = find_pulses(&[&c]);
        assert_eq!(p.len(), 3);
        assert_eq!((p[0].start, p[0].end), (1, 3));
        assert_eq!((p[1].start, p[1].end), (3, 5));
        assert_eq!((p[2].start, p[2].end), (7, 9));
        assert_relative_eq!(p[1].command, -1.0);
    }

    #[test]
    fn legendre_basis_matches_closed_forms() {
        let b = DriftBasis::Polynomial {
            t0_s: 0.0,
            span_s: 2.0,
            degree: 3,
        };
        let mut out = [0.0; 4];
        let r = b.fill(1.5, &mut out); // x = 0.5
        assert_eq!(r, 0..4);
        assert_relative_eq!(out[2], 0.5 * (3.0 * 0.25 - 1.0), epsilon = 1e-15);
        assert_relative_eq!(out[3], 0.5 * (5.0 * 0.125 - 3.0 * 0.5), epsilon = 1e-15);
    }

    #[test]
    fn shifted_rows_hold_the_earlier_command() {
        let t: Vec<f64> = (0..10).map(|i| i as f64 * 0.1).collect();
        let s = shifted_rows(&t, 0.25);
        assert_eq!(s[0], None);
        assert_eq!(s[2], None);
        assert_eq!(s[3], Some(0));
        assert_eq!(s[9], Some(6));
    }
}
