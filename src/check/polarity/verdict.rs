//! Per-rod verdicts from the measured couplings and the dipole geometry (docs/polarity.md).

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

use super::timing::{AfterPulse, Pulse};
use super::warning::PolarityWarning;
use super::DIPOLE_VALID_ROD_LENGTHS;
use crate::fit::linear::LinearFit;
use crate::log::Plan;
use crate::physics::frames::angle_between;
use crate::Error;

/// The point-dipole model's own direction error when no finite-rod model applies, deg
/// (common practice for rods a few lengths from the sensor).
pub const MODEL_ERROR_DEG: f64 = 3.0;

/// Largest angle from the expected direction consistent with the model and the
/// measurement: the model's error plus 3σ of the measured angle, deg.
pub fn consistency_limit_deg(angle_sigma_deg: Option<f64>) -> f64 {
    MODEL_ERROR_DEG + 3.0 * angle_sigma_deg.unwrap_or(0.0)
}

/// A rod's verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// The response lies within the angle limit of the expected direction.
    Ok,
    /// The response lies within the angle limit of the opposite of the expected direction.
    Reversed,
    /// The response matches another rod's expected direction (or its opposite).
    WrongAxis,
    /// The response is below the SNR threshold.
    NoResponse,
    /// The data cannot tell: the response matches no rod, or two rods' expected
    /// directions at the sensor are too close to tell a swap.
    Inconclusive,
    /// Within the angle limit, but farther from the expected direction than the
    /// model's own error plus 3σ of the measurement: something in the chain (a sensor
    /// axis, the mounting, the rod's axis) is not as the plan says.
    OffAxis,
}

impl Verdict {
    /// The verdict as a word, as in the JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Ok => "ok",
            Verdict::Reversed => "reversed",
            Verdict::WrongAxis => "wrong-axis",
            Verdict::NoResponse => "no-response",
            Verdict::Inconclusive => "inconclusive",
            Verdict::OffAxis => "off-axis",
        }
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One rod's result; the first six keys are the stable ones of docs/polarity.md.
#[derive(Debug, Clone, Serialize)]
pub struct RodResult {
    /// Rod name.
    pub name: String,
    /// Verdict.
    pub verdict: Verdict,
    /// Angle between measured and expected response, deg; null if the coupling is zero.
    pub angle_to_expected_deg: Option<f64>,
    /// Measured response per unit command, sensor frame (S), nT per command unit.
    pub coupling_nt_per_command: [f64; 3],
    /// |coupling| over its 1σ along its own direction.
    pub snr: f64,
    /// Dipole inferred from the coupling through the geometry over the nominal
    /// `dipole_per_command_am2`; null without a nominal.
    pub gain_ratio: Option<f64>,
    /// 1σ of `gain_ratio`.
    pub gain_ratio_sigma: Option<f64>,
    /// True when the expected field comes from a model valid at the sensor's distance:
    /// the point dipole from three rod lengths on (common practice), the two-pole model
    /// closer; null when the plan gives no `length_m`.
    pub gain_reliable: Option<bool>,
    /// 1σ of the coupling per sensor axis, nT per command unit.
    pub coupling_sigma_nt_per_command: [f64; 3],
    /// 1σ of the angle, deg.
    pub angle_sigma_deg: Option<f64>,
    /// Expected field at the sensor per A·m² of this rod's positive dipole, sensor
    /// frame (S), nT/(A·m²).
    pub expected_nt_per_am2: [f64; 3],
    /// The model that gave `expected_nt_per_am2`: `point-dipole`, or `two-pole` within
    /// three rod lengths of a rod whose `length_m` the plan gives.
    pub expected_model: super::finite::RodFieldModel,
    /// Dipole inferred from the coupling: |coupling| / |expected per A·m²|, A·m² per
    /// command unit.
    pub dipole_per_command_am2: f64,
    /// For `wrong-axis`: the rod whose expected direction the response matches.
    pub matches_rod: Option<String>,
    /// For `wrong-axis`: whether it matches that rod's direction reversed.
    pub matches_reversed: Option<bool>,
    /// Distance rod centre → sensor, m.
    pub distance_m: f64,
    /// Longest settle time over this rod's pulses, s, from command off (includes the
    /// lag): what a magnetometer blanking window must cover. Null if none was measured.
    pub settle_time_s: Option<f64>,
    /// Remanent field once the rod is off after a positive pulse (the opposite after a
    /// negative one): half the difference between the two, sensor frame, nT; fitted with
    /// the couplings (rows before the first pulse are taken to sit at the midpoint).
    /// Null when the rod was pulsed with one sign only.
    pub remanent_offset_nt: Option<[f64; 3]>,
    /// 1σ of `remanent_offset_nt` per axis, nT.
    pub remanent_offset_sigma_nt: Option<[f64; 3]>,
    /// Time constant of the first-order rise of the rod's field after the delay `lag_s`,
    /// s (0: a step within one sample).
    pub rise_time_s: Option<f64>,
    /// 1σ of `rise_time_s`, s; null when the rise was not fitted (a step, or no response).
    pub rise_time_sigma_s: Option<f64>,
    /// Why this verdict, in words.
    pub note: String,
}

