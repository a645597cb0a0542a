//! Field of a point magnetic dipole.
//!
//! B(r) = μ0/(4π r³) · (3 (m·r̂) r̂ − m)  (any electrodynamics text, e.g. Jackson,
//! *Classical Electrodynamics*, 3rd ed., eq. 5.56). With μ0/4π = 1e-7 T·m/A and the
//! field in nT, the prefactor is 100 nT·m³/(A·m²).
//!
//! μ0/4π is taken as exactly 1e-7 T·m/A; since the 2019 SI redefinition it is
//! 1.000 000 000 55e-7, a difference of 5.5e-10 relative, far below any test's noise.

use nalgebra::{Matrix3, Vector3};

/// μ0/4π in nT·m/A (1e-7 T·m/A).
pub const MU0_OVER_4PI_NT_M_PER_A: f64 = 100.0;

/// Field of a dipole `moment_am2` (A·m²) at displacement `r_m` (m) from it, in nT, in the
/// same frame as both inputs. Returns `None` at r = 0.
pub fn dipole_field_nt(moment_am2: &Vector3<f64>, r_m: &Vector3<f64>) -> Option<Vector3<f64>> {
    Some(dipole_matrix(r_m)? * moment_am2)
}

/// The 3×3 matrix G (nT per A·m²) with B = G · m for a dipole at displacement `r_m`:
/// G = μ0/(4π r³) (3 r̂ r̂ᵀ − I). Symmetric. `None` at r = 0 or non-finite r.
pub fn dipole_matrix(r_m: &Vector3<f64>) -> Option<Matrix3<f64>> {
    let r = r_m.norm();
    if !(r.is_finite() && r > 0.0) {
        return None;
    }
    let u = r_m / r;
    Some((3.0 * u * u.transpose() - Matrix3::identity()) * (MU0_OVER_4PI_NT_M_PER_A / (r * r * r)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    // Textbook special cases (Jackson 5.56): on the axis B = 2·(μ0/4π)·m/r³ along m;
    // broadside (equatorial) B = −(μ0/4π)·m/r³, opposite to m.
    #[test]
    fn on_axis_field_is_twice_equatorial_and_along_m() {
        let m = Vector3::new(0.0, 0.0, 0.2);
        let r = 0.5;
        let on_axis = dipole_field_nt(&m, &Vector3::new(0.0, 0.0, r)).unwrap();
        let broadside = dipole_field_nt(&m, &Vector3::new(r, 0.0, 0.0)).unwrap();
        let k = 100.0 * 0.2 / (r * r * r);
        assert_relative_eq!(
            on_axis,
            Vector3::new(0.0, 0.0, 2.0 * k),
            max_relative = 1e-12
        );
        assert_relative_eq!(broadside, Vector3::new(0.0, 0.0, -k), max_relative = 1e-12);
    }

    #[test]
    fn origin_has_no_field() {
        assert!(dipole_field_nt(&Vector3::x(), &Vector3::zeros()).is_none());
    }
}
