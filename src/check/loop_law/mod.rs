//! `loop`: the sign of the magnetic control law, end to end (docs/loop.md; JSON keys
//! listed there). While the article turns and the flight software runs its law, the
//! check rebuilds the body field and rate from the logged readings through the plan's
//! mappings ([`signals`]), the commanded dipole from the rods' commands, the torque
//! τ = m × B and the rotational power P = ω·τ, whose mean with a σ that allows for
//! correlated samples ([`stats`]) says whether the law removes or adds energy; and per
//! rod whether its command follows the law's ideal command ([`rods`]).
//!
//! Units inside: nT, nT/s, rad/s, A·m², N·m, W; body frame (B) throughout.

pub mod rods;
pub mod seam;
pub mod signals;
pub mod stats;
mod terms;
#[cfg(test)]
mod tests;
mod warning;

use nalgebra::Vector3;
use serde::Serialize;

pub use rods::{Comparison, RodFinding, RodVerdict};
pub use signals::RateSource;
pub use warning::LoopWarning;

use super::align::Calibration;
use super::outcome::{serialize_tally, Gate, GateRole, Verdict};
use super::CheckRequest;
use crate::log::plan::{ControlIntent, ControlLaw};
use crate::log::Plan;
use crate::Error;
use terms::{
    excitation_gates, ideal_damp, ideal_spin, motion, report_samples, sign_gates, spin_term,
};

/// Fewest rows with a whole derivative window and a rate.
pub const MIN_SAMPLES: usize = 100;
/// Smallest RMS body rate, deg/s: below it the field barely changes and the law's
/// commands are noise (common practice for a hand or table turn: several deg/s).
pub const MIN_RATE_DEG_S: f64 = 0.5;
/// Smallest mean |B|, nT (inside a shield the law has nothing to push on).
pub const MIN_FIELD_NT: f64 = 5_000.0;
/// Significance of the mean power (or spin term), in σ.
pub const SIGNIFICANCE: f64 = 3.0;
/// Default length of the derivative window, s.
pub const DEFAULT_SMOOTH_S: f64 = 1.0;

/// The loop check's own options.
#[derive(Debug, Clone)]
pub struct LoopOptions {
    /// Calibration applied to the readings (after the rod coupling is removed).
    pub calibration: Option<Calibration>,
    /// Length of the smoothing derivative's window, s.
    pub smooth_s: f64,
}

impl Default for LoopOptions {
    fn default() -> Self {
        LoopOptions {
            calibration: None,
            smooth_s: DEFAULT_SMOOTH_S,
        }
    }
}

/// What to check.
pub type LoopRequest<'a> = CheckRequest<'a, LoopOptions>;

/// Whether the law removes energy from the rotation.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Energy {
    /// Mean power below −3σ.
    Removes,
    /// Mean power above +3σ.
    Adds,
    /// |mean| < 3σ.
    None,
}

/// The spin intent's term: mean of (ω·a − ω_target)(τ·a), which is negative when the
/// torque about a drives the rate about a towards the target.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct SpinTerm {
    /// Mean, W (rad/s × N·m).
    pub mean_w: f64,
    /// 1σ of the mean, W.
    pub sigma_w: f64,
    /// Mean rate about the axis, deg/s.
    pub rate_about_axis_deg_s: f64,
}

/// Per-sample data for the report (not in the JSON).
#[derive(Debug, Clone, Default)]
pub struct LoopSamples {
    /// (time s, power W), thinned.
    pub power: Vec<(f64, f64)>,
    /// Per rod: (ideal command, logged command), both at unit RMS, thinned.
    pub scatter: Vec<(String, Vec<(f64, f64)>)>,
}

/// The result of `loop` (keys in docs/loop.md).
#[derive(Debug, Clone, Serialize)]
pub struct LoopResult {
    /// The law in the plan.
    pub law: ControlLaw,
    /// "damp" or "spin".
    pub intent: &'static str,
    /// Spin axis, body frame (spin intent), unit vector.
    pub spin_axis_body: Option<[f64; 3]>,
    /// Target rate about it, deg/s (spin intent).
    pub spin_rate_deg_s: Option<f64>,
    /// Where the body rate came from.
    pub rate_source: RateSource,
    /// Whether a calibration was applied to the readings.
    pub calibrated: bool,
    /// Mean rotational power P = ω·(m × B), W.
    pub power_mean_w: f64,
    /// 1σ of that mean (correlated samples allowed for), W.
    pub power_sigma_w: f64,
    /// "removes", "adds" or "none" (|mean| < 3σ).
    pub energy: Energy,
    /// The spin term (spin intent), else null.
    pub spin: Option<SpinTerm>,
    /// Per rod.
    pub rods: Vec<RodFinding>,
    /// RMS body rate over the used rows, deg/s.
    pub rate_rms_deg_s: f64,
    /// Mean |B| over the used rows, nT.
    pub field_mean_nt: f64,
    /// Rows used.
    pub samples_used: usize,
    /// Rows in the log.
    pub rows: usize,
    /// Length of the derivative window, s (median step × (2h + 1)).
    pub derivative_window_s: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// Every gate.
    pub gates: Vec<Gate>,
    /// `verdict == pass`.
    pub pass: Option<bool>,
    /// Warnings.
    #[serde(serialize_with = "serialize_tally")]
    pub warnings: Vec<LoopWarning>,
    /// Per-sample data for the report.
    #[serde(skip)]
    pub samples: LoopSamples,
}

