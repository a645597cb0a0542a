//! Unit tests of the dipole approximation: B0 against its definition from g10, g11, h11
//! (values from ppigrf 2.1.0's IGRF-14 table, tests/data/igrf_reference.json), the
//! dipole formula's textbook limits, the orbit average against independent 1-D
//! integrals, and the dipole model against the full IGRF-14 synthesis.

use super::*;
use approx::assert_relative_eq;
use serde::Deserialize;
use time::macros::date;

#[derive(Deserialize)]
struct Reference {
    b0: Vec<RefB0>,
}

#[derive(Deserialize)]
struct RefB0 {
    date: String,
    g10: f64,
    g11: f64,
    h11: f64,
    b0_nt: f64,
}

/// B0 = √(g10² + g11² + h11²) with g10, g11, h11 interpolated by ppigrf 2.1.0 (PyPI)
/// from its IGRF14.shc; ppigrf interpolates linearly in days, magproof in decimal
/// years, so mid-epoch dates differ by a few hundredths of a nT.
#[test]
fn b0_matches_its_definition_from_ppigrf_coefficients() {
    let text = include_str!("../../tests/data/igrf_reference.json");
    let r: Reference = serde_json::from_str(text).unwrap();
    assert!(r.b0.len() >= 3);
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    for e in &r.b0 {
        let d = Date::parse(&e.date, &fmt).unwrap();
        let by_definition = (e.g10 * e.g10 + e.g11 * e.g11 + e.h11 * e.h11).sqrt();
        assert_relative_eq!(by_definition, e.b0_nt, epsilon = 1e-9);
        let b0 = dipole_b0_nt(d).unwrap();
        assert!(
            (b0 - e.b0_nt).abs() < 0.1,
            "{}: {b0} vs {}",
            e.date,
            e.b0_nt
        );
    }
}

#[test]
fn b0_at_2020_epoch_is_the_table_value() {
    // IGRF-14 2020.0: g10 = −29403.41, g11 = −1451.37, h11 = 4653.35 (IAGA table).
    let want = (29403.41f64.powi(2) + 1451.37f64.powi(2) + 4653.35f64.powi(2)).sqrt();
    assert_relative_eq!(
        dipole_b0_nt(date!(2020 - 01 - 01)).unwrap(),
        want,
        epsilon = 1e-9
    );
    // Tilt acos(29403.41 / B0) = 9.41° in 2020.0.
    let tilt = dipole_tilt_rad(date!(2020 - 01 - 01)).unwrap().to_degrees();
    assert!((tilt - 9.4128).abs() < 1e-3, "{tilt}");
}

#[test]
fn dipole_magnitude_doubles_from_equator_to_pole_and_falls_as_r_cubed() {
    let b0 = 30_000.0;
    let re = REFERENCE_RADIUS_KM;
    assert_relative_eq!(dipole_magnitude_nt(b0, re, 0.0), b0, max_relative = 1e-12);
    let pole = dipole_magnitude_nt(b0, re, std::f64::consts::FRAC_PI_2);
    assert_relative_eq!(pole, 2.0 * b0, max_relative = 1e-12);
    let far = dipole_magnitude_nt(b0, 2.0 * re, 0.3);
    assert_relative_eq!(
        far * 8.0,
        dipole_magnitude_nt(b0, re, 0.3),
        max_relative = 1e-12
    );
}

/// Simpson's rule on a 1-D periodic integral, for checking the 2-D average.
fn simpson_mean(f: impl Fn(f64) -> f64) -> f64 {
    let n = 2000;
    let h = std::f64::consts::TAU / n as f64;
    let mut s = f(0.0) + f(std::f64::consts::TAU);
    for k in 1..n {
        s += f(k as f64 * h) * if k % 2 == 1 { 4.0 } else { 2.0 };
    }
    s * h / 3.0 / std::f64::consts::TAU
}

#[test]
fn orbit_average_matches_one_dimensional_integrals() {
    // No tilt, equatorial orbit: always on the magnetic equator.
    assert_relative_eq!(mean_dipole_factor(0.0, 0.0), 1.0, epsilon = 1e-12);
    // No tilt, polar orbit: λm = u, mean of √(1 + 3 sin²u).
    let polar = simpson_mean(|u| (1.0 + 3.0 * u.sin().powi(2)).sqrt());
    let got = mean_dipole_factor(std::f64::consts::FRAC_PI_2, 0.0);
    assert_relative_eq!(got, polar, epsilon = 1e-9);
    // Equatorial orbit, tilt θ0: sin λm = sin θ0 cos ψ, mean over ψ.
    let t: f64 = 0.17;
    let want = simpson_mean(|p| (1.0 + 3.0 * (t.sin() * p.cos()).powi(2)).sqrt());
    assert_relative_eq!(mean_dipole_factor(0.0, t), want, epsilon = 1e-9);
}

