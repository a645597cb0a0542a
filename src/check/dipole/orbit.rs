//! Earth's field along a circular orbit, for the disturbance torque τ = m × B
//! (docs/dipole.md): worst case |m|·Bmax and orbit average |m|·B̄.
//!
//! - Bmax: the largest total field of the full IGRF-14 model (`physics::igrf`) at the
//!   orbit's altitude over every longitude and the latitudes the orbit reaches
//!   (|lat| ≤ i′ = min(i, 180° − i)), searched on a 5° grid and refined by a pattern search
//!   down to 0.01°. The tilted-dipole formula underestimates this by about 9 % at
//!   500 km (the eccentric offset and higher-degree terms), so the full model is used.
//! - B̄: the orbit average of the tilted dipole (`physics::geomag::orbit_field_nt`), which
//!   agrees with the full model's average within about 0.2 % (docs/geomagnetic.md).
//!
//! The model date is today's (UTC), clamped to the model's validity 2015–2030.

use time::Date;

use crate::physics::geomag::orbit_field_nt;
use crate::physics::igrf::{igrf_field, FIRST_DATE, LAST_DATE};
use crate::Error;

/// Name of the orbit field model, as written in results.
pub const ORBIT_MODEL: &str =
    "IGRF-14: maximum of the full model over the latitudes the orbit reaches; average from the tilted dipole";

/// The date the orbit field is evaluated at: today (UTC), clamped to 2015-01-01..2030-01-01.
pub fn model_date() -> Date {
    let today = time::OffsetDateTime::now_utc().date();
    today.clamp(FIRST_DATE, LAST_DATE)
}

/// Largest and orbit-average field magnitude, nT, on a circular orbit at `altitude_km`
/// and `inclination_deg` (0..180), on `date`.
pub fn orbit_field(
    altitude_km: f64,
    inclination_deg: f64,
    date: Date,
) -> Result<(f64, f64), Error> {
    let dipole = orbit_field_nt(altitude_km, inclination_deg, date)?;
    let inc = inclination_deg.min(180.0 - inclination_deg);
    let alt_m = altitude_km * 1000.0;
    let total = |lat: f64, lon: f64| -> Result<f64, Error> {
        Ok(igrf_field(lat.clamp(-90.0, 90.0), lon, alt_m, date)?.total_nt)
    };
    // Coarse grid over the band the ground track covers (the field is smooth at orbit
    // altitude: its largest features span tens of degrees).
    let step = 5.0;
    let n_lat = ((2.0 * inc) / step).ceil().max(1.0) as usize;
    let mut best = (f64::NEG_INFINITY, 0.0, 0.0);
    for a in 0..=n_lat {
        let lat = -inc + 2.0 * inc * a as f64 / n_lat as f64;
        for b in 0..72 {
            let lon = -180.0 + step * b as f64;
            let f = total(lat, lon)?;
            if f > best.0 {
                best = (f, lat, lon);
            }
        }
    }
    // Refine around the best cell: a small pattern search in latitude and longitude,
    // latitude kept inside the band.
    let (mut f, mut lat, mut lon) = best;
    let mut h = step;
    while h > 0.01 {
        let mut moved = false;
        for (dl, dn) in [(h, 0.0), (-h, 0.0), (0.0, h), (0.0, -h)] {
            let (la, lo) = ((lat + dl).clamp(-inc, inc), lon + dn);
            let g = total(la, lo)?;
            if g > f {
                (f, lat, lon) = (g, la, lo);
                moved = true;
            }
        }
        if !moved {
            h *= 0.5;
        }
    }
    Ok((f, dipole.mean_nt))
}

impl super::DipoleOptions {
    /// The default options with the orbit of the plan's `[orbit]` table (altitude and
    /// inclination), where it gives them: no assumed orbit then.
    pub fn for_plan(plan: &crate::log::Plan) -> Self {
        let mut o = Self::default();
        if let Some(orbit) = &plan.orbit {
            if let Some(h) = orbit.altitude_km {
                o.altitude_km = h;
            }
            o.inclination_deg = orbit.inclination_deg;
        }
        o
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::macros::date;

    #[test]
    fn worst_case_exceeds_average_and_dipole_estimate_is_lower() {
        let d = date!(2026 - 06 - 01);
        let (max, mean) = orbit_field(500.0, 97.4, d).unwrap();
        let dip = orbit_field_nt(500.0, 97.4, d).unwrap();
        assert!(max > mean);
        // The full model's maximum exceeds the centred-dipole estimate (eccentric dipole,
        // higher-degree terms), as noted in docs/geomagnetic.md.
        assert!(max > dip.max_nt, "{max} vs {}", dip.max_nt);
        // Sanity bound from the field's known range at 500 km: below the surface maximum
        // of about 67 000 nT (common practice figure, from memory).
        assert!(max < 67_000.0 * (6371.2f64 / 6871.2).powi(3) * 1.2, "{max}");
    }

    #[test]
    fn equatorial_orbit_sees_less_than_polar() {
        let d = date!(2026 - 06 - 01);
        let (eq, _) = orbit_field(500.0, 0.0, d).unwrap();
        let (polar, _) = orbit_field(500.0, 90.0, d).unwrap();
        assert!(eq < polar);
    }
}