/// The rods' commands in plan order, and their nominal dipole per command (A·m²).
fn rod_commands(
    req: &LoopRequest,
    plan: &Plan,
    warnings: &mut Vec<LoopWarning>,
) -> Result<(Vec<Vec<f64>>, Vec<f64>), Error> {
    if plan.rods.is_empty() {
        return Err(plan
            .missing("rod", "loop turns the rods' commands into a dipole")
            .into());
    }
    let log = &req.input.log;
    let mut cmds = Vec::new();
    let mut k = Vec::new();
    for (i, rod) in plan.rods.iter().enumerate() {
        let c = log.require_command(&rod.name, "loop compares each rod's command with the law")?;
        cmds.push(c.values.clone());
        k.push(rod.dipole_per_command_am2.ok_or_else(|| {
            plan.invalid(
                &format!("rod[{i}].dipole_per_command_am2"),
                "loop needs each rod's dipole per command (A·m² per command unit) for the \
                 torque",
            )
        })?);
    }
    for c in &log.commands {
        if !plan
            .rods
            .iter()
            .any(|r| r.name.eq_ignore_ascii_case(&c.rod))
        {
            warnings.push(LoopWarning::UnplannedCommand {
                column: c.header.clone(),
            });
        }
    }
    let uncoupled: Vec<&str> = plan
        .rods
        .iter()
        .zip(&cmds)
        .filter(|(r, c)| r.coupling_nt_per_command.is_none() && c.iter().any(|v| *v != 0.0))
        .map(|(r, _)| r.name.as_str())
        .collect();
    if !uncoupled.is_empty() {
        warnings.push(LoopWarning::NoCoupling {
            rods: uncoupled.join(", "),
        });
    }
    Ok((cmds, k))
}

/// The input builder's warnings and those the plan and options raise before any sum.
fn opening_warnings(req: &LoopRequest, law: ControlLaw) -> Vec<LoopWarning> {
    let mut warnings: Vec<LoopWarning> = req
        .input
        .warnings
        .iter()
        .cloned()
        .map(LoopWarning::Input)
        .collect();
    if req.options.calibration.is_none() {
        warnings.push(LoopWarning::NoCalibration);
    }
    if law == ControlLaw::Rate && req.input.log.gyro_rad_s.is_none() {
        warnings.push(LoopWarning::RateLawWithoutGyro);
    }
    warnings
}

/// The spin axis (body frame) and target rate (deg/s) the result echoes; none for damp.
fn spin_echo(intent: ControlIntent) -> (Option<[f64; 3]>, Option<f64>) {
    match intent {
        ControlIntent::Spin {
            axis_body,
            rate_rad_s,
        } => (Some(axis_body), Some(rate_rad_s.to_degrees())),
        ControlIntent::Damp => (None, None),
    }
}

