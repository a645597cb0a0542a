//! Synthetic on-orbit telemetry with known truth: a two-line element set propagated by
//! SGP4, the IGRF-14 field vector at every position, a tumbling attitude, and a
//! magnetometer with hard iron, soft iron, biases linear in a solar-array current, a rod
//! command and temperature, plus Gaussian noise.
//!
//! Model (the inverse of what [`crate::fit::orbit`] fits):
//! `b = W⁻¹ C(t) B_ecef + c + k_solar i_solar + k_rod cmd + k_T (T − T_ref) + n`.

use std::fmt::Write as _;

use nalgebra::{Matrix3, Rotation3, Vector3};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use crate::physics::igrf::synthesize_geocentric;
use crate::physics::orbit::{coefficients_for, geodetic_latitude_deg, Orbit};
use crate::Error;

/// An invented 525 km sun-synchronous orbit (checksums valid), epoch 2026-07-19 06:00 UTC.
pub const DEMO_TLE: [&str; 2] = [
    "1 62001U 26031B   26200.25000000  .00000900  00000-0  48000-4 0  9993",
    "2 62001  97.5200 135.0000 0008000 120.0000 240.0000 15.15000000  4501",
];

/// How the log gives positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SimPositions {
    /// None: the plan's `[orbit] tle` is propagated.
    Tle,
    /// `rx ry rz [km]`, Earth-fixed.
    Ecef,
    /// `lat lon alt [km]`.
    Geodetic,
}

/// What to simulate.
#[derive(Debug, Clone)]
pub struct OrbitSimConfig {
    /// The element set.
    pub tle: [String; 2],
    /// First sample, s after the element set's epoch.
    pub start_after_epoch_s: f64,
    /// Samples (1 Hz).
    pub samples: usize,
    /// Hard iron, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// Soft iron W (symmetric).
    pub soft_iron: Matrix3<f64>,
    /// Bias per A of solar-array current, nT/A.
    pub solar_nt_per_a: Vector3<f64>,
    /// Bias per unit rod command, nT (None: no rod column).
    pub rod_nt_per_command: Option<Vector3<f64>>,
    /// Bias slope, nT/°C, about `temp_ref_c` (None: no temperature column).
    pub temp_slope_nt_per_c: Option<Vector3<f64>>,
    /// Temperature the hard iron refers to, °C.
    pub temp_ref_c: f64,
    /// Noise per axis, 1σ, nT.
    pub noise_nt: f64,
    /// Positions in the log.
    pub positions: SimPositions,
}

impl Default for OrbitSimConfig {
    fn default() -> Self {
        OrbitSimConfig {
            tle: DEMO_TLE.map(String::from),
            start_after_epoch_s: 600.0,
            samples: 6000,
            hard_iron_nt: Vector3::new(1820.0, -940.0, 2310.0),
            soft_iron: Matrix3::new(
                0.972, 0.018, -0.024, 0.018, 1.047, 0.031, -0.024, 0.031, 0.989,
            ),
            solar_nt_per_a: Vector3::new(-420.0, 610.0, 250.0),
            rod_nt_per_command: Some(Vector3::new(900.0, -150.0, 60.0)),
            temp_slope_nt_per_c: Some(Vector3::new(4.0, -3.0, 2.0)),
            temp_ref_c: 20.0,
            noise_nt: 30.0,
            positions: SimPositions::Tle,
        }
    }
}

/// The truth, as written beside the log.
#[derive(Debug, Clone, Serialize)]
pub struct OrbitTruth {
    /// Hard iron, nT.
    pub hard_iron_nt: [f64; 3],
    /// Soft iron rows.
    pub soft_iron: [[f64; 3]; 3],
    /// Bias per unit of each regressor: (name, nT per unit).
    pub regressors: Vec<(String, [f64; 3])>,
    /// Temperature slope, nT/°C.
    pub temperature_slope_nt_per_c: Option<[f64; 3]>,
    /// Reference temperature, °C.
    pub reference_temperature_c: f64,
    /// Noise per axis, nT.
    pub noise_nt: f64,
}

