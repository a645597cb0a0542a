//! The loop check's sums: the excitation it needs, the power or spin term and its gates,
//! the law's ideal dipole per row, and the thinned series for the report.
//!
//! Units: nT, nT/s, rad/s, A·m², N·m, W; body frame throughout.

use nalgebra::Vector3;

use super::{rods, signals, stats, LoopSamples, SpinTerm};
use super::{MIN_FIELD_NT, MIN_RATE_DEG_S, MIN_SAMPLES, SIGNIFICANCE};
use crate::check::outcome::{Gate, GateRole};
use crate::log::plan::ControlLaw;

/// RMS body rate (deg/s) and mean |B| (nT) over the used rows.
pub(super) fn motion(sig: &signals::Signals, rows: &[usize]) -> (f64, f64) {
    let n = rows.len().max(1) as f64;
    let rate_rms_deg_s = (rows
        .iter()
        .map(|&i| sig.rate_body_rad_s[i].norm_squared())
        .sum::<f64>()
        / n)
        .sqrt()
        .to_degrees();
    let field_mean_nt = rows.iter().map(|&i| sig.b_body_nt[i].norm()).sum::<f64>() / n;
    (rate_rms_deg_s, field_mean_nt)
}

/// The data gates on the excitation: enough rows, motion and field.
pub(super) fn excitation_gates(rows: usize, rate_rms_deg_s: f64, field_mean_nt: f64) -> Vec<Gate> {
    vec![
        Gate::at_least("samples", rows as f64, MIN_SAMPLES as f64, GateRole::Data),
        Gate::at_least(
            "rate_rms_deg_s",
            rate_rms_deg_s,
            MIN_RATE_DEG_S,
            GateRole::Data,
        ),
        Gate::at_least("field_mean_nt", field_mean_nt, MIN_FIELD_NT, GateRole::Data),
    ]
}

/// The spin intent's term (ω·a − ω_t)(τ·a) over the used rows, its mean and σ, and the
/// mean rate about the axis.
pub(super) fn spin_term(
    sig: &signals::Signals,
    rows: &[usize],
    a: Vector3<f64>,
    target_rad_s: f64,
    torque: &dyn Fn(usize) -> Vector3<f64>,
) -> SpinTerm {
    let term: Vec<f64> = rows
        .iter()
        .map(|&i| (sig.rate_body_rad_s[i].dot(&a) - target_rad_s) * torque(i).dot(&a))
        .collect();
    let s = stats::mean_sigma(&term);
    let about = rows
        .iter()
        .map(|&i| sig.rate_body_rad_s[i].dot(&a))
        .sum::<f64>()
        / rows.len().max(1) as f64;
    SpinTerm {
        mean_w: s.mean,
        sigma_w: s.sigma,
        rate_about_axis_deg_s: about.to_degrees(),
    }
}

/// The two gates on a mean that must be negative: added beyond 3σ fails the article;
/// not removed beyond 3σ leaves the data unable to answer.
pub(super) fn sign_gates(name: &str, mean: f64, sigma: f64) -> [Gate; 2] {
    let z = if sigma > 0.0 { mean / sigma } else { f64::NAN };
    [
        Gate::at_most(
            format!("{name}_added_sigmas"),
            z,
            SIGNIFICANCE,
            GateRole::Article,
        ),
        Gate::at_least(
            format!("{name}_removed_sigmas"),
            -z,
            SIGNIFICANCE,
            GateRole::Data,
        ),
    ]
}

/// The damping law's ideal dipole per row (body frame, up to a positive gain).
pub(super) fn ideal_damp(law: ControlLaw, sig: &signals::Signals) -> Vec<Vector3<f64>> {
    (0..sig.used.len())
        .map(|i| match law {
            ControlLaw::Bdot => -sig.bdot_body_nt_s[i],
            ControlLaw::Rate => sig.rate_body_rad_s[i].cross(&sig.b_body_nt[i]),
        })
        .collect()
}

/// The spin law's ideal dipole per row: (ω_t − ω·a)(B × a).
pub(super) fn ideal_spin(
    sig: &signals::Signals,
    a: Vector3<f64>,
    target: f64,
) -> Vec<Vector3<f64>> {
    (0..sig.used.len())
        .map(|i| sig.b_body_nt[i].cross(&a) * (target - sig.rate_body_rad_s[i].dot(&a)))
        .collect()
}

/// Thinned series for the report's plots.
pub(super) fn report_samples(
    sig: &signals::Signals,
    rows: &[usize],
    power: &[f64],
    rods: &[rods::RodInput],
    ideal: &[Vector3<f64>],
) -> LoopSamples {
    let step = (rows.len() / 3000).max(1);
    let t0 = sig.t_s.first().copied().unwrap_or(0.0);
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / v.len().max(1) as f64).sqrt();
    LoopSamples {
        power: rows
            .iter()
            .zip(power)
            .step_by(step)
            .map(|(&i, p)| (sig.t_s[i] - t0, *p))
            .collect(),
        scatter: rods
            .iter()
            .map(|r| {
                let c: Vec<f64> = rows.iter().map(|&i| r.command[i]).collect();
                let id: Vec<f64> = rows.iter().map(|&i| r.axis_body.dot(&ideal[i])).collect();
                let (rc, ri) = (
                    rms(&c).max(f64::MIN_POSITIVE),
                    rms(&id).max(f64::MIN_POSITIVE),
                );
                let pts = c
                    .iter()
                    .zip(&id)
                    .step_by(step.max(rows.len() / 1500).max(1))
                    .map(|(c, i)| (i / ri, c / rc))
                    .collect();
                (r.name.to_string(), pts)
            })
            .collect(),
    }
}
