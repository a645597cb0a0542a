//! Field of a finite torque rod: a uniformly magnetised cylinder (magnetic moment m along
//! its axis, length L, radius a), and its thin limit, the two-pole model.
//!
//! A uniformly magnetised body has no volume charge; its field outside equals that of
//! the surface magnetic charge σ = M·n̂ on the two end faces (any magnetostatics text,
//! e.g. Jackson, *Classical Electrodynamics*, 3rd ed., §5.9). With M = m / (π a² L) the
//! pole strength is q = m / L (A·m) and each face carries q spread uniformly:
//!
//! B(r) = μ0/4π · q · [⟨(r − r′)/|r − r′|³⟩₊ − ⟨(r − r′)/|r − r′|³⟩₋]
//!
//! where ⟨·⟩± is the mean over the face at z = ±L/2. The mean is taken by Gauss–Legendre
//! quadrature in radius and the trapezoidal rule in angle (spectrally accurate for a
//! periodic integrand); outside the rod and more than a radius from its faces it agrees
//! with magpylib's closed-form `Cylinder` to better than 1e-6 (tests/data/finite_rod_reference.json).
//! For a = 0 the faces shrink to two point poles ±q at ±L/2: the two-pole model.
//! Far away (r ≫ L) both reduce to the point dipole of [`super::dipole`].
//!
//! A real cored rod is magnetised more strongly at its middle than at its ends, so its
//! poles sit somewhat inside the ends: the uniform model is an approximation that
//! bounds the finite-size effect from above (docs/rods.md).

use std::sync::OnceLock;

use nalgebra::Vector3;

use super::dipole::MU0_OVER_4PI_NT_M_PER_A;

/// Gauss–Legendre nodes in radius.
const RADIAL_NODES: usize = 10;
/// Trapezoid nodes in angle.
const ANGLE_NODES: usize = 48;

/// A finite rod: length and radius of its magnetised body.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FiniteRod {
    /// Length of the magnetised body along its axis, m.
    pub length_m: f64,
    /// Radius of the magnetised body, m (0: the two-pole model).
    pub radius_m: f64,
}

impl FiniteRod {
    /// Field of the rod with moment `moment_am2` (A·m², signed, along the rod's +z axis)
    /// at `r_m` (m, rod frame: axis +z, origin at the rod's centre), rod frame, nT.
    /// `None` for a non-finite point, a degenerate rod or a point on an end face.
    pub fn field_nt(&self, moment_am2: f64, r_m: &Vector3<f64>) -> Option<Vector3<f64>> {
        let (l, a) = (self.length_m, self.radius_m);
        let valid = l.is_finite() && l > 0.0 && a.is_finite() && a >= 0.0;
        if !(valid && r_m.iter().all(|x| x.is_finite())) {
            return None;
        }
        let q = moment_am2 / l;
        let top = face_mean(r_m, l / 2.0, a)?;
        let bottom = face_mean(r_m, -l / 2.0, a)?;
        Some((top - bottom) * (MU0_OVER_4PI_NT_M_PER_A * q))
    }
}

impl FiniteRod {
    /// Field of the rod with moment `moment_am2` (A·m², signed) along the unit vector
    /// `axis` at displacement `r_m` (m) from the rod's centre, all in one frame, nT.
    pub fn field_along_nt(
        &self,
        moment_am2: f64,
        axis: &Vector3<f64>,
        r_m: &Vector3<f64>,
    ) -> Option<Vector3<f64>> {
        let z = axis.try_normalize(1e-12)?;
        let helper = if z.x.abs() < 0.9 {
            Vector3::x()
        } else {
            Vector3::y()
        };
        let x = helper.cross(&z).normalize();
        let y = z.cross(&x);
        let rod_to_frame = nalgebra::Matrix3::from_columns(&[x, y, z]);
        let b = self.field_nt(moment_am2, &(rod_to_frame.transpose() * r_m))?;
        Some(rod_to_frame * b)
    }
}

/// Field of the two-pole model of a rod of length `length_m` (m) with moment
/// `moment_am2` (A·m², its direction the rod's axis) at displacement `r_m` (m) from the
/// rod's centre, same frame, nT. `None` at a pole or for a zero moment's undefined axis
/// with a non-finite input.
pub fn two_pole_field_nt(
    moment_am2: &Vector3<f64>,
    length_m: f64,
    r_m: &Vector3<f64>,
) -> Option<Vector3<f64>> {
    let m = moment_am2.norm();
    if !(m.is_finite() && length_m.is_finite() && length_m > 0.0) {
        return None;
    }
    if m == 0.0 {
        return Some(Vector3::zeros());
    }
    let u = moment_am2 / m;
    let half = u * (length_m / 2.0);
    let pole = |p: Vector3<f64>| -> Option<Vector3<f64>> {
        let d = r_m - p;
        let n = d.norm();
        (n.is_finite() && n > 0.0).then(|| d / (n * n * n))
    };
    let q = m / length_m;
    Some((pole(half)? - pole(-half)?) * (MU0_OVER_4PI_NT_M_PER_A * q))
}

/// Mean of (r − r′)/|r − r′|³ over the disc of radius `a` at height `z` (a point pole
/// for a = 0).
fn face_mean(r: &Vector3<f64>, z: f64, a: f64) -> Option<Vector3<f64>> {
    let kernel = |p: Vector3<f64>| -> Option<Vector3<f64>> {
        let d = r - p;
        let n = d.norm();
        (n > 0.0).then(|| d / (n * n * n))
    };
    if a == 0.0 {
        return kernel(Vector3::new(0.0, 0.0, z));
    }
    let (x, w) = gauss_legendre();
    let mut sum = Vector3::zeros();
    for (xi, wi) in x.iter().zip(w) {
        let rho = a * (xi + 1.0) / 2.0;
        let mut ring = Vector3::zeros();
        for j in 0..ANGLE_NODES {
            let phi = std::f64::consts::TAU * (j as f64 + 0.5) / ANGLE_NODES as f64;
            ring += kernel(Vector3::new(rho * phi.cos(), rho * phi.sin(), z))?;
        }
        // ∫₀ᵃ ρ dρ (…) / (π a²) with the angle mean: weight w·ρ/a.
        sum += ring * (wi * rho / a / ANGLE_NODES as f64);
    }
    Some(sum)
}

