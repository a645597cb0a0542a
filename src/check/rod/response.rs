//! What the bench log says beyond the moments: the rod's time constant from the probe
//! field's approach to each new level (a first-order fit), and the fall-off exponent of
//! the field with distance from stations on the axis (or broadside).

use nalgebra::Vector3;

use super::levels::Level;
use super::result::{RodStation, StepResponse};
use super::steps::{mean_field, BenchLog, Step};
use crate::log::RodBench;
use crate::physics::finite_rod::FiniteRod;

/// Samples per time constant the log must have for τ to be reported.
pub const SAMPLES_PER_TAU_MIN: f64 = 5.0;
/// A step is used for τ when its field change exceeds this many σ of a row.
const STEP_SNR_MIN: f64 = 20.0;
/// Responses kept for the report.
const RESPONSES_KEPT: usize = 6;

/// The time constant (s) and its 1σ, and the responses for plots; `None` for τ when the
/// log does not resolve it.
pub fn time_constant(bl: &BenchLog, steps: &[Step]) -> (Option<(f64, f64)>, Vec<StepResponse>) {
    let mut taus = Vec::new();
    let mut responses = Vec::new();
    for w in steps.windows(2) {
        let (prev, cur) = (&w[0], &w[1]);
        if prev.station != cur.station || cur.rows.start != prev.rows.end {
            continue;
        }
        let half = |s: &Step| (s.rows.start + s.rows.len() / 2)..s.rows.end;
        let (before, _, _) = mean_field(bl, half(prev));
        let (after, _, row_sigma) = mean_field(bl, half(cur));
        let delta: Vector3<f64> = before - after;
        if delta.norm() < STEP_SNR_MIN * row_sigma.max(1e-12) {
            continue;
        }
        let t0 = bl.t_s[cur.rows.start];
        let pts: Vec<(f64, f64)> = cur
            .rows
            .clone()
            .map(|i| {
                let y = (bl.field(i) - after).dot(&delta) / delta.norm_squared();
                (bl.t_s[i] - t0, y)
            })
            .collect();
        let fit: Vec<(f64, f64)> = pts
            .iter()
            .take_while(|p| p.1 > 0.05)
            .filter(|p| p.1 < 0.9)
            .map(|p| (p.0, p.1.ln()))
            .collect();
        if let Some(tau) = log_slope_tau(&fit) {
            taus.push(tau);
        }
        if responses.len() < RESPONSES_KEPT {
            responses.push(StepResponse {
                from_to_a: (prev.current_a, cur.current_a),
                points: pts.into_iter().take(40).collect(),
            });
        }
    }
    let dt = median_interval(bl.t_s);
    let n = taus.len() as f64;
    if taus.is_empty() {
        return (None, responses);
    }
    let mean = taus.iter().sum::<f64>() / n;
    let sd = (taus.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / (n - 1.0).max(1.0)).sqrt();
    let resolved = dt.is_some_and(|dt| mean / dt >= SAMPLES_PER_TAU_MIN);
    let out = resolved.then_some((mean, if taus.len() > 1 { sd / n.sqrt() } else { mean }));
    (out, responses)
}

/// τ from ln y = c − t/τ over ≥ 3 points; `None` otherwise or for a non-decaying fit.
fn log_slope_tau(pts: &[(f64, f64)]) -> Option<f64> {
    if pts.len() < 3 {
        return None;
    }
    let n = pts.len() as f64;
    let xm = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let ym = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - xm).powi(2)).sum();
    let slope = pts.iter().map(|p| (p.0 - xm) * (p.1 - ym)).sum::<f64>() / sxx;
    (slope < 0.0 && slope.is_finite()).then(|| -1.0 / slope)
}

/// Median time between rows, s.
fn median_interval(t: &[f64]) -> Option<f64> {
    let mut d: Vec<f64> = t
        .windows(2)
        .map(|w| w[1] - w[0])
        .filter(|d| *d > 0.0)
        .collect();
    if d.is_empty() {
        return None;
    }
    d.sort_by(f64::total_cmp);
    Some(d[d.len() / 2])
}

