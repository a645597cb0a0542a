//! The International Geomagnetic Reference Field, 14th generation (IGRF-14, IAGA), for
//! 2015-01-01 to 2030-01-01: spherical-harmonic synthesis of the main field to degree 13
//! at a geodetic (WGS-84) site, returned as north/east/down, horizontal and total
//! intensity, declination and inclination.
//!
//! Method (the standard IGRF recipe; e.g. Alken et al. 2021, "International Geomagnetic
//! Reference Field: the thirteenth generation", Earth Planets Space 73:49, and Wertz,
//! *Spacecraft Attitude Determination and Control*, 1978, App. H, from memory):
//! 1. Coefficients g(n,m), h(n,m) at the decimal year t: linear interpolation between the
//!    5-year epochs 2015, 2020, 2025; after 2025 the 2025 model plus (t − 2025) times the
//!    IGRF-14 secular variation. Table: `igrf14_coeffs.txt` (source named in its header).
//! 2. Geodetic latitude and height above the WGS-84 ellipsoid → geocentric radius and
//!    colatitude (exact, through Earth-centred Cartesian coordinates).
//! 3. B = −∇V with V = a Σₙ (a/r)ⁿ⁺¹ Σₘ (g cos mφ + h sin mφ) Pₙᵐ(cos θ), a = 6371.2 km,
//!    Pₙᵐ Schmidt semi-normalised. Pₙᵐ/sin θ is carried by its own recursion, so the east
//!    component stays finite and exact at the poles (there "north" is the direction of
//!    the given meridian, as the limit from lower latitudes).
//! 4. Rotate the geocentric (r, θ) components by the angle between geodetic and
//!    geocentric latitude into north/down relative to the ellipsoid.

use std::sync::OnceLock;

use serde::Serialize;
use time::Date;

/// Highest degree (and order) of the IGRF-14 main-field model.
pub const MAX_DEGREE: usize = 13;
/// IGRF reference radius a, km (the "Re" of the dipole formulas).
pub const REFERENCE_RADIUS_KM: f64 = 6371.2;
/// WGS-84 semi-major axis, km.
pub const WGS84_A_KM: f64 = 6378.137;
/// WGS-84 flattening.
pub const WGS84_F: f64 = 1.0 / 298.257_223_563;
/// Name of the model, as reported in results.
pub const MODEL_NAME: &str = "IGRF-14";

/// First date the model is evaluated for (the 2015.0 epoch).
pub const FIRST_DATE: Date = time::macros::date!(2015 - 01 - 01);
/// Last date the model is evaluated for (2030.0, the end of IGRF-14's validity).
pub const LAST_DATE: Date = time::macros::date!(2030 - 01 - 01);
/// Lowest altitude accepted, m (below the deepest mines; anything lower is a typo).
pub const MIN_ALTITUDE_M: f64 = -1000.0;
/// Highest altitude accepted, m (about 16 Earth radii: beyond the magnetopause, some
/// 10 Earth radii out on the day side, the internal field the model describes no longer
/// dominates — common practice; any larger value is a wrong unit).
pub const MAX_ALTITUDE_M: f64 = 1.0e8;

const COEFF_TEXT: &str = include_str!("igrf14_coeffs.txt");
const N: usize = MAX_DEGREE + 1;

/// Why a geomagnetic-field request was refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum GeomagError {
    /// The date lies outside the span the bundled model covers.
    #[error("date {date} is outside the IGRF-14 span magproof carries (2015-01-01 to 2030-01-01)")]
    DateOutOfRange {
        /// The date asked for.
        date: Date,
    },
    /// Latitude beyond ±90° or not a number.
    #[error("latitude {lat_deg} deg is not within -90..90")]
    Latitude {
        /// The latitude given, deg.
        lat_deg: f64,
    },
    /// Longitude not a finite number.
    #[error("longitude {lon_deg} deg is not a finite number")]
    Longitude {
        /// The longitude given, deg.
        lon_deg: f64,
    },
    /// Altitude below −1 km, above 10⁸ m or not a number.
    #[error("altitude {alt_m} m is not a finite number from -1000 m to 1e8 m (height above the WGS-84 ellipsoid)")]
    Altitude {
        /// The altitude given, m.
        alt_m: f64,
    },
    /// An orbit or dipole-model parameter is out of its domain.
    #[error("{0}")]
    Orbit(String),
    /// The `[site]` lacks what the model needs.
    #[error("{0}")]
    Site(String),
    /// The bundled coefficient table is damaged (a magproof bug, exit code 3).
    #[error("bundled IGRF-14 table: {0}")]
    Table(String),
}

