//! Where a spacecraft is along its orbit, and the IGRF-14 magnitude there.
//!
//! - A two-line element set is propagated with SGP4 (the `sgp4` crate, an implementation
//!   of Vallado, Crawford, Hujsak & Kelso 2006, "Revisiting Spacetrack Report #3", AIAA
//!   2006-6753; WGS-72 constants and AFSPC conventions, as element sets are made) to a
//!   position in TEME, then turned Earth-fixed by the Greenwich mean
//!   sidereal time (IAU-82 expression, as in Vallado's `gstime`), with UT1 = UTC and no
//!   polar motion (errors of a few tens of metres, far below what the field notices).
//! - Geodetic latitude, longitude and height (WGS-84) to Earth-fixed Cartesian by the
//!   usual closed form (e.g. Vallado, *Fundamentals of Astrodynamics*, §3.2, from memory).
//! - The field: the project's IGRF-14 synthesis ([`crate::physics::igrf`]) at the
//!   geocentric radius, colatitude and longitude of the Earth-fixed position.
//!
//! Units: km, s (Unix seconds, leap seconds ignored), rad inside; nT.

use std::f64::consts::PI;

use super::igrf::{
    coefficients_at_year, synthesize_geocentric, GaussCoefficients, WGS84_A_KM, WGS84_F,
};

/// Unix time of J2000 as the `sgp4` crate counts it (2000-01-01 12:00 UTC), s.
pub const J2000_UNIX_S: f64 = 946_728_000.0;

/// Seconds per Julian year.
const JULIAN_YEAR_S: f64 = 365.25 * 86_400.0;

/// A two-line element set that could not be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TleError {
    /// The lines do not parse (checksum, columns, numbers).
    #[error("the two-line element set does not parse: {0}")]
    Parse(String),
    /// SGP4 refused the elements or a time.
    #[error("SGP4 could not propagate the elements {at}: {why}")]
    Propagate {
        /// When.
        at: String,
        /// The propagator's reason.
        why: String,
    },
}

/// A parsed element set, ready to propagate.
pub struct Orbit {
    constants: sgp4::Constants,
    /// Epoch of the elements, Unix s (UTC).
    pub epoch_unix_s: f64,
    /// Inclination, deg.
    pub inclination_deg: f64,
    /// Mean motion, revolutions per day.
    pub mean_motion_rev_per_day: f64,
}

impl std::fmt::Debug for Orbit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Orbit")
            .field("epoch_unix_s", &self.epoch_unix_s)
            .field("inclination_deg", &self.inclination_deg)
            .finish()
    }
}

impl Orbit {
    /// Parse the two lines (checksums checked).
    pub fn from_tle(line1: &str, line2: &str) -> Result<Self, TleError> {
        let el = sgp4::Elements::from_tle(None, line1.trim().as_bytes(), line2.trim().as_bytes())
            .map_err(|e| TleError::Parse(e.to_string()))?;
        // WGS-72 constants and the AFSPC conventions: those the element sets are fitted
        // with, and those the published verification states were computed with.
        let constants = sgp4::Constants::from_elements_afspc_compatibility_mode(&el)
            .map_err(|e| TleError::Parse(e.to_string()))?;
        Ok(Orbit {
            constants,
            epoch_unix_s: J2000_UNIX_S + el.epoch() * JULIAN_YEAR_S,
            inclination_deg: el.inclination,
            mean_motion_rev_per_day: el.mean_motion,
        })
    }

    /// Position in TEME at `minutes` after the epoch, km.
    pub fn teme_km(&self, minutes: f64) -> Result<[f64; 3], TleError> {
        self.constants
            .propagate_afspc_compatibility_mode(sgp4::MinutesSinceEpoch(minutes))
            .map(|p| p.position)
            .map_err(|e| TleError::Propagate {
                at: format!("{minutes:.3} min after the epoch"),
                why: e.to_string(),
            })
    }

    /// Earth-fixed position at Unix time `t_unix_s`, km.
    pub fn ecef_km(&self, t_unix_s: f64) -> Result<[f64; 3], TleError> {
        let teme = self.teme_km((t_unix_s - self.epoch_unix_s) / 60.0)?;
        Ok(teme_to_ecef(teme, gmst_rad(t_unix_s)))
    }
}

/// Greenwich mean sidereal time, rad (IAU-82; UT1 taken as UTC).
pub fn gmst_rad(t_unix_s: f64) -> f64 {
    let tu = (t_unix_s - J2000_UNIX_S) / (JULIAN_YEAR_S * 100.0);
    let sec = -6.2e-6 * tu.powi(3)
        + 0.093104 * tu * tu
        + (876_600.0 * 3600.0 + 8_640_184.812_866) * tu
        + 67_310.548_41;
    (sec / 240.0).to_radians().rem_euclid(2.0 * PI)
}

