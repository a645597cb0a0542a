//! Frames and rotations: sensor (S), body (B), lab/table (L), cage (C); how plans write
//! them is in `docs/formats.md` (Rotations).
//!
//! A rotation named `a_to_b` maps a vector's coordinates in frame a to frame b:
//! `v_b = a_to_b * v_a`. Plans may write a rotation as axis shorthand, a list of three
//! signed axes: element i names the signed axis of the source frame that axis i of the
//! target frame equals. `["+x", "-z", "+y"]` is the matrix with rows
//! `(1,0,0)`, `(0,0,-1)`, `(0,1,0)`.

use nalgebra::{Matrix3, Vector3};

/// Tolerance on orthonormality and on det = +1 for rotations read from files.
pub const ROTATION_TOLERANCE: f64 = 1e-6;

/// Build a rotation from axis shorthand such as `["+x", "-z", "+y"]`.
/// Returns a message saying what is wrong otherwise.
pub fn rotation_from_axes(axes: &[&str]) -> Result<Matrix3<f64>, String> {
    if axes.len() != 3 {
        return Err(format!("expected 3 signed axes, found {}", axes.len()));
    }
    let mut m = Matrix3::zeros();
    for (row, text) in axes.iter().enumerate() {
        let t = text.trim();
        let (sign, axis) = match t.as_bytes() {
            [b'+', a] => (1.0, *a),
            [b'-', a] => (-1.0, *a),
            [a] => (1.0, *a),
            _ => {
                return Err(format!(
                    "\"{t}\" is not a signed axis such as \"+x\" or \"-z\""
                ))
            }
        };
        let col = match axis.to_ascii_lowercase() {
            b'x' => 0,
            b'y' => 1,
            b'z' => 2,
            _ => {
                return Err(format!(
                    "\"{t}\" is not a signed axis such as \"+x\" or \"-z\""
                ))
            }
        };
        m[(row, col)] = sign;
    }
    check_rotation(&m)?;
    Ok(m)
}

/// Check that `m` is a proper rotation: orthonormal and det = +1 within
/// [`ROTATION_TOLERANCE`].
pub fn check_rotation(m: &Matrix3<f64>) -> Result<(), String> {
    if m.iter().any(|v| !v.is_finite()) {
        return Err("the matrix has a non-finite element".into());
    }
    let err = (m * m.transpose() - Matrix3::identity()).abs().max();
    if err > ROTATION_TOLERANCE {
        return Err(format!(
            "not orthonormal: |R·Rᵀ − I| reaches {err:.3e} (tolerance {ROTATION_TOLERANCE:.0e})"
        ));
    }
    let det = m.determinant();
    if (det - 1.0).abs() > ROTATION_TOLERANCE {
        return Err(format!(
            "determinant is {det:.6}, not +1: this is a reflection, not a rotation (check the signs)"
        ));
    }
    Ok(())
}

/// Rotation about +z by `angle_rad` (right-handed), as a matrix mapping coordinates in
/// the rotated (turntable-top) frame to the fixed table frame.
pub fn rotation_z(angle_rad: f64) -> Matrix3<f64> {
    let (s, c) = angle_rad.sin_cos();
    Matrix3::new(c, -s, 0.0, s, c, 0.0, 0.0, 0.0, 1.0)
}

/// Unit vector along `v`, or `None` when `v` is zero or not finite.
pub fn unit(v: &Vector3<f64>) -> Option<Vector3<f64>> {
    let n = v.norm();
    if n.is_finite() && n > 0.0 {
        Some(v / n)
    } else {
        None
    }
}

/// Angle between two vectors, rad (0..π). `None` if either is zero.
pub fn angle_between(a: &Vector3<f64>, b: &Vector3<f64>) -> Option<f64> {
    let (ua, ub) = (unit(a)?, unit(b)?);
    // atan2 form is accurate near 0 and π, unlike acos of the dot product.
    Some(ua.cross(&ub).norm().atan2(ua.dot(&ub)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn shorthand_rows_name_source_axes() {
        let r = rotation_from_axes(&["+x", "-z", "+y"]).unwrap();
        // body y = sensor -z: a sensor +z vector appears as body -y.
        let v_b = r * Vector3::new(0.0, 0.0, 1.0);
        assert_relative_eq!(v_b, Vector3::new(0.0, -1.0, 0.0));
    }

    #[test]
    fn reflections_and_repeats_are_refused() {
        assert!(rotation_from_axes(&["+x", "+y", "-z"]).is_err());
        assert!(rotation_from_axes(&["+x", "+x", "+z"]).is_err());
        assert!(rotation_from_axes(&["+q", "+y", "+z"]).is_err());
    }

    #[test]
    fn rotation_z_is_right_handed() {
        let v = rotation_z(std::f64::consts::FRAC_PI_2) * Vector3::x();
        assert_relative_eq!(v, Vector3::y(), epsilon = 1e-15);
    }

    #[test]
    fn angle_between_is_accurate_near_zero() {
        let a = Vector3::new(1.0, 0.0, 0.0);
        let b = Vector3::new(1.0, 1e-9, 0.0);
        assert_relative_eq!(angle_between(&a, &b).unwrap(), 1e-9, max_relative = 1e-6);
    }
}