/// The geomagnetic main field at a site: the result of `magproof field` (its JSON keys
/// are listed in `docs/geomagnetic.md`).
///
/// Components are relative to the WGS-84 ellipsoid at the site (geodetic north, east,
/// and down along the ellipsoid normal).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GeoField {
    /// Northward component X, nT.
    pub north_nt: f64,
    /// Eastward component Y, nT.
    pub east_nt: f64,
    /// Downward component Z, nT (positive in the northern magnetic hemisphere).
    pub down_nt: f64,
    /// Horizontal intensity H = √(X² + Y²), nT.
    pub horizontal_nt: f64,
    /// Total intensity F = √(X² + Y² + Z²), nT.
    pub total_nt: f64,
    /// Declination D = atan2(Y, X), deg, east of geodetic north (−180..180).
    pub declination_deg: f64,
    /// Inclination I = atan2(Z, H), deg, positive downward (−90..90).
    pub inclination_deg: f64,
    /// The model used ("IGRF-14").
    pub model: &'static str,
}

/// Gauss coefficients at one instant, nT, indexed by degree n and order m (0..=13).
#[derive(Debug, Clone, PartialEq)]
pub struct GaussCoefficients {
    g: [[f64; N]; N],
    h: [[f64; N]; N],
}

impl GaussCoefficients {
    /// g(n, m), nT; 0 outside 1 ≤ n ≤ 13, m ≤ n.
    pub fn g(&self, n: usize, m: usize) -> f64 {
        self.g.get(n).and_then(|r| r.get(m)).copied().unwrap_or(0.0)
    }

    /// h(n, m), nT; 0 for m = 0 and outside the model.
    pub fn h(&self, n: usize, m: usize) -> f64 {
        self.h.get(n).and_then(|r| r.get(m)).copied().unwrap_or(0.0)
    }
}

/// The parsed table: coefficients at 2015, 2020, 2025 and the 2025–2030 secular variation.
struct Table {
    epochs: [GaussCoefficients; 3],
    /// Secular variation, nT/yr, stored in a `GaussCoefficients` for its indexing.
    sv: GaussCoefficients,
}

fn table() -> Result<&'static Table, GeomagError> {
    static TABLE: OnceLock<Result<Table, String>> = OnceLock::new();
    TABLE
        .get_or_init(|| parse_table(COEFF_TEXT))
        .as_ref()
        .map_err(|e| GeomagError::Table(e.clone()))
}

fn parse_table(text: &str) -> Result<Table, String> {
    let zero = GaussCoefficients {
        g: [[0.0; N]; N],
        h: [[0.0; N]; N],
    };
    let mut cols: [GaussCoefficients; 4] = std::array::from_fn(|_| zero.clone());
    let mut seen = 0usize;
    for (i, line) in text.lines().enumerate() {
        let line = line.trim();
        if line.is_empty() || line.starts_with('#') {
            continue;
        }
        let f: Vec<&str> = line.split_whitespace().collect();
        let bad = |what: &str| format!("line {}: {what}: {line:?}", i + 1);
        if f.len() != 6 {
            return Err(bad("expected 6 fields"));
        }
        let n: usize = f[0].parse().map_err(|_| bad("degree"))?;
        let m: i64 = f[1].parse().map_err(|_| bad("order"))?;
        let ma = m.unsigned_abs() as usize;
        if !(1..=MAX_DEGREE).contains(&n) || ma > n {
            return Err(bad("degree/order out of range"));
        }
        for (k, col) in cols.iter_mut().enumerate() {
            let v: f64 = f[2 + k].parse().map_err(|_| bad("value"))?;
            if m >= 0 {
                col.g[n][ma] = v;
            } else {
                col.h[n][ma] = v;
            }
        }
        seen += 1;
    }
    // Degree n has 2n+1 coefficients: 195 for n = 1..=13.
    let expected = (1..=MAX_DEGREE).map(|n| 2 * n + 1).sum::<usize>();
    if seen != expected {
        return Err(format!("{seen} coefficient rows, expected {expected}"));
    }
    let [c2015, c2020, c2025, sv] = cols;
    Ok(Table {
        epochs: [c2015, c2020, c2025],
        sv,
    })
}

/// Decimal year of a date at 00:00 UTC: year + (day of year − 1) / days in that year.
pub fn decimal_year(date: Date) -> f64 {
    let year = date.year();
    let days = if time::util::is_leap_year(year) {
        366.0
    } else {
        365.0
    };
    f64::from(year) + f64::from(date.ordinal() - 1) / days
}

fn check_date(date: Date) -> Result<(), GeomagError> {
    if date < FIRST_DATE || date > LAST_DATE {
        return Err(GeomagError::DateOutOfRange { date });
    }
    Ok(())
}

