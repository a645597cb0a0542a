//! Synthetic tumble-test logs with known truth: a magnetometer with hard iron, soft iron,
//! noise, gross outliers (torque-rod firings), a temperature-dependent bias, turned
//! through the ambient field over a chosen set of directions.
//!
//! Model (the inverse of what [`crate::fit::tumble`] fits):
//! `b = W⁻¹ (R u) + c + k (T − T̄) + n`, u a unit vector (the ambient field direction in
//! the sensor frame), n Gaussian noise with σ per axis; an outlier adds a fixed offset.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use std::io::Write;

use nalgebra::{Matrix3, Vector3};
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal, StandardNormal};
use serde::Serialize;

use crate::Error;

/// Which directions the tumble visits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum SimCoverage {
    /// Uniformly over the whole sphere.
    FullSphere,
    /// Only the half with u_z ≥ 0.
    Hemisphere,
    /// A single great circle (u_z = 0): the data are coplanar.
    Plane,
}

/// What to simulate.
#[derive(Debug, Clone)]
pub struct TumbleConfig {
    /// Number of samples.
    pub samples: usize,
    /// Sample rate, Hz (for the time column).
    pub rate_hz: f64,
    /// Ambient field magnitude R, nT.
    pub reference_nt: f64,
    /// True hard iron, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// True soft-iron correction W (symmetric positive definite).
    pub soft_iron: Matrix3<f64>,
    /// Gaussian noise per axis, 1σ, nT.
    pub noise_nt: f64,
    /// Fraction of samples hit by an outlier (0..1).
    pub outlier_rate: f64,
    /// Outlier offset, sensor frame, nT (added with a random sign).
    pub outlier_nt: Vector3<f64>,
    /// Directions visited.
    pub coverage: SimCoverage,
    /// Temperature ramp from the first to the last sample, °C; `None`: no temp column.
    pub temp_range_c: Option<(f64, f64)>,
    /// True bias slope, sensor frame, nT/°C.
    pub temp_slope_nt_per_c: Vector3<f64>,
}

impl Default for TumbleConfig {
    /// A plausible small-spacecraft magnetometer in a 48 µT lab field.
    fn default() -> Self {
        TumbleConfig {
            samples: 1000,
            rate_hz: 10.0,
            reference_nt: 48_000.0,
            hard_iron_nt: Vector3::new(1_250.0, -830.0, 410.0),
            soft_iron: Matrix3::new(1.04, 0.015, -0.02, 0.015, 0.97, 0.01, -0.02, 0.01, 1.01),
            noise_nt: 50.0,
            outlier_rate: 0.0,
            outlier_nt: Vector3::new(0.0, 0.0, 3_000.0),
            coverage: SimCoverage::FullSphere,
            temp_range_c: None,
            temp_slope_nt_per_c: Vector3::zeros(),
        }
    }
}

/// The truth behind a simulated tumble.
#[derive(Debug, Clone, Serialize)]
pub struct TumbleTruth {
    /// Hard iron at the mean temperature, sensor frame, nT.
    pub hard_iron_nt: [f64; 3],
    /// Soft-iron correction W, rows.
    pub soft_iron: [[f64; 3]; 3],
    /// Ambient field magnitude, nT.
    pub reference_nt: f64,
    /// Noise per axis, 1σ, nT.
    pub noise_nt: f64,
    /// Bias slope, nT/°C (zero without temperature).
    pub temp_slope_nt_per_c: [f64; 3],
    /// Mean temperature the hard iron refers to, °C (None without temperature).
    pub temp_mean_c: Option<f64>,
    /// Number of samples given an outlier.
    pub outliers: usize,
    /// Directions visited.
    pub coverage: SimCoverage,
    /// Seed used.
    pub seed: u64,
}

/// A simulated tumble log.
#[derive(Debug, Clone)]
pub struct TumbleSim {
    /// Time, s.
    pub t_s: Vec<f64>,
    /// Readings, sensor frame, nT.
    pub samples_nt: Vec<Vector3<f64>>,
    /// Temperature, °C, when simulated.
    pub temp_c: Option<Vec<f64>>,
    /// Whether each sample carries an outlier.
    pub is_outlier: Vec<bool>,
    /// The truth.
    pub truth: TumbleTruth,
}

fn random_direction(rng: &mut impl Rng, coverage: SimCoverage) -> Vector3<f64> {
    loop {
        let mut v = Vector3::new(
            rng.sample::<f64, _>(StandardNormal),
            rng.sample::<f64, _>(StandardNormal),
            rng.sample::<f64, _>(StandardNormal),
        );
        match coverage {
            SimCoverage::FullSphere => {}
            SimCoverage::Hemisphere => v.z = v.z.abs(),
            SimCoverage::Plane => v.z = 0.0,
        }
        let n = v.norm();
        if n > 1e-6 {
            return v / n;
        }
    }
}