/// TEME to Earth-fixed: a rotation by the sidereal angle about z.
pub fn teme_to_ecef(r: [f64; 3], gmst_rad: f64) -> [f64; 3] {
    let (s, c) = gmst_rad.sin_cos();
    [c * r[0] + s * r[1], -s * r[0] + c * r[1], r[2]]
}

/// Geodetic latitude, east longitude (deg) and height above WGS-84 (km) to Earth-fixed
/// Cartesian, km.
pub fn geodetic_to_ecef_km(lat_deg: f64, lon_deg: f64, alt_km: f64) -> [f64; 3] {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (sl, cl) = lat_deg.to_radians().sin_cos();
    let (so, co) = lon_deg.to_radians().sin_cos();
    let n = WGS84_A_KM / (1.0 - e2 * sl * sl).sqrt();
    [
        (n + alt_km) * cl * co,
        (n + alt_km) * cl * so,
        (n * (1.0 - e2) + alt_km) * sl,
    ]
}

/// Geodetic latitude of an Earth-fixed position, deg (Bowring's iteration, two steps:
/// better than 1e-6 deg in low orbit).
pub fn geodetic_latitude_deg(r: [f64; 3]) -> f64 {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let p = r[0].hypot(r[1]);
    let mut lat = r[2].atan2(p * (1.0 - e2));
    for _ in 0..3 {
        let s = lat.sin();
        let n = WGS84_A_KM / (1.0 - e2 * s * s).sqrt();
        lat = (r[2] + e2 * n * s).atan2(p);
    }
    lat.to_degrees()
}

/// Decimal year of a Unix time (year + elapsed fraction of that calendar year).
pub fn decimal_year_unix(t_unix_s: f64) -> f64 {
    let days = (t_unix_s / 86_400.0).floor();
    let date = time::Date::from_julian_day(2_440_588 + days as i32).unwrap_or(time::Date::MIN);
    let year = date.year();
    let start = time::Date::from_ordinal_date(year, 1)
        .map(|d| f64::from(d.to_julian_day() - 2_440_588) * 86_400.0)
        .unwrap_or(0.0);
    let len = if time::util::is_leap_year(year) {
        366.0
    } else {
        365.0
    };
    f64::from(year) + (t_unix_s - start) / (len * 86_400.0)
}

/// IGRF-14 coefficients for a stretch of time (the middle of it).
pub fn coefficients_for(
    t_unix_s: f64,
) -> Result<GaussCoefficients, crate::physics::igrf::GeomagError> {
    coefficients_at_year(decimal_year_unix(t_unix_s))
}

/// Magnitude of the IGRF-14 field at an Earth-fixed position, nT.
pub fn igrf_magnitude_ecef(coeffs: &GaussCoefficients, r_km: [f64; 3]) -> f64 {
    let rr = (r_km[0] * r_km[0] + r_km[1] * r_km[1] + r_km[2] * r_km[2]).sqrt();
    let theta = (r_km[2] / rr).clamp(-1.0, 1.0).acos();
    let phi = r_km[1].atan2(r_km[0]);
    let [a, b, c] = synthesize_geocentric(coeffs, rr, theta, phi);
    (a * a + b * b + c * c).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gmst_at_j2000_matches_the_published_value() {
        // GMST at 2000-01-01 12:00 UT1 is 280.46061837° (Vallado, Fundamentals, eq. 3-45
        // constant term, from memory; the IAU-82 series evaluated at T = 0).
        assert!((gmst_rad(J2000_UNIX_S).to_degrees() - 280.460_618_37).abs() < 1e-6);
    }

    #[test]
    fn geodetic_round_trip() {
        for (lat, lon, alt) in [(0.0, 0.0, 500.0), (45.0, -120.0, 600.0), (-80.0, 10.0, 0.0)] {
            let r = geodetic_to_ecef_km(lat, lon, alt);
            assert!((geodetic_latitude_deg(r) - lat).abs() < 1e-7, "{lat}");
        }
        let r = geodetic_to_ecef_km(0.0, 90.0, 0.0);
        assert!((r[1] - WGS84_A_KM).abs() < 1e-9 && r[0].abs() < 1e-9);
    }

    #[test]
    fn decimal_year_of_new_year_and_mid_year() {
        // 2026-01-01T00:00Z = 1767225600 (Unix seconds; calendar count).
        assert!((decimal_year_unix(1_767_225_600.0) - 2026.0).abs() < 1e-12);
        assert!((decimal_year_unix(1_767_225_600.0 + 182.5 * 86_400.0) - 2026.5).abs() < 1e-12);
    }
}
