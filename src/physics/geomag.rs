//! The Earth's field in the dipole approximation, for orbit torques, and the reference
//! field magnitude of a test site (the plan's `[site]`) for a tumble calibration.
//!
//! Dipole model (centred, tilted dipole; Wertz, *Spacecraft Attitude Determination and
//! Control*, 1978, §5.1 and App. H — cited from memory; the same form is in most
//! geomagnetism texts): the degree-1 IGRF terms describe a dipole of equatorial surface
//! strength B0 = √(g10² + g11² + h11²) at the reference radius Re = 6371.2 km, whose
//! axis is tilted from the spin axis by θ0 = acos(−g10 / B0) (9.2° in 2025). At
//! geocentric distance r and magnetic latitude λm the magnitude is
//! B = B0 (Re/r)³ √(1 + 3 sin²λm).
//!
//! For a circular orbit we take r = Re + altitude (a spherical Earth of radius Re; the
//! 21 km WGS-84 equator-to-pole difference changes (Re/r)³ by under 1% at 400 km).

use serde::Serialize;
use time::Date;

use super::igrf::{coefficients_on, igrf_field, GeomagError, REFERENCE_RADIUS_KM};

/// Equatorial dipole field at the reference radius, B0 = √(g10² + g11² + h11²), nT,
/// from the IGRF-14 coefficients on `date`.
pub fn dipole_b0_nt(date: Date) -> Result<f64, GeomagError> {
    let c = coefficients_on(date)?;
    Ok((c.g(1, 0).powi(2) + c.g(1, 1).powi(2) + c.h(1, 1).powi(2)).sqrt())
}

/// Tilt of the dipole axis from the Earth's spin axis, rad: θ0 = acos(−g10 / B0).
pub fn dipole_tilt_rad(date: Date) -> Result<f64, GeomagError> {
    let c = coefficients_on(date)?;
    let b0 = (c.g(1, 0).powi(2) + c.g(1, 1).powi(2) + c.h(1, 1).powi(2)).sqrt();
    Ok((-c.g(1, 0) / b0).clamp(-1.0, 1.0).acos())
}

/// Dipole field magnitude, nT, at geocentric distance `r_km` and magnetic latitude
/// `magnetic_lat_rad`: B0 (Re/r)³ √(1 + 3 sin²λm).
pub fn dipole_magnitude_nt(b0_nt: f64, r_km: f64, magnetic_lat_rad: f64) -> f64 {
    let k = REFERENCE_RADIUS_KM / r_km;
    b0_nt * k * k * k * (1.0 + 3.0 * magnetic_lat_rad.sin().powi(2)).sqrt()
}

/// Field magnitude seen on a circular orbit, dipole approximation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OrbitField {
    /// Largest magnitude on the orbit, nT: at the highest magnetic latitude reached,
    /// λmax = min(i′ + θ0, 90°), i′ = min(i, 180° − i).
    pub max_nt: f64,
    /// Average magnitude, nT, over orbit phase and over the longitude of the ascending
    /// node relative to the dipole axis (both uniform; see [`orbit_field_nt`]).
    pub mean_nt: f64,
    /// B0 used, nT.
    pub b0_nt: f64,
    /// Dipole tilt used, deg.
    pub tilt_deg: f64,
    /// Geocentric orbit radius Re + altitude, km.
    pub radius_km: f64,
}

/// Grid size per angle of the orbit average (midpoint rule on a periodic, smooth
/// integrand: converged far below 0.01 nT at this size).
const AVERAGE_STEPS: usize = 128;

/// Maximum and average dipole field magnitude on a circular orbit of `altitude_km`
/// (above Re = 6371.2 km) and `inclination_deg` (0..180) on `date`.
///
/// The average is over the orbit phase u and the longitude Ω of the ascending node
/// relative to the dipole axis, both uniform: the Earth turns under the orbit once a
/// day, so over days every Ω occurs equally often. With the dipole axis
/// m̂ = (sin θ0, 0, cos θ0) and the position
/// r̂ = (cos Ω cos u − sin Ω sin u cos i, sin Ω cos u + cos Ω sin u cos i, sin u sin i),
/// sin λm = r̂ · m̂; the double integral of √(1 + 3 sin²λm) is taken by the midpoint rule
/// on a 128 × 128 grid. The eccentric offset of the dipole and all higher-degree terms
/// are left out: the real field at a given orbit point can differ by 10–20 % (compare
/// [`super::igrf::igrf_field`]).
pub fn orbit_field_nt(
    altitude_km: f64,
    inclination_deg: f64,
    date: Date,
) -> Result<OrbitField, GeomagError> {
    if !(altitude_km.is_finite() && altitude_km >= 0.0) {
        return Err(GeomagError::Orbit(format!(
            "orbit altitude {altitude_km} km must be a finite number >= 0"
        )));
    }
    if !(inclination_deg.is_finite() && (0.0..=180.0).contains(&inclination_deg)) {
        return Err(GeomagError::Orbit(format!(
            "orbit inclination {inclination_deg} deg is not within 0..180"
        )));
    }
    let b0_nt = dipole_b0_nt(date)?;
    let tilt = dipole_tilt_rad(date)?;
    let radius_km = REFERENCE_RADIUS_KM + altitude_km;
    let inc = inclination_deg.to_radians();
    let inc_prograde = inc.min(std::f64::consts::PI - inc);
    let lat_max = (inc_prograde + tilt).min(std::f64::consts::FRAC_PI_2);
    let max_nt = dipole_magnitude_nt(b0_nt, radius_km, lat_max);

    let k = REFERENCE_RADIUS_KM / radius_km;
    let mean_nt = b0_nt * k * k * k * mean_dipole_factor(inc, tilt);
    Ok(OrbitField {
        max_nt,
        mean_nt,
        b0_nt,
        tilt_deg: tilt.to_degrees(),
        radius_km,
    })
}