/// Run the loop check.
pub fn run_loop(req: &LoopRequest) -> Result<LoopResult, Error> {
    let plan = req.require_plan("loop", "its [control] law and [[rod]] axes")?;
    let control = plan
        .control
        .as_ref()
        .ok_or_else(|| plan.missing("control", "loop checks the law it names (bdot or rate)"))?;
    let mut warnings = opening_warnings(req, control.law);
    let (cmds, k) = rod_commands(req, plan, &mut warnings)?;
    let sig = signals::signals(req, &cmds, &mut warnings)?;
    let rows: Vec<usize> = (0..sig.used.len()).filter(|&i| sig.used[i]).collect();
    let dipole = |i: usize| -> Vector3<f64> {
        plan.rods
            .iter()
            .zip(&cmds)
            .zip(&k)
            .map(|((r, c), k)| r.axis_body * (k * c[i]))
            .sum()
    };
    let torque = |i: usize| dipole(i).cross(&(sig.b_body_nt[i] * 1e-9));
    let power: Vec<f64> = rows
        .iter()
        .map(|&i| sig.rate_body_rad_s[i].dot(&torque(i)))
        .collect();
    let p = stats::mean_sigma(&power);
    let energy = energy_of(p.mean, p.sigma);
    let (rate_rms_deg_s, field_mean_nt) = motion(&sig, &rows);
    let mut gates = excitation_gates(rows.len(), rate_rms_deg_s, field_mean_nt);
    let excited = gates.iter().all(|g| g.ok);
    let (spin, ideal) = match control.intent {
        ControlIntent::Damp => {
            gates.extend(sign_gates("power", p.mean, p.sigma));
            (None, ideal_damp(control.law, &sig))
        }
        ControlIntent::Spin {
            axis_body,
            rate_rad_s,
        } => {
            let a = Vector3::from(axis_body);
            let spin = spin_term(&sig, &rows, a, rate_rad_s, &torque);
            gates.extend(sign_gates("spin", spin.mean_w, spin.sigma_w));
            (Some(spin), ideal_spin(&sig, a, rate_rad_s))
        }
    };
    let inputs: Vec<rods::RodInput> = plan
        .rods
        .iter()
        .zip(&cmds)
        .map(|(r, c)| rods::RodInput {
            name: &r.name,
            command: c,
            axis_body: r.axis_body,
            command_max: r.command_max,
        })
        .collect();
    let spin_intent = matches!(control.intent, ControlIntent::Spin { .. });
    let findings = rods::judge_rods(&inputs, &rows, &ideal, spin_intent, excited);
    rod_gates_and_warnings(plan, &findings, &mut gates, &mut warnings);
    let verdict = Verdict::from_gates(&gates);
    let samples = report_samples(&sig, &rows, &power, &inputs, &ideal);
    let (spin_axis_body, spin_rate_deg_s) = spin_echo(control.intent);
    Ok(LoopResult {
        law: control.law,
        intent: if spin_intent { "spin" } else { "damp" },
        spin_axis_body,
        spin_rate_deg_s,
        rate_source: sig.rate_source,
        calibrated: req.options.calibration.is_some(),
        power_mean_w: p.mean,
        power_sigma_w: p.sigma,
        energy,
        spin,
        rods: findings,
        rate_rms_deg_s,
        field_mean_nt,
        samples_used: rows.len(),
        rows: sig.used.len(),
        derivative_window_s: derivative_window_s(&sig),
        verdict,
        pass: verdict.pass(),
        gates,
        warnings,
        samples,
    })
}

/// "removes", "adds" or "none" from a mean and its σ.
pub fn energy_of(mean: f64, sigma: f64) -> Energy {
    let significant = mean.is_finite() && sigma.is_finite() && mean.abs() >= SIGNIFICANCE * sigma;
    if !significant {
        Energy::None
    } else if mean < 0.0 {
        Energy::Removes
    } else {
        Energy::Adds
    }
}

fn derivative_window_s(sig: &signals::Signals) -> f64 {
    let mut steps: Vec<f64> = sig.t_s.windows(2).map(|w| w[1] - w[0]).collect();
    steps.sort_by(f64::total_cmp);
    steps.get(steps.len() / 2).copied().unwrap_or(0.0) * (2 * sig.half_window + 1) as f64
}

/// One correlation and one lead gate per judged rod, and the saturation warnings.
fn rod_gates_and_warnings(
    plan: &Plan,
    findings: &[RodFinding],
    gates: &mut Vec<Gate>,
    warnings: &mut Vec<LoopWarning>,
) {
    for f in findings {
        if f.saturated > 0 {
            warnings.push(LoopWarning::Saturated {
                rod: f.name.clone(),
                count: f.saturated,
                of: match f.comparison {
                    Comparison::Regression => f.saturated + f.samples,
                    Comparison::SignAgreement => f.samples,
                },
                from_plan: plan
                    .rods
                    .iter()
                    .any(|r| r.name == f.name && r.command_max.is_some()),
            });
        }
        if f.comparison == Comparison::SignAgreement {
            warnings.push(LoopWarning::SignOnly {
                rod: f.name.clone(),
            });
        }
        if f.verdict == RodVerdict::Unused {
            continue;
        }
        if f.verdict == RodVerdict::Inconclusive {
            // The rod cannot be judged: the verdict cannot pass on it.
            gates.push(Gate::at_least(
                format!("rod_{}_half_swings", f.name),
                if f.correlation.is_some() {
                    f.effective_samples
                } else {
                    0.0
                },
                rods::MIN_EFFECTIVE,
                GateRole::Data,
            ));
            continue;
        }
        let r = f.correlation.unwrap_or(0.0);
        let other = f.best_other.as_ref().map_or(0.0, |b| b.1.abs());
        gates.push(Gate::at_least(
            format!("rod_{}_correlation", f.name),
            r,
            rods::R_MIN,
            GateRole::Article,
        ));
        gates.push(Gate::at_least(
            format!("rod_{}_lead", f.name),
            r - other,
            rods::LEAD_MIN,
            GateRole::Article,
        ));
    }
}
