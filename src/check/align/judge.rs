//! From the fit to verdicts (definitions: docs/alignment.md): which branch of the
//! (A, F) ~ (−A, −F) ambiguity the field's sign picks, each body axis against the plan,
//! handedness, and the misalignment rotation with its σ.

use nalgebra::{Matrix3, Vector3};

use super::result::{AxisResult, AxisVerdict, Handedness};
use crate::fit::align::AlignFit;
use crate::fit::wahba::{nearest_signed_permutation, rotation_vector, signed_axis};

const AXES: [&str; 3] = ["x", "y", "z"];

/// Share of |F| the vertical component must reach for its sign to count (≈ 3° off
/// horizontal; common practice, so that noise cannot flip the decision).
const MIN_VERTICAL_SHARE: f64 = 0.05;

/// A body axis moved by a rotation about `n` when `|n × axis|` exceeds this.
const TOUCH: f64 = 0.1;

/// The fit with the sign chosen, and how it was chosen.
#[derive(Debug, Clone)]
pub struct Signed {
    /// Sensor → body.
    pub a: Matrix3<f64>,
    /// Field, table frame, nT.
    pub field_nt: Vector3<f64>,
    /// Whether the field's sign decided (else the plan-closest explanation was taken).
    pub sign_known: bool,
}

/// Pick the branch: by the reference field's vertical sign when it is known and the
/// field is not nearly horizontal, else the branch whose axes agree with the plan most
/// (ties: the proper rotation).
pub fn choose_sign(fit: &AlignFit, reference_up_nt: Option<f64>, plan: &Matrix3<f64>) -> Signed {
    let f = fit.field_table_nt;
    let vertical = f.z.abs() >= MIN_VERTICAL_SHARE * f.norm();
    if let Some(up) = reference_up_nt.filter(|u| *u != 0.0 && vertical) {
        let s = up.signum() * f.z.signum();
        return Signed {
            a: fit.sensor_to_body * s,
            field_nt: f * s,
            sign_known: true,
        };
    }
    let planned = nearest_signed_permutation(plan);
    let agree = |m: &Matrix3<f64>| {
        let p = nearest_signed_permutation(m);
        (0..3).filter(|i| p.row(*i) == planned.row(*i)).count()
    };
    let pos = fit.sensor_to_body;
    let neg = -fit.sensor_to_body;
    let s = match agree(&pos).cmp(&agree(&neg)) {
        std::cmp::Ordering::Greater => 1.0,
        std::cmp::Ordering::Less => -1.0,
        std::cmp::Ordering::Equal => pos.determinant().signum(),
    };
    Signed {
        a: pos * s,
        field_nt: f * s,
        sign_known: false,
    }
}

/// Whether a rotation about any of `null` moves body axis `i`.
fn touched(null: &[Vector3<f64>], i: usize) -> bool {
    let e = Vector3::ith(i, 1.0);
    null.iter().any(|n| n.cross(&e).norm() > TOUCH)
}

/// Each body axis against the plan's mapping.
pub fn axes(a: &Matrix3<f64>, plan: &Matrix3<f64>, null: &[Vector3<f64>]) -> Vec<AxisResult> {
    let p = nearest_signed_permutation(a);
    let q = nearest_signed_permutation(plan);
    (0..3)
        .map(|i| {
            let row = |m: &Matrix3<f64>| [m[(i, 0)], m[(i, 1)], m[(i, 2)]];
            let planned = signed_axis(&row(&q));
            let measured = signed_axis(&row(&p));
            let verdict = if touched(null, i) {
                AxisVerdict::Inconclusive
            } else if measured == planned {
                AxisVerdict::Ok
            } else if measured[1..] == planned[1..] {
                AxisVerdict::Flipped
            } else {
                AxisVerdict::Swapped
            };
            AxisResult {
                axis: AXES[i],
                verdict,
                measured: (verdict != AxisVerdict::Inconclusive).then_some(measured),
                planned,
            }
        })
        .collect()
}

/// Handedness from the measured mapping's determinant, when the field's sign decided.
pub fn handedness(signed: &Signed) -> Handedness {
    match (signed.sign_known, signed.a.determinant() > 0.0) {
        (false, _) => Handedness::Inconclusive,
        (true, true) => Handedness::Right,
        (true, false) => Handedness::Mirrored,
    }
}

/// The misalignment: rotation vector (body frame, rad) from the reference mapping to
/// the measured one, its per-component σ (rad), null where unobservable, and the total
/// angle with its σ (rad).
#[derive(Debug, Clone)]
pub struct Misalignment {
    /// Components, rad.
    pub vector_rad: [Option<f64>; 3],
    /// 1σ per component, rad.
    pub sigma_rad: [Option<f64>; 3],
    /// |φ| over observable components, rad.
    pub total_rad: f64,
    /// Its 1σ, rad: `√(φ̂ᵀ C φ̂)` when |φ| is well above its noise, else `√tr C`
    /// (the noise floor of a length near zero).
    pub total_sigma_rad: f64,
}

/// The misalignment of `a` against `reference` (same handedness).
pub fn misalignment(
    a: &Matrix3<f64>,
    reference: &Matrix3<f64>,
    cov: &Matrix3<f64>,
    null: &[Vector3<f64>],
) -> Misalignment {
    let phi = rotation_vector(&(a * reference.transpose()));
    let seen = |i: usize| !null.iter().any(|n| n[i].abs() > TOUCH);
    let mut kept = Vector3::zeros();
    let mut vector_rad = [None; 3];
    let mut sigma_rad = [None; 3];
    for i in 0..3 {
        if seen(i) {
            kept[i] = phi[i];
            vector_rad[i] = Some(phi[i]);
            sigma_rad[i] = Some(cov[(i, i)].max(0.0).sqrt());
        }
    }
    let total_rad = kept.norm();
    let floor = cov.trace().max(0.0).sqrt();
    let total_sigma_rad = if total_rad > 3.0 * floor {
        let u = kept / total_rad;
        (u.transpose() * cov * u)[(0, 0)].max(0.0).sqrt()
    } else {
        floor
    };
    Misalignment {
        vector_rad,
        sigma_rad,
        total_rad,
        total_sigma_rad,
    }
}
