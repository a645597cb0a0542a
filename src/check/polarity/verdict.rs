//! Per-rod verdicts from the measured couplings and the dipole geometry (docs/polarity.md).

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

use super::sensor::SensorGeometry;
use super::timing::{AfterPulse, Pulse};
use super::warning::PolarityWarning;
use super::{RodResult, DIPOLE_VALID_ROD_LENGTHS};
use crate::fit::linear::LinearFit;
use crate::log::plan::Rod;
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

impl Classified {
    /// A verdict that names no other rod.
    fn plain(verdict: Verdict, note: String) -> Self {
        Classified {
            verdict,
            note,
            matches_rod: None,
            matches_reversed: None,
        }
    }
}

/// The verdict of one rod from its SNR, its angle to the expected direction (and to the
/// other rods' directions) and its angle's σ, in this order: no response, a swap that
/// cannot be seen, along the expected direction (ok or off-axis), reversed, else like
/// another rod (wrong axis) or like none (inconclusive).
fn classify(k: &Candidate) -> Classified {
    let pi = std::f64::consts::PI;
    if k.snr < k.snr_min {
        let (snr, snr_min) = (k.snr, k.snr_min);
        return Classified::plain(
            Verdict::NoResponse,
            format!("SNR {snr:.1} is below {snr_min}: no measurable response (check wiring, driver and that the rod was powered)"),
        );
    }
    if !k.ambiguous.is_empty() {
        return indistinguishable(k);
    }
    if let Some(a) = k.angle.filter(|a| *a <= k.angle_max_rad) {
        return along_expected(a, k.angle_sigma);
    }
    if let Some(a) = k.angle.filter(|a| pi - a <= k.angle_max_rad) {
        return Classified::plain(
            Verdict::Reversed,
            format!(
                "{:.1}° from the reverse of expected: the rod pushes backwards",
                (pi - a).to_degrees()
            ),
        );
    }
    like_another_rod(k)
}

/// Inconclusive: the expected direction lies too close to another rod's to tell a swap.
fn indistinguishable(k: &Candidate) -> Classified {
    let others: Vec<&str> = k
        .ambiguous
        .iter()
        .map(|&j| k.plan.rods[j].name.as_str())
        .collect();
    Classified::plain(
        Verdict::Inconclusive,
        format!(
            "expected direction too close to that of rod {} to tell a swap",
            others.join(", ")
        ),
    )
}

/// Ok, or off-axis when the angle `angle_rad` to the expected direction (within the
/// limit) exceeds the model's error plus 3σ of the measured angle.
fn along_expected(angle_rad: f64, angle_sigma_deg: Option<f64>) -> Classified {
    let deg = angle_rad.to_degrees();
    let consistent = consistency_limit_deg(angle_sigma_deg);
    if deg <= consistent {
        Classified::plain(Verdict::Ok, format!("{deg:.1}° from expected"))
    } else {
        Classified::plain(
            Verdict::OffAxis,
            format!(
                "{deg:.1}° from expected, beyond the model's {MODEL_ERROR_DEG}° plus 3σ \
                 ({consistent:.2}°): check the sensor axes, the mounting and the \
                 rod's axis"
            ),
        )
    }
}

/// Wrong axis when the coupling lies within the angle limit of the line of another
/// rod's expected direction (the closest such rod, and whether reversed); else
/// inconclusive.
fn like_another_rod(k: &Candidate) -> Classified {
    let pi = std::f64::consts::PI;
    let best = (0..k.expected.len())
        .filter(|&j| j != k.index)
        .filter_map(|j| Some((j, angle_between(k.coupling, &k.expected[j])?)))
        .map(|(j, a)| (j, a.min(pi - a), a > std::f64::consts::FRAC_PI_2))
        .min_by(|x, y| x.1.total_cmp(&y.1));
    match best {
        Some((j, a, rev)) if a <= k.angle_max_rad => {
            let name = &k.plan.rods[j].name;
            Classified {
                verdict: Verdict::WrongAxis,
                note: format!(
                    "responds like rod \"{}\"{} ({:.1}° from it): commands or wiring swapped?",
                    name,
                    if rev { " reversed" } else { "" },
                    a.to_degrees()
                ),
                matches_rod: Some(name.clone()),
                matches_reversed: Some(rev),
            }
        }
        _ => Classified::plain(
            Verdict::Inconclusive,
            format!(
                "{:.1}° from expected, and matches no other rod: check sensor_to_body, positions and axes in the plan",
                k.angle.map_or(f64::NAN, f64::to_degrees)
            ),
        ),
    }
}