/// What was measured for one rod.
pub struct Measured {
    coupling: Vector3<f64>,
    cov: Matrix3<f64>,
    settle_time_s: Option<f64>,
    remanent: Option<(Vector3<f64>, Vector3<f64>)>,
}

impl Measured {
    /// From the final fit (command column `c`) and the rod's pulses.
    pub fn new(
        fit: &LinearFit,
        c: usize,
        rem_index: Option<usize>,
        pulses: &[(&Pulse, &AfterPulse)],
    ) -> Self {
        let coupling = Vector3::from_fn(|a, _| fit.coefficients[(c, a)]);
        let cov = Matrix3::from_fn(|a, b| fit.covariance(c, a, c, b));
        let settle_time_s = pulses
            .iter()
            .filter_map(|(_, a)| a.settle_time_s)
            .reduce(f64::max);
        let remanent = rem_index.map(|r| {
            let v = Vector3::from_fn(|a, _| fit.coefficients[(r, a)]);
            let s = Vector3::from_fn(|a, _| fit.covariance(r, a, r, a).max(0.0).sqrt());
            (v, s)
        });
        Self {
            coupling,
            cov,
            settle_time_s,
            remanent,
        }
    }
}

/// Angle between the lines through a and b (0..90°), rad.
fn line_angle(a: &Vector3<f64>, b: &Vector3<f64>) -> Option<f64> {
    let x = angle_between(a, b)?;
    Some(x.min(std::f64::consts::PI - x))
}

/// Each plan rod's expected field direction at the sensor per A·m², sensor frame
/// (point dipole, Jackson eq. 5.56; the two-pole model within three rod lengths, see
/// `finite.rs`).
fn expected_directions(
    plan: &Plan,
    sensor_position_m: &Vector3<f64>,
    sensor_to_body: &Matrix3<f64>,
) -> Result<Vec<Vector3<f64>>, Error> {
    let body_to_sensor = sensor_to_body.transpose();
    let mut expected = Vec::with_capacity(plan.rods.len());
    for (i, rod) in plan.rods.iter().enumerate() {
        let r = sensor_position_m - rod.position_m;
        let f = super::finite::field_per_am2(rod, &r).ok_or_else(|| {
            plan.invalid(
                &format!("rod[{i}].position_m"),
                "the rod (or one of its ends) sits at the sensor's position: its field there \
                 is undefined",
            )
        })?;
        expected.push(body_to_sensor * f);
    }
    Ok(expected)
}

/// Per rod, the other rods whose expected directions at the sensor lie along nearly the
/// same line (within the angle limit): a swap between them cannot be seen. Each pair is
/// also a warning.
fn ambiguous_pairs(
    plan: &Plan,
    expected: &[Vector3<f64>],
    angle_max_rad: f64,
    warnings: &mut Vec<PolarityWarning>,
) -> Vec<Vec<usize>> {
    let mut ambiguous: Vec<Vec<usize>> = vec![Vec::new(); expected.len()];
    for i in 0..expected.len() {
        for j in i + 1..expected.len() {
            if line_angle(&expected[i], &expected[j]).is_some_and(|a| a < angle_max_rad) {
                ambiguous[i].push(j);
                ambiguous[j].push(i);
                warnings.push(PolarityWarning::Ambiguous {
                    a: plan.rods[i].name.clone(),
                    b: plan.rods[j].name.clone(),
                    angle_deg: line_angle(&expected[i], &expected[j])
                        .unwrap_or(0.0)
                        .to_degrees(),
                    limit_deg: angle_max_rad.to_degrees(),
                });
            }
        }
    }
    ambiguous
}