/// Simulate a tumble test. Refuses a configuration that cannot be simulated (W not
/// invertible, negative noise, rate outside 0..1, …) with [`Error::Usage`].
pub fn simulate_tumble(cfg: &TumbleConfig, seed: u64) -> Result<TumbleSim, Error> {
    let bad = |s: &str| Err(Error::Usage(format!("tumble simulation: {s}")));
    if cfg.samples == 0 {
        return bad("needs at least one sample");
    }
    if !(cfg.noise_nt.is_finite() && cfg.noise_nt >= 0.0) {
        return bad("noise must be a non-negative number of nT");
    }
    if !(0.0..=1.0).contains(&cfg.outlier_rate) {
        return bad("outlier rate must be between 0 and 1");
    }
    if !(cfg.rate_hz.is_finite() && cfg.rate_hz > 0.0 && cfg.reference_nt > 0.0) {
        return bad("rate and reference field must be positive");
    }
    let Some(w_inv) = cfg.soft_iron.try_inverse() else {
        return bad("soft-iron matrix is singular");
    };
    let noise = Normal::new(0.0, cfg.noise_nt).map_err(|e| Error::Usage(e.to_string()))?;
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let n = cfg.samples;
    let temp_c: Option<Vec<f64>> = cfg.temp_range_c.map(|(t0, t1)| {
        (0..n)
            .map(|i| t0 + (t1 - t0) * i as f64 / (n.max(2) - 1) as f64)
            .collect()
    });
    let temp_mean = temp_c.as_ref().map(|t| t.iter().sum::<f64>() / n as f64);
    let mut samples_nt = Vec::with_capacity(n);
    let mut is_outlier = Vec::with_capacity(n);
    for i in 0..n {
        let u = random_direction(&mut rng, cfg.coverage);
        let tau = match (&temp_c, temp_mean) {
            (Some(t), Some(m)) => t[i] - m,
            _ => 0.0,
        };
        let mut b =
            w_inv * (cfg.reference_nt * u) + cfg.hard_iron_nt + cfg.temp_slope_nt_per_c * tau;
        for a in 0..3 {
            b[a] += noise.sample(&mut rng);
        }
        let out = rng.gen::<f64>() < cfg.outlier_rate;
        if out {
            let sign = if rng.gen::<bool>() { 1.0 } else { -1.0 };
            b += sign * cfg.outlier_nt;
        }
        samples_nt.push(b);
        is_outlier.push(out);
    }
    let w = cfg.soft_iron;
    Ok(TumbleSim {
        t_s: (0..n).map(|i| i as f64 / cfg.rate_hz).collect(),
        samples_nt,
        temp_c,
        truth: TumbleTruth {
            hard_iron_nt: cfg.hard_iron_nt.into(),
            soft_iron: [
                [w[(0, 0)], w[(0, 1)], w[(0, 2)]],
                [w[(1, 0)], w[(1, 1)], w[(1, 2)]],
                [w[(2, 0)], w[(2, 1)], w[(2, 2)]],
            ],
            reference_nt: cfg.reference_nt,
            noise_nt: cfg.noise_nt,
            temp_slope_nt_per_c: cfg.temp_slope_nt_per_c.into(),
            temp_mean_c: temp_mean,
            outliers: is_outlier.iter().filter(|o| **o).count(),
            coverage: cfg.coverage,
            seed,
        },
        is_outlier,
    })
}

/// Write a simulated tumble as a sweep log (`docs/formats.md`): `t [s], bx [nT], by [nT],
/// bz [nT]` and `temp [degC]` when simulated, with a comment line naming the seed.
pub fn write_tumble_csv(sim: &TumbleSim, mut out: impl Write) -> std::io::Result<()> {
    writeln!(
        out,
        "# simulated tumble (magproof sim), seed {}, noise {} nT",
        sim.truth.seed, sim.truth.noise_nt
    )?;
    write!(out, "t [s],bx [nT],by [nT],bz [nT]")?;
    if sim.temp_c.is_some() {
        write!(out, ",temp [degC]")?;
    }
    writeln!(out)?;
    for (i, b) in sim.samples_nt.iter().enumerate() {
        write!(out, "{:.3},{:.3},{:.3},{:.3}", sim.t_s[i], b.x, b.y, b.z)?;
        if let Some(t) = &sim.temp_c {
            write!(out, ",{:.3}", t[i])?;
        }
        writeln!(out)?;
    }
    Ok(())
}