/// IGRF-14 Gauss coefficients on `date`: linear between the 2015/2020/2025 epochs, then
/// the 2025 model plus the secular variation. Refuses dates outside 2015-01-01..2030-01-01.
pub fn coefficients_on(date: Date) -> Result<GaussCoefficients, GeomagError> {
    check_date(date)?;
    coefficients_at_year(decimal_year(date))
}

/// IGRF-14 Gauss coefficients at decimal year `t` (as [`coefficients_on`], for an
/// instant within a day: the secular change reaches about 0.3 nT a day at orbit).
/// The caller keeps `t` within 2015.0..=2030.0.
pub fn coefficients_at_year(t: f64) -> Result<GaussCoefficients, GeomagError> {
    let tab = table()?;
    let mut out = GaussCoefficients {
        g: [[0.0; N]; N],
        h: [[0.0; N]; N],
    };
    let (base, next, frac, sv_years) = if t < 2020.0 {
        (0, 1, (t - 2015.0) / 5.0, 0.0)
    } else if t < 2025.0 {
        (1, 2, (t - 2020.0) / 5.0, 0.0)
    } else {
        (2, 2, 0.0, t - 2025.0)
    };
    let (a, b) = (&tab.epochs[base], &tab.epochs[next]);
    for n in 1..N {
        for m in 0..=n {
            out.g[n][m] = a.g[n][m] + frac * (b.g[n][m] - a.g[n][m]) + sv_years * tab.sv.g[n][m];
            out.h[n][m] = a.h[n][m] + frac * (b.h[n][m] - a.h[n][m]) + sv_years * tab.sv.h[n][m];
        }
    }
    Ok(out)
}

/// Schmidt semi-normalised associated Legendre functions at colatitude θ: Pₙᵐ(cos θ),
/// dPₙᵐ/dθ, and Pₙᵐ/sin θ for m ≥ 1 (finite at the poles), each `[n][m]`.
///
/// Recursion of Wertz (1978, App. G, from memory) on Gauss-normalised functions,
/// then scaled by the Schmidt factors S(n,m).
pub struct Legendre {
    /// Pₙᵐ(cos θ).
    pub p: [[f64; N]; N],
    /// dPₙᵐ/dθ, per radian.
    pub dp: [[f64; N]; N],
    /// Pₙᵐ / sin θ for m ≥ 1 (0 for m = 0).
    pub p_over_sin: [[f64; N]; N],
}

/// Evaluate [`Legendre`] at colatitude `theta_rad`.
pub fn legendre(theta_rad: f64) -> Legendre {
    let (s, c) = theta_rad.sin_cos();
    let mut p = [[0.0; N]; N];
    let mut dp = [[0.0; N]; N];
    let mut q = [[0.0; N]; N];
    p[0][0] = 1.0;
    for n in 1..N {
        for m in 0..=n {
            if n == m {
                p[n][n] = s * p[n - 1][n - 1];
                dp[n][n] = s * dp[n - 1][n - 1] + c * p[n - 1][n - 1];
                q[n][n] = if n == 1 { 1.0 } else { s * q[n - 1][n - 1] };
            } else {
                let (p2, dp2, q2, k) = if n >= 2 {
                    let k = ((n - 1) * (n - 1) - m * m) as f64 / ((2 * n - 1) * (2 * n - 3)) as f64;
                    (p[n - 2][m], dp[n - 2][m], q[n - 2][m], k)
                } else {
                    (0.0, 0.0, 0.0, 0.0)
                };
                p[n][m] = c * p[n - 1][m] - k * p2;
                dp[n][m] = c * dp[n - 1][m] - s * p[n - 1][m] - k * dp2;
                q[n][m] = c * q[n - 1][m] - k * q2;
            }
        }
    }
    // Schmidt factors: S(n,0) = S(n−1,0)(2n−1)/n; S(n,m) = S(n,m−1) √((n−m+1)(δ₁ₘ+1)/(n+m)).
    for n in 1..N {
        let mut sn = schmidt_m0(n);
        for m in 0..=n {
            if m > 0 {
                let d = if m == 1 { 2.0 } else { 1.0 };
                sn *= (((n - m + 1) as f64) * d / ((n + m) as f64)).sqrt();
            }
            p[n][m] *= sn;
            dp[n][m] *= sn;
            q[n][m] = if m == 0 { 0.0 } else { q[n][m] * sn };
        }
    }
    Legendre {
        p,
        dp,
        p_over_sin: q,
    }
}

fn schmidt_m0(n: usize) -> f64 {
    (1..=n).fold(1.0, |s, k| s * (2 * k - 1) as f64 / k as f64)
}