/// Average of √(1 + 3 sin²λm) over orbit phase and node longitude (see
/// [`orbit_field_nt`]) for inclination `inc_rad` and dipole tilt `tilt_rad`.
fn mean_dipole_factor(inc_rad: f64, tilt_rad: f64) -> f64 {
    let (st, ct) = tilt_rad.sin_cos();
    let (si, ci) = inc_rad.sin_cos();
    let step = std::f64::consts::TAU / AVERAGE_STEPS as f64;
    let mut sum = 0.0;
    for a in 0..AVERAGE_STEPS {
        let (so, co) = ((a as f64 + 0.5) * step).sin_cos();
        for b in 0..AVERAGE_STEPS {
            let (su, cu) = ((b as f64 + 0.5) * step).sin_cos();
            // r̂·m̂ with m̂ = (sin θ0, 0, cos θ0).
            let sin_lat = (co * cu - so * su * ci) * st + su * si * ct;
            sum += (1.0 + 3.0 * sin_lat * sin_lat).sqrt();
        }
    }
    sum / (AVERAGE_STEPS * AVERAGE_STEPS) as f64
}

/// Where a site's reference magnitude came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ReferenceSource {
    /// `reference_nt` written in the plan's `[site]`.
    Plan,
    /// IGRF-14 at the site's position and date.
    Igrf14,
}

/// A test site as the geomagnetic model needs it: geodetic position, date, and an
/// optional measured field magnitude that overrides the model. (The plan's `[site]`
/// table is read into this by the plan reader.)
#[derive(Debug, Clone, PartialEq)]
pub struct GeoSite {
    /// Geodetic latitude, deg (−90..90).
    pub lat_deg: f64,
    /// Longitude, deg east.
    pub lon_deg: f64,
    /// Altitude above the WGS-84 ellipsoid, m.
    pub alt_m: f64,
    /// Date of the test (the model's epoch); needed unless `reference_nt` is given.
    pub date: Option<Date>,
    /// Measured reference field magnitude, nT; overrides the model when given.
    pub reference_nt: Option<f64>,
}

/// The reference field magnitude of a test site.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteReference {
    /// Total field magnitude, nT.
    pub total_nt: f64,
    /// Where it came from.
    pub source: ReferenceSource,
}

/// Reference field magnitude for a tumble calibration at `site`: its `reference_nt` if
/// the plan gives one (the plan beats the model, see `docs/geomagnetic.md`), else
/// IGRF-14 at its latitude, longitude, altitude and date. A site without either a
/// reference or a date is refused, naming `[site] date`.
pub fn site_reference(site: &GeoSite) -> Result<SiteReference, GeomagError> {
    if let Some(total_nt) = site.reference_nt {
        if !(total_nt.is_finite() && total_nt > 0.0) {
            return Err(GeomagError::Site(format!(
                "[site] reference_nt = {total_nt} must be a positive field magnitude in nT"
            )));
        }
        return Ok(SiteReference {
            total_nt,
            source: ReferenceSource::Plan,
        });
    }
    let date = site.date.ok_or_else(|| {
        GeomagError::Site(
            "[site] has neither reference_nt nor date; the geomagnetic model needs the date \
             of the test (date = \"YYYY-MM-DD\")"
                .into(),
        )
    })?;
    let f = igrf_field(site.lat_deg, site.lon_deg, site.alt_m, date)?;
    Ok(SiteReference {
        total_nt: f.total_nt,
        source: ReferenceSource::Igrf14,
    })
}

#[cfg(test)]
#[path = "geomag_tests.rs"]
mod tests;