#[test]
fn orbit_field_max_exceeds_mean_and_retrograde_mirrors_prograde() {
    let d = date!(2026 - 06 - 01);
    let iss = orbit_field_nt(420.0, 51.6, d).unwrap();
    assert!(iss.max_nt > iss.mean_nt);
    let retro = orbit_field_nt(420.0, 180.0 - 51.6, d).unwrap();
    assert_relative_eq!(iss.max_nt, retro.max_nt, max_relative = 1e-12);
    assert_relative_eq!(iss.mean_nt, retro.mean_nt, max_relative = 1e-9);
    // Polar orbit reaches the magnetic pole: Bmax = 2 B0 (Re/r)³.
    let polar = orbit_field_nt(500.0, 90.0, d).unwrap();
    let k = REFERENCE_RADIUS_KM / (REFERENCE_RADIUS_KM + 500.0);
    assert_relative_eq!(
        polar.max_nt,
        2.0 * polar.b0_nt * k.powi(3),
        max_relative = 1e-12
    );
}

/// The dipole average against the full IGRF-14 field averaged the same way (node
/// longitude = geographic longitude of the ascending node, phase uniform): the
/// higher-degree terms shift the mean |B| little (measured 0.15 % at 500 km SSO, 2025).
#[test]
fn orbit_mean_is_close_to_full_igrf_average() {
    let d = date!(2025 - 01 - 01);
    let (alt_km, inc_deg) = (500.0, 97.4);
    let dip = orbit_field_nt(alt_km, inc_deg, d).unwrap();
    let (si, ci) = inc_deg.to_radians().sin_cos();
    let steps = 48;
    let mut sum = 0.0;
    let mut max: f64 = 0.0;
    for a in 0..steps {
        let om = (a as f64 + 0.5) / steps as f64 * std::f64::consts::TAU;
        for b in 0..steps {
            let u = (b as f64 + 0.5) / steps as f64 * std::f64::consts::TAU;
            let (x, y, z) = (
                om.cos() * u.cos() - om.sin() * u.sin() * ci,
                om.sin() * u.cos() + om.cos() * u.sin() * ci,
                u.sin() * si,
            );
            let lat = z.asin().to_degrees();
            let lon = y.atan2(x).to_degrees();
            // Spherical Earth of radius Re: height above the ellipsoid only approximately.
            let f = igrf_field(lat, lon, alt_km * 1000.0, d).unwrap();
            sum += f.total_nt;
            max = max.max(f.total_nt);
        }
    }
    let mean = sum / (steps * steps) as f64;
    eprintln!(
        "500 km SSO: dipole mean {:.0} max {:.0}; IGRF mean {mean:.0} max {max:.0} nT",
        dip.mean_nt, dip.max_nt
    );
    assert!((dip.mean_nt / mean - 1.0).abs() < 0.02);
    // The dipole maximum underestimates the real one (south-polar high, common knowledge).
    assert!(dip.max_nt < max);
}

#[test]
fn bad_orbits_are_refused() {
    let d = date!(2026 - 01 - 01);
    assert!(orbit_field_nt(-1.0, 50.0, d).is_err());
    assert!(orbit_field_nt(500.0, 181.0, d).is_err());
    assert!(orbit_field_nt(f64::NAN, 50.0, d).is_err());
    assert!(orbit_field_nt(500.0, 50.0, date!(2031 - 01 - 01)).is_err());
}

fn site(reference_nt: Option<f64>, date: Option<Date>) -> GeoSite {
    GeoSite {
        lat_deg: 47.0,
        lon_deg: 8.0,
        alt_m: 400.0,
        date,
        reference_nt,
    }
}

#[test]
fn site_reference_prefers_the_plan_then_the_model() {
    let r = site_reference(&site(Some(48_000.0), None)).unwrap();
    assert_eq!(r.source, ReferenceSource::Plan);
    assert_relative_eq!(r.total_nt, 48_000.0);
    let d = date!(2026 - 11 - 20);
    let r = site_reference(&site(None, Some(d))).unwrap();
    assert_eq!(r.source, ReferenceSource::Igrf14);
    let f = igrf_field(47.0, 8.0, 400.0, d).unwrap();
    assert_relative_eq!(r.total_nt, f.total_nt);
    let e = site_reference(&site(None, None)).unwrap_err();
    assert!(e.to_string().contains("date"), "{e}");
    assert!(site_reference(&site(Some(-5.0), None)).is_err());
}