/// Each station with its axial field per ampere over the slope's levels.
pub fn stations(
    bench: &RodBench,
    levels: &[Level],
    used: &[usize],
    i_max_a: f64,
) -> Vec<RodStation> {
    used.iter()
        .enumerate()
        .map(|(j, &s)| {
            let p = &bench.positions[s];
            let r = p.position_m.norm();
            let cos = p.position_m.z.abs() / r;
            let kind = if cos > 0.995 {
                "on-axis"
            } else if cos < 0.1 {
                "broadside"
            } else {
                "oblique"
            };
            let pts: Vec<(f64, f64, f64)> = levels
                .iter()
                .filter(|l| !l.off && l.current_a.abs() <= 0.5 * i_max_a * (1.0 + 1e-6))
                .filter_map(|l| l.fields.get(j).map(|f| (l.current_a, f.b_nt.z, f.sigma_nt)))
                .collect();
            let (k, sk) = slope(&pts);
            RodStation {
                label: p.label.clone(),
                distance_m: r,
                rod_lengths: r / bench.length_m,
                field_per_amp_nt_per_a: k,
                field_per_amp_sigma: sk,
                kind,
            }
        })
        .collect()
}

/// Slope of y on x through (x, y, σ) with an intercept, and its propagated 1σ.
fn slope(pts: &[(f64, f64, f64)]) -> (f64, f64) {
    let n = pts.len() as f64;
    let xm = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let ym = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - xm).powi(2)).sum();
    let k = pts.iter().map(|p| (p.0 - xm) * (p.1 - ym)).sum::<f64>() / sxx;
    let s = pts
        .iter()
        .map(|p| ((p.0 - xm) * p.2 / sxx).powi(2))
        .sum::<f64>()
        .sqrt();
    (k, s)
}

/// The fall-off: (exponent, its 1σ, the finite rod's exponent at those stations, which
/// stations).
pub struct Falloff {
    /// Fitted exponent of |B| ∝ rⁿ.
    pub exponent: f64,
    /// Its uncertainty as a reading of the point dipole's −3: the measurement's 1σ plus
    /// the finite rod's own departure from −3 at these stations (a model error added as
    /// polarity adds its model's error to the measurement's σ).
    pub sigma: f64,
    /// The measurement's 1σ alone.
    pub measurement_sigma: f64,
    /// The uniformly magnetised rod's exponent at the same stations.
    pub finite_rod: f64,
    /// "on-axis" or "broadside".
    pub stations: &'static str,
}

/// Fit ln|k| = c + n ln r over the on-axis stations when two distances exist, else the
/// broadside ones.
pub fn falloff(bench: &RodBench, rod: &FiniteRod, stations: &[RodStation]) -> Option<Falloff> {
    for kind in ["on-axis", "broadside"] {
        let set: Vec<&RodStation> = stations.iter().filter(|s| s.kind == kind).collect();
        let (lo, hi) = set.iter().fold((f64::INFINITY, 0.0_f64), |(a, b), s| {
            (a.min(s.distance_m), b.max(s.distance_m))
        });
        if set.len() < 2 || hi < 1.05 * lo {
            continue;
        }
        let pts: Vec<(f64, f64, f64)> = set
            .iter()
            .map(|s| {
                let k = s.field_per_amp_nt_per_a.abs();
                (s.distance_m.ln(), k.ln(), s.field_per_amp_sigma / k)
            })
            .collect();
        let (n, sn) = weighted_slope(&pts);
        let model: Vec<(f64, f64, f64)> = set
            .iter()
            .filter_map(|s| {
                let p = bench.positions.iter().find(|p| p.label == s.label)?;
                let b = rod.field_nt(1.0, &p.position_m)?;
                Some((s.distance_m.ln(), b.z.abs().ln(), 1.0))
            })
            .collect();
        let (n_model, _) = weighted_slope(&model);
        return Some(Falloff {
            exponent: n,
            sigma: sn + (n_model + 3.0).abs(),
            measurement_sigma: sn,
            finite_rod: n_model,
            stations: kind,
        });
    }
    None
}

/// Weighted least-squares slope of (x, y, σ_y) with an intercept, and its 1σ.
fn weighted_slope(pts: &[(f64, f64, f64)]) -> (f64, f64) {
    let w: Vec<f64> = pts.iter().map(|p| 1.0 / (p.2 * p.2).max(1e-300)).collect();
    let sw: f64 = w.iter().sum();
    let xm = pts.iter().zip(&w).map(|(p, w)| w * p.0).sum::<f64>() / sw;
    let ym = pts.iter().zip(&w).map(|(p, w)| w * p.1).sum::<f64>() / sw;
    let sxx: f64 = pts
        .iter()
        .zip(&w)
        .map(|(p, w)| w * (p.0 - xm).powi(2))
        .sum();
    let b = pts
        .iter()
        .zip(&w)
        .map(|(p, w)| w * (p.0 - xm) * (p.1 - ym))
        .sum::<f64>()
        / sxx;
    (b, (1.0 / sxx).sqrt())
}