/// The SNR of a measured coupling (|c| over its σ along itself) and the 1σ of its
/// direction, deg (from the σ across it), given its covariance, sensor frame.
fn snr_and_angle_sigma(c: &Vector3<f64>, cov: &Matrix3<f64>) -> (f64, Option<f64>) {
    let norm = c.norm();
    match c.try_normalize(0.0) {
        Some(u) => {
            let along = (u.transpose() * cov * u)[0].max(0.0).sqrt();
            let perp = ((cov.trace() - along * along).max(0.0) / 2.0).sqrt();
            (
                if along > 0.0 {
                    norm / along
                } else {
                    f64::INFINITY
                },
                Some((perp / norm).atan().to_degrees()),
            )
        }
        None => (0.0, None),
    }
}

/// What `classify` needs about one rod.
struct Candidate<'a> {
    plan: &'a Plan,
    index: usize,
    coupling: &'a Vector3<f64>,
    expected: &'a [Vector3<f64>],
    ambiguous: &'a [usize],
    snr: f64,
    snr_min: f64,
    angle: Option<f64>,
    angle_sigma: Option<f64>,
    angle_max_rad: f64,
}

/// A rod's verdict, the note that explains it and, for `wrong-axis`, the rod it
/// responds like.
struct Classified {
    verdict: Verdict,
    note: String,
    matches_rod: Option<String>,
    matches_reversed: Option<bool>,
}

/// The verdict of one rod from its SNR, its angle to the expected direction (and to the
/// other rods' directions) and its angle's σ.
fn classify(k: &Candidate) -> Classified {
    let deg = |x: f64| x.to_degrees();
    let (plan, i, c, expected) = (k.plan, k.index, k.coupling, k.expected);
    let (snr, snr_min, angle, angle_sigma, angle_max_rad) =
        (k.snr, k.snr_min, k.angle, k.angle_sigma, k.angle_max_rad);
    let mut matches_rod = None;
    let mut matches_reversed = None;
    let (verdict, note) = if snr < snr_min {
        (
            Verdict::NoResponse,
            format!("SNR {snr:.1} is below {snr_min}: no measurable response (check wiring, driver and that the rod was powered)"),
        )
    } else if !k.ambiguous.is_empty() {
        let others: Vec<&str> = k
            .ambiguous
            .iter()
            .map(|&j| plan.rods[j].name.as_str())
            .collect();
        (
            Verdict::Inconclusive,
            format!(
                "expected direction too close to that of rod {} to tell a swap",
                others.join(", ")
            ),
        )
    } else if let Some(a) = angle.filter(|a| *a <= angle_max_rad) {
        let consistent = consistency_limit_deg(angle_sigma);
        if deg(a) <= consistent {
            (Verdict::Ok, format!("{:.1}° from expected", deg(a)))
        } else {
            (
                Verdict::OffAxis,
                format!(
                    "{:.1}° from expected, beyond the model's {MODEL_ERROR_DEG}° plus 3σ \
                     ({consistent:.2}°): check the sensor axes, the mounting and the \
                     rod's axis",
                    deg(a)
                ),
            )
        }
    } else if let Some(a) = angle.filter(|a| std::f64::consts::PI - a <= angle_max_rad) {
        (
            Verdict::Reversed,
            format!(
                "{:.1}° from the reverse of expected: the rod pushes backwards",
                deg(std::f64::consts::PI - a)
            ),
        )
    } else {
        let best = (0..expected.len())
            .filter(|&j| j != i)
            .filter_map(|j| Some((j, angle_between(c, &expected[j])?)))
            .map(|(j, a)| {
                (
                    j,
                    a.min(std::f64::consts::PI - a),
                    a > std::f64::consts::FRAC_PI_2,
                )
            })
            .min_by(|x, y| x.1.total_cmp(&y.1));
        match best {
            Some((j, a, rev)) if a <= angle_max_rad => {
                matches_rod = Some(plan.rods[j].name.clone());
                matches_reversed = Some(rev);
                (
                    Verdict::WrongAxis,
                    format!(
                        "responds like rod \"{}\"{} ({:.1}° from it): commands or wiring swapped?",
                        plan.rods[j].name,
                        if rev { " reversed" } else { "" },
                        deg(a)
                    ),
                )
            }
            _ => (
                Verdict::Inconclusive,
                format!(
                    "{:.1}° from expected, and matches no other rod: check sensor_to_body, positions and axes in the plan",
                    angle.map_or(f64::NAN, deg)
                ),
            ),
        }
    };
    Classified {
        verdict,
        note,
        matches_rod,
        matches_reversed,
    }
}