/// A simulated log as CSV text with its plan's `[orbit]` table and the truth.
#[derive(Debug, Clone)]
pub struct OrbitSim {
    /// The log.
    pub csv: String,
    /// `[orbit]` table for the plan (TLE and reference temperature).
    pub plan_orbit: String,
    /// The truth.
    pub truth: OrbitTruth,
}

/// IGRF-14 vector at an Earth-fixed position, Earth-fixed axes, nT.
pub fn igrf_vector_ecef(
    coeffs: &crate::physics::igrf::GaussCoefficients,
    r: [f64; 3],
) -> Vector3<f64> {
    let rr = (r[0] * r[0] + r[1] * r[1] + r[2] * r[2]).sqrt();
    let th = (r[2] / rr).acos();
    let ph = r[1].atan2(r[0]);
    let [br, bt, bp] = synthesize_geocentric(coeffs, rr, th, ph);
    let (st, ct, sp, cp) = (th.sin(), th.cos(), ph.sin(), ph.cos());
    Vector3::new(
        br * st * cp + bt * ct * cp - bp * sp,
        br * st * sp + bt * ct * sp + bp * cp,
        br * ct - bt * st,
    )
}

/// A slow tumble: Earth-fixed → body rotation at `t` s.
fn tumble(t: f64) -> Rotation3<f64> {
    let psi =
        0.31f64.to_radians() * t + 20f64.to_radians() * (t / 1900.0 * std::f64::consts::TAU).sin();
    let theta = 80f64.to_radians() * (t / 2600.0 * std::f64::consts::TAU + 1.0).sin();
    let phi = 0.47f64.to_radians() * t + 0.5;
    Rotation3::from_euler_angles(phi, theta, psi).inverse()
}

fn iso(t_unix: f64) -> String {
    let dt = time::OffsetDateTime::from_unix_timestamp(t_unix.floor() as i64)
        .unwrap_or(time::OffsetDateTime::UNIX_EPOCH);
    let fmt = time::macros::format_description!("[year]-[month]-[day]T[hour]:[minute]:[second]Z");
    dt.format(&fmt).unwrap_or_default()
}

/// The log's header line (with its line end): time, field, the positions `cfg` asks
/// for, the solar-array current, and the rod command and temperature when modelled.
fn header_line(cfg: &OrbitSimConfig) -> String {
    let mut csv = String::from("t,bx,by,bz");
    match cfg.positions {
        SimPositions::Tle => {}
        SimPositions::Ecef => csv.push_str(",rx [km],ry [km],rz [km]"),
        SimPositions::Geodetic => csv.push_str(",lat,lon,alt [km]"),
    }
    csv.push_str(",i_solar [A]");
    if cfg.rod_nt_per_command.is_some() {
        csv.push_str(",cmd_x");
    }
    if cfg.temp_slope_nt_per_c.is_some() {
        csv.push_str(",temp");
    }
    csv.push('\n');
    csv
}

/// The x rod's command at sample `k`: blocks of 97 samples cycling 0, +1, 0, −1.
fn rod_command(k: usize) -> f64 {
    if (k / 97) % 4 == 1 {
        1.0
    } else if (k / 97) % 4 == 3 {
        -1.0
    } else {
        0.0
    }
}

/// The position cells of one row for the Earth-fixed position `r_km` (km): none, the
/// Cartesian km, or geodetic latitude, longitude (deg) and height (km).
fn write_position(csv: &mut String, positions: SimPositions, r_km: [f64; 3]) {
    match positions {
        SimPositions::Tle => {}
        SimPositions::Ecef => {
            let _ = write!(csv, ",{:.4},{:.4},{:.4}", r_km[0], r_km[1], r_km[2]);
        }
        SimPositions::Geodetic => {
            let lat = geodetic_latitude_deg(r_km);
            let lon = r_km[1].atan2(r_km[0]).to_degrees();
            let alt = geodetic_altitude_km(r_km, lat);
            let _ = write!(csv, ",{lat:.6},{lon:.6},{alt:.4}");
        }
    }
}