/// Give every plan rod its verdict: the expected directions at the sensor, the pairs
/// a swap between which cannot be seen, then each rod against them.
pub(super) fn judge(
    plan: &Plan,
    sensor: &SensorGeometry,
    measured: &[Measured],
    angle_max_rad: f64,
    snr_min: f64,
    warnings: &mut Vec<PolarityWarning>,
) -> Result<Vec<RodResult>, Error> {
    let expected = expected_directions(plan, &sensor.position_m, &sensor.sensor_to_body)?;
    let ambiguous = ambiguous_pairs(plan, &expected, angle_max_rad, warnings);
    let mut out = Vec::with_capacity(plan.rods.len());
    for (i, m) in measured.iter().enumerate().take(plan.rods.len()) {
        let candidate = Candidate {
            plan,
            index: i,
            coupling: &m.coupling,
            expected: &expected,
            ambiguous: &ambiguous[i],
            snr: 0.0,
            snr_min,
            angle: angle_between(&m.coupling, &expected[i]),
            angle_sigma: None,
            angle_max_rad,
        };
        out.push(judge_rod(candidate, m, &sensor.position_m, warnings));
    }
    Ok(out)
}

/// One rod's result from what was measured and its expected direction
/// (`k.expected[k.index]`); the SNR and the angle's σ are filled in here from the
/// coupling's covariance. Warns when the sensor is too close for the point-dipole gain.
fn judge_rod(
    mut k: Candidate,
    m: &Measured,
    sensor_position_m: &Vector3<f64>,
    warnings: &mut Vec<PolarityWarning>,
) -> RodResult {
    let rod = &k.plan.rods[k.index];
    let (c, e) = (m.coupling, k.expected[k.index]);
    (k.snr, k.angle_sigma) = snr_and_angle_sigma(&c, &m.cov);
    let dipole = c.norm() / e.norm();
    let (gain_ratio, gain_ratio_sigma) = gain_ratio(dipole, rod.dipole_per_command_am2, k.snr);
    let offset_m = sensor_position_m - rod.position_m;
    let distance_m = offset_m.norm();
    let (expected_model, gain_reliable) = field_model(rod, &offset_m, warnings);
    let Classified {
        verdict,
        note,
        matches_rod,
        matches_reversed,
    } = classify(&k);
    RodResult {
        name: rod.name.clone(),
        verdict,
        angle_to_expected_deg: k.angle.map(f64::to_degrees),
        coupling_nt_per_command: c.into(),
        snr: k.snr,
        gain_ratio,
        gain_ratio_sigma,
        gain_reliable,
        coupling_sigma_nt_per_command: Vector3::from_fn(|a, _| m.cov[(a, a)].max(0.0).sqrt())
            .into(),
        angle_sigma_deg: k.angle_sigma,
        expected_nt_per_am2: e.into(),
        expected_model,
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
    }
}

/// The dipole inferred from the coupling (`dipole_am2`, A·m² per command unit) over the
/// rod's nominal, and its 1σ from the SNR; both null without a nominal.
fn gain_ratio(dipole_am2: f64, nominal_am2: Option<f64>, snr: f64) -> (Option<f64>, Option<f64>) {
    match nominal_am2 {
        Some(m0) if snr.is_finite() => (Some(dipole_am2 / m0), Some(dipole_am2 / m0 / snr)),
        Some(m0) => (Some(dipole_am2 / m0), Some(0.0)),
        None => (None, None),
    }
}

/// The model that gives the rod's expected field at the sensor (`offset_m`, rod centre
/// → sensor, body frame, m) and whether its gain ratio is meaningful there: with a
/// `length_m`, the point dipole from [`DIPOLE_VALID_ROD_LENGTHS`] rod lengths on
/// (common practice) and the two-pole model closer, so the gain stays meaningful (null
/// without a `length_m`). Warns, naming the model, when the sensor is that close.
fn field_model(
    rod: &Rod,
    offset_m: &Vector3<f64>,
    warnings: &mut Vec<PolarityWarning>,
) -> (super::finite::RodFieldModel, Option<bool>) {
    let model = super::finite::model_for(rod, offset_m);
    if model == super::finite::RodFieldModel::TwoPole {
        warnings.push(PolarityWarning::CloseToRod {
            rod: rod.name.clone(),
            distance_m: offset_m.norm(),
            needed_m: DIPOLE_VALID_ROD_LENGTHS * rod.length_m.unwrap_or(0.0),
        });
    }
    (model, rod.length_m.map(|_| true))
}