/// Gauss–Legendre nodes and weights on [−1, 1] (Newton's method on the Legendre
/// polynomial; Abramowitz & Stegun 25.4.29).
fn gauss_legendre() -> &'static (Vec<f64>, Vec<f64>) {
    static NODES: OnceLock<(Vec<f64>, Vec<f64>)> = OnceLock::new();
    NODES.get_or_init(|| {
        let n = RADIAL_NODES;
        let (mut x, mut w) = (Vec::with_capacity(n), Vec::with_capacity(n));
        for i in 0..n {
            let mut t = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
            let mut dp = 1.0;
            for _ in 0..100 {
                let (mut p0, mut p1) = (1.0, t);
                for k in 2..=n {
                    let k = k as f64;
                    let p2 = ((2.0 * k - 1.0) * t * p1 - (k - 1.0) * p0) / k;
                    p0 = p1;
                    p1 = p2;
                }
                dp = n as f64 * (t * p1 - p0) / (t * t - 1.0);
                let step = p1 / dp;
                t -= step;
                if step.abs() < 1e-15 {
                    break;
                }
            }
            x.push(t);
            w.push(2.0 / ((1.0 - t * t) * dp * dp));
        }
        (x, w)
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::dipole::dipole_field_nt;
    use approx::assert_relative_eq;

    #[test]
    fn quadrature_weights_sum_to_two_and_integrate_x_to_the_18th() {
        let (x, w) = gauss_legendre();
        assert_relative_eq!(w.iter().sum::<f64>(), 2.0, max_relative = 1e-13);
        // A 10-point rule is exact for polynomials up to degree 19: ∫ x¹⁸ = 2/19.
        let i: f64 = x.iter().zip(w).map(|(x, w)| w * x.powi(18)).sum();
        assert_relative_eq!(i, 2.0 / 19.0, max_relative = 1e-12);
    }

    // Far from the rod the finite models reduce to the point dipole (Jackson 5.56).
    #[test]
    fn far_field_is_the_point_dipole() {
        let rod = FiniteRod {
            length_m: 0.07,
            radius_m: 0.004,
        };
        let r = Vector3::new(0.9, -0.5, 1.7);
        let b = rod.field_nt(0.3, &r).unwrap();
        let d = dipole_field_nt(&Vector3::new(0.0, 0.0, 0.3), &r).unwrap();
        assert_relative_eq!(b, d, max_relative = 1e-3);
        let t = two_pole_field_nt(&Vector3::new(0.0, 0.0, 0.3), 0.07, &r).unwrap();
        assert_relative_eq!(t, d, max_relative = 1e-3);
    }

    // On the axis the two-pole field is closed form: 100·q·(1/(z−L/2)² − 1/(z+L/2)²).
    #[test]
    fn a_tilted_rod_gives_the_rotated_field() {
        let rod = FiniteRod {
            length_m: 0.07,
            radius_m: 0.004,
        };
        let axis = Vector3::new(1.0, 2.0, -0.5).normalize();
        let r = Vector3::new(0.03, -0.02, 0.05);
        let thin = FiniteRod {
            radius_m: 0.0,
            ..rod
        };
        let b = thin.field_along_nt(0.2, &axis, &r).unwrap();
        let t = two_pole_field_nt(&(axis * 0.2), 0.07, &r).unwrap();
        assert_relative_eq!(b, t, max_relative = 1e-12);
        // And a thick rod along +z is the rod-frame field itself.
        let z = rod.field_along_nt(0.2, &Vector3::z(), &r).unwrap();
        assert_relative_eq!(z, rod.field_nt(0.2, &r).unwrap(), max_relative = 1e-12);
    }

    #[test]
    fn two_pole_on_axis_matches_the_closed_form() {
        let (m, l, z) = (0.2, 0.1, 0.25);
        let b =
            two_pole_field_nt(&Vector3::new(0.0, 0.0, m), l, &Vector3::new(0.0, 0.0, z)).unwrap();
        let q = m / l;
        let want = 100.0 * q * (1.0 / (z - l / 2.0).powi(2) - 1.0 / (z + l / 2.0).powi(2));
        assert_relative_eq!(b.z, want, max_relative = 1e-12);
        let thin = FiniteRod {
            length_m: l,
            radius_m: 0.0,
        };
        assert_relative_eq!(
            thin.field_nt(m, &Vector3::new(0.0, 0.0, z)).unwrap().z,
            want,
            max_relative = 1e-12
        );
    }

    // Why polarity needs the model inside a vehicle: a 7 cm rod seen from 3.6 cm at 45°
    // from its axis is about 49° off its point-dipole direction (two-pole model; the
    // closed form of the poles' fields, computed independently, gives 48.8°).
    #[test]
    fn close_rod_direction_differs_from_the_point_dipole_by_tens_of_degrees() {
        let r = Vector3::new(1.0, 0.0, 1.0).normalize() * 0.036;
        let m = Vector3::new(0.0, 0.0, 1.0);
        let b = two_pole_field_nt(&m, 0.07, &r).unwrap();
        let d = dipole_field_nt(&m, &r).unwrap();
        let angle = b.angle(&d).to_degrees();
        assert!((angle - 48.79).abs() < 0.05, "{angle}");
    }
}