/// Simulate a log.
pub fn simulate_orbit(cfg: &OrbitSimConfig, seed: u64) -> Result<OrbitSim, Error> {
    let orbit =
        Orbit::from_tle(&cfg.tle[0], &cfg.tle[1]).map_err(|e| Error::Usage(e.to_string()))?;
    let winv = cfg
        .soft_iron
        .try_inverse()
        .ok_or_else(|| Error::Usage("the soft-iron matrix is singular".into()))?;
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let noise = Normal::new(0.0, cfg.noise_nt.max(0.0)).map_err(|e| Error::Usage(e.to_string()))?;
    let t0 = (orbit.epoch_unix_s + cfg.start_after_epoch_s).round();
    let period = 86_400.0 / orbit.mean_motion_rev_per_day;
    let coeffs = coefficients_for(t0 + cfg.samples as f64 / 2.0)?;
    let mut csv = header_line(cfg);
    for k in 0..cfg.samples {
        let dt = k as f64;
        let t = t0 + dt;
        let r = orbit.ecef_km(t).map_err(|e| Error::Usage(e.to_string()))?;
        let b_body = tumble(dt) * igrf_vector_ecef(&coeffs, r);
        let phase = dt / period * std::f64::consts::TAU;
        let i_solar =
            (1.6 * phase.sin() + 0.4 * (dt / 170.0 * std::f64::consts::TAU).sin()).max(0.0);
        let cmd = rod_command(k);
        let temp = cfg.temp_ref_c + 12.0 * (phase + 0.7).sin();
        let mut b = winv * b_body + cfg.hard_iron_nt + cfg.solar_nt_per_a * i_solar;
        if let Some(kr) = cfg.rod_nt_per_command {
            b += kr * cmd;
        }
        if let Some(kt) = cfg.temp_slope_nt_per_c {
            b += kt * (temp - cfg.temp_ref_c);
        }
        for a in 0..3 {
            b[a] += noise.sample(&mut rng);
        }
        let _ = write!(csv, "{},{:.1},{:.1},{:.1}", iso(t), b[0], b[1], b[2]);
        write_position(&mut csv, cfg.positions, r);
        let _ = write!(csv, ",{i_solar:.4}");
        if cfg.rod_nt_per_command.is_some() {
            let _ = write!(csv, ",{cmd}");
        }
        if cfg.temp_slope_nt_per_c.is_some() {
            let _ = write!(csv, ",{temp:.2}");
        }
        csv.push('\n');
    }
    Ok(OrbitSim {
        csv,
        plan_orbit: format!(
            "[orbit]\ntle = [\"{}\",\n       \"{}\"]\nreference_temperature_c = {:.1}\n",
            cfg.tle[0], cfg.tle[1], cfg.temp_ref_c
        ),
        truth: truth(cfg),
    })
}

fn truth(cfg: &OrbitSimConfig) -> OrbitTruth {
    let arr = |v: Vector3<f64>| [v[0], v[1], v[2]];
    let mut regressors = vec![("i_solar".to_string(), arr(cfg.solar_nt_per_a))];
    if let Some(k) = cfg.rod_nt_per_command {
        regressors.push(("cmd_x".to_string(), arr(k)));
    }
    OrbitTruth {
        hard_iron_nt: arr(cfg.hard_iron_nt),
        soft_iron: [0, 1, 2].map(|i| {
            [
                cfg.soft_iron[(i, 0)],
                cfg.soft_iron[(i, 1)],
                cfg.soft_iron[(i, 2)],
            ]
        }),
        regressors,
        temperature_slope_nt_per_c: cfg.temp_slope_nt_per_c.map(arr),
        reference_temperature_c: cfg.temp_ref_c,
        noise_nt: cfg.noise_nt,
    }
}

/// Height above WGS-84 of an Earth-fixed position at geodetic latitude `lat_deg`, km.
pub fn geodetic_altitude_km(r: [f64; 3], lat_deg: f64) -> f64 {
    use crate::physics::igrf::{WGS84_A_KM, WGS84_F};
    let e2 = WGS84_F * (2.0 - WGS84_F);
    let (s, c) = lat_deg.to_radians().sin_cos();
    let n = WGS84_A_KM / (1.0 - e2 * s * s).sqrt();
    let p = r[0].hypot(r[1]);
    if c.abs() > 1e-3 {
        p / c - n
    } else {
        r[2] / s - n * (1.0 - e2)
    }
}
