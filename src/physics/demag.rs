//! Demagnetising factor of a rod core and the apparent gain of a cored torque rod.
//!
//! The core is approximated by a prolate ellipsoid of revolution of the core's aspect
//! ratio k = length / diameter, whose axial demagnetising factor is closed form (Osborn,
//! "Demagnetizing factors of the general ellipsoid", *Phys. Rev.* 67, 351, 1945):
//!
//! N = 1/(k² − 1) · [k / √(k² − 1) · ln(k + √(k² − 1)) − 1]   (k > 1),
//!
//! with N = 1/3 for a sphere and the oblate form for k < 1. A cylinder is not an
//! ellipsoid: its magnetisation is not uniform and its (magnetometric) demagnetising
//! factor differs from the ellipsoid's by tens of per cent at aspect ratios of 10–100
//! (Chen, Brug & Goldfarb, "Demagnetizing factors for cylinders", *IEEE Trans. Magn.* 27,
//! 3601, 1991). The predicted core gain is therefore an approximation to compare a
//! measurement with, not a limit.

/// Axial demagnetising factor of an ellipsoid of revolution with aspect ratio
/// `aspect` = axial length / equatorial diameter (Osborn 1945), dimensionless in 0..1.
/// `None` for a non-positive or non-finite aspect ratio.
pub fn ellipsoid_demag_factor(aspect: f64) -> Option<f64> {
    if !(aspect.is_finite() && aspect > 0.0) {
        return None;
    }
    let k = aspect;
    if (k - 1.0).abs() < 1e-6 {
        return Some(1.0 / 3.0);
    }
    if k > 1.0 {
        let s = (k * k - 1.0).sqrt();
        Some((k / s * (k + s).ln() - 1.0) / (k * k - 1.0))
    } else {
        let s = (1.0 - k * k).sqrt();
        Some((1.0 - k / s * k.acos()) / (1.0 - k * k))
    }
}

/// Gain of a cored rod over its air-core moment, N·A·[1 + (μr − 1)/(1 + N_d(μr − 1))]
/// divided by N·A: `1 + (μr − 1)/(1 + demag·(μr − 1))`.
pub fn cored_gain(mu_r: f64, demag: f64) -> f64 {
    1.0 + (mu_r - 1.0) / (1.0 + demag * (mu_r - 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    // Handbook table of Osborn's prolate-ellipsoid factor (Chikazumi, *Physics of
    // Ferromagnetism*, 2nd ed., 1997, Table 2.1; values quoted from memory, each
    // reproduced by Osborn's closed form above to the digits shown).
    #[test]
    fn prolate_factors_match_the_handbook_table() {
        for (k, n) in [
            (1.0, 0.3333),
            (2.0, 0.1735),
            (5.0, 0.0558),
            (10.0, 0.0203),
            (20.0, 0.00675),
            (50.0, 0.00144),
            (100.0, 0.000430),
        ] {
            let got = ellipsoid_demag_factor(k).unwrap();
            assert_relative_eq!(got, n, max_relative = 3e-3);
        }
    }

    // The three factors of an ellipsoid sum to 1: a long rod's transverse factor tends
    // to 1/2, a flat disc's axial factor to 1 (Osborn 1945).
    #[test]
    fn limits_of_needle_and_disc() {
        assert!(ellipsoid_demag_factor(1e4).unwrap() < 1e-6);
        assert_relative_eq!(ellipsoid_demag_factor(1e-4).unwrap(), 1.0, epsilon = 1e-3);
        assert!(ellipsoid_demag_factor(0.0).is_none());
    }

    #[test]
    fn a_strong_core_gains_about_one_over_n() {
        let n = ellipsoid_demag_factor(20.0).unwrap();
        assert_relative_eq!(cored_gain(1e6, n), 1.0 + 1.0 / n, max_relative = 1e-3);
        assert_relative_eq!(cored_gain(1.0, n), 1.0);
    }
}
