//! Fields of coil-cage windings: a circular current loop on its axis and a Helmholtz pair.
//!
//! - Loop of N turns, radius R, current I, at axial distance z from its centre
//!   (Biot–Savart; any electromagnetism text, e.g. Griffiths, *Introduction to
//!   Electrodynamics*, 4th ed., Example 5.6):
//!   B_z = μ0 N I R² / (2 (R² + z²)^(3/2)), along the axis, right-handed about the current.
//! - Helmholtz pair (two such coils, coaxial, spaced R apart), field at the centre:
//!   B = (4/5)^(3/2) μ0 N I / R (see `docs/geomagnetic.md`, Coil fields).
//!
//! μ0 = 4π × 1e-7 T·m/A (the pre-2019 exact value; the SI 2019 value differs by 5.5e-10
//! relative). Results in nT. A geometry with a non-positive or non-finite radius gives
//! `None`.

use super::dipole::MU0_OVER_4PI_NT_M_PER_A;

/// μ0 in nT·m/A.
pub const MU0_NT_M_PER_A: f64 = 4.0 * std::f64::consts::PI * MU0_OVER_4PI_NT_M_PER_A;

fn radius_ok(radius_m: f64) -> bool {
    radius_m.is_finite() && radius_m > 0.0
}

/// Axial field, nT, of a circular loop of `turns` turns and radius `radius_m` (m) carrying
/// `current_a` (A), at `z_m` (m) along its axis from its centre. Positive along the axis
/// that the current circulates about right-handedly. `None` for a bad radius.
pub fn loop_axial_field_nt(turns: f64, current_a: f64, radius_m: f64, z_m: f64) -> Option<f64> {
    if !radius_ok(radius_m) {
        return None;
    }
    let r2 = radius_m * radius_m;
    let d = (r2 + z_m * z_m).powf(1.5);
    Some(MU0_NT_M_PER_A * turns * current_a * r2 / (2.0 * d))
}

/// Centre field, nT, of a Helmholtz pair: two coils of `turns` turns each, radius
/// `radius_m` (m), spaced one radius apart, each carrying `current_a` (A) in the same
/// sense: B = (4/5)^(3/2) μ0 N I / R. `None` for a bad radius.
pub fn helmholtz_centre_field_nt(turns: f64, current_a: f64, radius_m: f64) -> Option<f64> {
    if !radius_ok(radius_m) {
        return None;
    }
    Some(0.8f64.powf(1.5) * MU0_NT_M_PER_A * turns * current_a / radius_m)
}

/// Axial field, nT, of a Helmholtz pair at `z_m` (m) from its centre along the common
/// axis: the sum of the two coils at ±R/2. `None` for a bad radius.
pub fn helmholtz_axial_field_nt(
    turns: f64,
    current_a: f64,
    radius_m: f64,
    z_m: f64,
) -> Option<f64> {
    let half = radius_m / 2.0;
    Some(
        loop_axial_field_nt(turns, current_a, radius_m, z_m - half)?
            + loop_axial_field_nt(turns, current_a, radius_m, z_m + half)?,
    )
}