/// Field in geocentric spherical components at radius `r_km`, colatitude `theta_rad`,
/// east longitude `phi_rad`: (B_r outward, B_θ southward, B_φ eastward), nT.
pub fn synthesize_geocentric(
    coeffs: &GaussCoefficients,
    r_km: f64,
    theta_rad: f64,
    phi_rad: f64,
) -> [f64; 3] {
    let leg = legendre(theta_rad);
    let ratio = REFERENCE_RADIUS_KM / r_km;
    let mut cos_m = [0.0; N];
    let mut sin_m = [0.0; N];
    for (m, (cm, sm)) in cos_m.iter_mut().zip(sin_m.iter_mut()).enumerate() {
        (*sm, *cm) = (m as f64 * phi_rad).sin_cos();
    }
    let (mut br, mut bt, mut bp) = (0.0, 0.0, 0.0);
    let mut rn = ratio * ratio; // (a/r)^(n+2), starting at n = 0
    for n in 1..N {
        rn *= ratio;
        let (mut sr, mut st, mut sp) = (0.0, 0.0, 0.0);
        for m in 0..=n {
            let (g, h) = (coeffs.g[n][m], coeffs.h[n][m]);
            let gh_cos = g * cos_m[m] + h * sin_m[m];
            sr += gh_cos * leg.p[n][m];
            st += gh_cos * leg.dp[n][m];
            sp += m as f64 * (g * sin_m[m] - h * cos_m[m]) * leg.p_over_sin[n][m];
        }
        br += (n + 1) as f64 * rn * sr;
        bt -= rn * st;
        bp += rn * sp;
    }
    [br, bt, bp]
}

/// Geocentric radius (km) and colatitude (rad) of a geodetic site, and the angle
/// geodetic minus geocentric latitude (rad), for WGS-84.
pub fn geodetic_to_geocentric(lat_rad: f64, alt_km: f64) -> (f64, f64, f64) {
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (s, c) = lat_rad.sin_cos();
    let n = WGS84_A_KM / (1.0 - e2 * s * s).sqrt();
    let rho = (n + alt_km) * c;
    let z = (n * (1.0 - e2) + alt_km) * s;
    let lat_c = z.atan2(rho);
    (
        rho.hypot(z),
        std::f64::consts::FRAC_PI_2 - lat_c,
        lat_rad - lat_c,
    )
}

/// Check a site's inputs; the reason is in the error.
pub fn check_site(lat_deg: f64, lon_deg: f64, alt_m: f64) -> Result<(), GeomagError> {
    if !(lat_deg.is_finite() && (-90.0..=90.0).contains(&lat_deg)) {
        return Err(GeomagError::Latitude { lat_deg });
    }
    if !lon_deg.is_finite() {
        return Err(GeomagError::Longitude { lon_deg });
    }
    if !(alt_m.is_finite() && (MIN_ALTITUDE_M..=MAX_ALTITUDE_M).contains(&alt_m)) {
        return Err(GeomagError::Altitude { alt_m });
    }
    Ok(())
}

/// IGRF-14 main field at geodetic latitude `lat_deg` (−90..90), east longitude `lon_deg`,
/// altitude `alt_m` above the WGS-84 ellipsoid (≥ −1000 m), on `date` at 00:00 UTC
/// (2015-01-01..2030-01-01).
///
/// Above a few Earth radii the magnetospheric (external) field, which IGRF leaves out,
/// becomes comparable to the main field; the result is then only the internal part.
pub fn igrf_field(
    lat_deg: f64,
    lon_deg: f64,
    alt_m: f64,
    date: Date,
) -> Result<GeoField, GeomagError> {
    check_site(lat_deg, lon_deg, alt_m)?;
    let coeffs = coefficients_on(date)?;
    let (r_km, theta, delta) = geodetic_to_geocentric(lat_deg.to_radians(), alt_m / 1000.0);
    let [br, bt, bp] = synthesize_geocentric(&coeffs, r_km, theta, lon_deg.to_radians());
    // Geocentric north = −B_θ, up = B_r; rotate by δ = geodetic − geocentric latitude.
    let (sd, cd) = delta.sin_cos();
    let north = -bt * cd - br * sd;
    let up = br * cd - bt * sd;
    Ok(geo_field(north, bp, -up))
}

fn geo_field(north_nt: f64, east_nt: f64, down_nt: f64) -> GeoField {
    let horizontal_nt = north_nt.hypot(east_nt);
    GeoField {
        north_nt,
        east_nt,
        down_nt,
        horizontal_nt,
        total_nt: horizontal_nt.hypot(down_nt),
        declination_deg: east_nt.atan2(north_nt).to_degrees(),
        inclination_deg: down_nt.atan2(horizontal_nt).to_degrees(),
        model: MODEL_NAME,
    }
}

#[cfg(test)]
#[path = "igrf_tests.rs"]
mod tests;
