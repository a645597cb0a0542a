//! Earth's field along a circular orbit in the tilted-dipole approximation (DESIGN §8):
//! B = B0 (Re/r)³ √(1 + 3 sin²λm), λm the magnetic latitude, B0 = √(g10² + g11² + h11²)
//! from the degree-1 Gauss coefficients (Wertz 1978, appendix H).
//!
//! The coefficients below are IGRF-14 values for epoch 2025.0 **quoted from memory**
//! (g10 ≈ −29350 nT, g11 ≈ −1410 nT, h11 ≈ 4545 nT). The project's geomagnetic module
//! (`physics::geomag`) replaces this small model at merge.

/// IGRF-14 g(1,0) at 2025.0, nT (from memory).
const G10_NT: f64 = -29350.0;
/// IGRF-14 g(1,1) at 2025.0, nT (from memory).
const G11_NT: f64 = -1410.0;
/// IGRF-14 h(1,1) at 2025.0, nT (from memory).
const H11_NT: f64 = 4545.0;
/// IGRF reference radius, km.
const RE_KM: f64 = 6371.2;

/// Name of the orbit field model, as written in results.
pub const ORBIT_MODEL: &str =
    "tilted dipole, B0 from IGRF-14 degree 1 at 2025.0 (coefficients quoted from memory)";

/// Dipole strength B0 = √(g10² + g11² + h11²), nT, and the dipole axis's tilt from the
/// rotation axis, rad.
pub fn dipole_b0_nt_and_tilt_rad() -> (f64, f64) {
    let b0 = (G10_NT * G10_NT + G11_NT * G11_NT + H11_NT * H11_NT).sqrt();
    (b0, (G10_NT.abs() / b0).acos())
}

/// Largest and orbit-average field magnitude, nT, on a circular orbit at `altitude_km`
/// and `inclination_deg`. The largest is at the highest magnetic latitude the orbit
/// reaches over many days, min(90°, i′ + tilt) with i′ = min(i, 180° − i). The average
/// is over the orbit's argument of latitude (uniform in time) and over the node's
/// longitude relative to the dipole axis (the Earth turning under the orbit).
pub fn orbit_field(altitude_km: f64, inclination_deg: f64) -> (f64, f64) {
    let (b0, tilt) = dipole_b0_nt_and_tilt_rad();
    let scale = b0 * (RE_KM / (RE_KM + altitude_km)).powi(3);
    let inc = inclination_deg.to_radians();
    let reach = inc.min(std::f64::consts::PI - inc) + tilt;
    let lat_max = reach.min(std::f64::consts::FRAC_PI_2);
    let max_nt = scale * (1.0 + 3.0 * lat_max.sin().powi(2)).sqrt();

    let (n_u, n_node) = (360, 180);
    let axis = [tilt.sin(), 0.0, tilt.cos()];
    let (si, ci) = inc.sin_cos();
    let mut sum = 0.0;
    for a in 0..n_node {
        let node = std::f64::consts::TAU * (a as f64 + 0.5) / n_node as f64;
        let (so, co) = node.sin_cos();
        for k in 0..n_u {
            let u = std::f64::consts::TAU * (k as f64 + 0.5) / n_u as f64;
            let (su, cu) = u.sin_cos();
            let r = [co * cu - so * su * ci, so * cu + co * su * ci, su * si];
            let s = r[0] * axis[0] + r[1] * axis[1] + r[2] * axis[2];
            sum += (1.0 + 3.0 * s * s).sqrt();
        }
    }
    (max_nt, scale * sum / (n_u * n_node) as f64)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn polar_orbit_reaches_twice_the_equatorial_field() {
        let (b0, _) = dipole_b0_nt_and_tilt_rad();
        let scale = b0 * (RE_KM / (RE_KM + 500.0)).powi(3);
        let (max, mean) = orbit_field(500.0, 90.0);
        assert_relative_eq!(max, 2.0 * scale, max_relative = 1e-12);
        assert!(mean > scale && mean < max);
    }

    #[test]
    fn untilted_equatorial_limit_is_the_equatorial_field() {
        // For an equatorial orbit the magnetic latitude stays within ± tilt, so the
        // average lies between B_eq and B_eq·√(1 + 3 sin² tilt).
        let (b0, tilt) = dipole_b0_nt_and_tilt_rad();
        let scale = b0 * (RE_KM / (RE_KM + 500.0)).powi(3);
        let (max, mean) = orbit_field(500.0, 0.0);
        assert_relative_eq!(
            max,
            scale * (1.0 + 3.0 * tilt.sin().powi(2)).sqrt(),
            max_relative = 1e-12
        );
        assert!(mean >= scale && mean <= max);
    }

    #[test]
    fn b0_is_about_29_700_nt() {
        let (b0, tilt) = dipole_b0_nt_and_tilt_rad();
        assert!((29_600.0..29_800.0).contains(&b0), "{b0}");
        assert!((9.0..10.0).contains(&tilt.to_degrees()));
    }
}