/// Current per coil, A, that gives `field_nt` (nT) at the centre of a Helmholtz pair of
/// `turns` turns per coil and radius `radius_m` (m). `None` for a bad radius or zero turns.
pub fn helmholtz_current_for_field_a(field_nt: f64, turns: f64, radius_m: f64) -> Option<f64> {
    let per_amp = helmholtz_centre_field_nt(turns, 1.0, radius_m)?;
    if per_amp == 0.0 || !per_amp.is_finite() {
        return None;
    }
    Some(field_nt / per_amp)
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use serde::Deserialize;

    #[test]
    fn loop_centre_field_is_mu0_n_i_over_2r() {
        // Textbook: B(0) = μ0 N I / (2R). 1 A, R = 0.5 m → 4π·1e-7 T = 1256.637 nT.
        let b = loop_axial_field_nt(1.0, 1.0, 0.5, 0.0).unwrap();
        assert_relative_eq!(b, 1_256.637_061_435_917, max_relative = 1e-12);
        let b = loop_axial_field_nt(10.0, 2.0, 0.25, 0.0).unwrap();
        assert_relative_eq!(b, MU0_NT_M_PER_A * 20.0 / 0.5, max_relative = 1e-12);
    }

    #[test]
    fn far_on_axis_loop_is_a_dipole() {
        // Far away a loop is a dipole m = N I π R²: B = 2 (μ0/4π) m / z³ (Jackson 5.56).
        let (n, i, r, z) = (5.0, 0.3, 0.1, 50.0);
        let m = n * i * std::f64::consts::PI * r * r;
        let want = 2.0 * MU0_OVER_4PI_NT_M_PER_A * m / (z * z * z);
        let got = loop_axial_field_nt(n, i, r, z).unwrap();
        assert_relative_eq!(got, want, max_relative = 1e-5);
    }

    #[test]
    fn helmholtz_centre_matches_closed_form_and_sum_of_loops() {
        // (4/5)^(3/2) μ0 N I / R = 0.715 541 75 · μ0 N I / R.
        let (n, i, r) = (20.0, 1.5, 0.5);
        let b = helmholtz_centre_field_nt(n, i, r).unwrap();
        assert_relative_eq!(
            b,
            0.715_541_752_799_933 * MU0_NT_M_PER_A * n * i / r,
            max_relative = 1e-12
        );
        assert_relative_eq!(
            helmholtz_axial_field_nt(n, i, r, 0.0).unwrap(),
            b,
            max_relative = 1e-12
        );
        let amps = helmholtz_current_for_field_a(b, n, r).unwrap();
        assert_relative_eq!(amps, i, max_relative = 1e-12);
    }

    #[test]
    fn helmholtz_field_is_flat_near_the_centre() {
        // The design point: first three derivatives vanish, so within ±0.1 R the axial
        // field varies by well under 0.1 % (common practice figure).
        let (n, i, r) = (50.0, 1.0, 1.0);
        let b0 = helmholtz_centre_field_nt(n, i, r).unwrap();
        for z in [-0.1, -0.05, 0.05, 0.1] {
            let b = helmholtz_axial_field_nt(n, i, r, z).unwrap();
            assert!((b / b0 - 1.0).abs() < 1e-3, "{z}: {b} vs {b0}");
        }
    }

    #[test]
    fn bad_radius_gives_none() {
        assert!(loop_axial_field_nt(1.0, 1.0, 0.0, 0.0).is_none());
        assert!(helmholtz_centre_field_nt(1.0, 1.0, -1.0).is_none());
        assert!(helmholtz_axial_field_nt(1.0, 1.0, f64::NAN, 0.0).is_none());
        assert!(helmholtz_current_for_field_a(1.0, 0.0, 1.0).is_none());
    }

    #[derive(Deserialize)]
    struct CoilRef {
        library: String,
        loops: Vec<LoopRef>,
        helmholtz_pairs: Vec<PairRef>,
    }

    #[derive(Deserialize)]
    struct LoopRef {
        current_a: f64,
        radius_m: f64,
        z_m: Vec<f64>,
        bz_nt: Vec<f64>,
    }

    #[derive(Deserialize)]
    struct PairRef {
        turns: f64,
        current_a: f64,
        radius_m: f64,
        z_m: Vec<f64>,
        bz_nt: Vec<f64>,
    }

    /// On-axis fields of loops and Helmholtz pairs computed with magpylib 6.3.0
    /// (tests/data/coil_reference.json, tests/data/gen/coil_reference.py). magpylib uses
    /// the 2019 SI μ0, 5.5e-10 relative from ours.
    #[test]
    fn loops_and_pairs_match_magpylib_on_axis() {
        let text = include_str!("../../tests/data/coil_reference.json");
        let r: CoilRef = serde_json::from_str(text).unwrap();
        assert!(r.library.starts_with("magpylib"), "{}", r.library);
        for l in &r.loops {
            assert_eq!(l.z_m.len(), l.bz_nt.len());
            for (z, want) in l.z_m.iter().zip(&l.bz_nt) {
                let got = loop_axial_field_nt(1.0, l.current_a, l.radius_m, *z).unwrap();
                assert_relative_eq!(got, *want, max_relative = 1e-8);
            }
        }
        for p in &r.helmholtz_pairs {
            for (z, want) in p.z_m.iter().zip(&p.bz_nt) {
                let got = helmholtz_axial_field_nt(p.turns, p.current_a, p.radius_m, *z).unwrap();
                assert_relative_eq!(got, *want, max_relative = 1e-8);
            }
            let centre = helmholtz_centre_field_nt(p.turns, p.current_a, p.radius_m).unwrap();
            assert_relative_eq!(centre, p.bz_nt[0], max_relative = 1e-8);
        }
    }
}