/// Give every plan rod its verdict.
pub fn judge(
    plan: &Plan,
    sensor_position_m: &Vector3<f64>,
    sensor_to_body: &Matrix3<f64>,
    measured: &[Measured],
    angle_max_rad: f64,
    snr_min: f64,
    warnings: &mut Vec<PolarityWarning>,
) -> Result<Vec<RodResult>, Error> {
    let expected = expected_directions(plan, sensor_position_m, sensor_to_body)?;
    let ambiguous = ambiguous_pairs(plan, &expected, angle_max_rad, warnings);
    let mut out = Vec::with_capacity(plan.rods.len());
    for (i, (rod, m)) in plan.rods.iter().zip(measured).enumerate() {
        let c = m.coupling;
        let e = expected[i];
        let norm = c.norm();
        let sigma_c = Vector3::from_fn(|a, _| m.cov[(a, a)].max(0.0).sqrt());
        let (snr, angle_sigma) = snr_and_angle_sigma(&c, &m.cov);
        let angle = angle_between(&c, &e);
        let e_norm = e.norm();
        let dipole = norm / e_norm;
        let (gain_ratio, gain_ratio_sigma) = match rod.dipole_per_command_am2 {
            Some(m0) if snr.is_finite() => (Some(dipole / m0), Some(dipole / m0 / snr)),
            Some(m0) => (Some(dipole / m0), Some(0.0)),
            None => (None, None),
        };
        let distance_m = (sensor_position_m - rod.position_m).norm();
        // Within three rod lengths the two-pole model gives the expected field, so the
        // gain ratio stays meaningful; the warning says which model was used.
        let model = super::finite::model_for(rod, &(sensor_position_m - rod.position_m));
        let gain_reliable = rod.length_m.map(|_| true);
        if model == super::finite::RodFieldModel::TwoPole {
            warnings.push(PolarityWarning::CloseToRod {
                rod: rod.name.clone(),
                distance_m,
                needed_m: DIPOLE_VALID_ROD_LENGTHS * rod.length_m.unwrap_or(0.0),
            });
        }
        let deg = |x: f64| x.to_degrees();
        let Classified {
            verdict,
            note,
            matches_rod,
            matches_reversed,
        } = classify(&Candidate {
            plan,
            index: i,
            coupling: &c,
            expected: &expected,
            ambiguous: &ambiguous[i],
            snr,
            snr_min,
            angle,
            angle_sigma,
            angle_max_rad,
        });
        out.push(RodResult {
            name: rod.name.clone(),
            verdict,
            angle_to_expected_deg: angle.map(deg),
            coupling_nt_per_command: c.into(),
            snr,
            gain_ratio,
            gain_ratio_sigma,
            gain_reliable,
            coupling_sigma_nt_per_command: sigma_c.into(),
            angle_sigma_deg: angle_sigma,
            expected_nt_per_am2: e.into(),
            expected_model: model,
            dipole_per_command_am2: dipole,
            matches_rod,
            matches_reversed,
            distance_m,
            settle_time_s: m.settle_time_s,
            remanent_offset_nt: m.remanent.map(|r| r.0.into()),
            remanent_offset_sigma_nt: m.remanent.map(|r| r.1.into()),
            rise_time_s: None,
            rise_time_sigma_s: None,
            note,
        });
    }
    Ok(out)
}
