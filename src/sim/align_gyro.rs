//! Gyro columns for the synthetic alignment runs: a turntable that stops at each heading
//! and turns evenly between them, or a hand tumble with no table at all.
//!
//! Gyro model: `g = D Gᵀ ω_body + b + n` (gyro sensor frame, deg/s in the file), with
//! `G = exp([φ]×) · fault` the true gyro → body mapping, `D` the per-sensor-axis scale,
//! `b` the bias and `n` white noise.

use nalgebra::{Matrix3, Vector3};
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use super::align::{mounts, AlignConfig, AxisFault};
use crate::fit::wahba::rotation_from_vector;
use crate::Error;

/// The simulated gyro.
#[derive(Debug, Clone)]
pub struct GyroSim {
    /// Axis fault of the gyro's harness or mounting.
    pub fault: AxisFault,
    /// Scale factor per gyro sensor axis.
    pub scale: Vector3<f64>,
    /// Bias per gyro sensor axis, deg/s.
    pub bias_deg_s: Vector3<f64>,
    /// Misalignment rotation vector, body frame, deg.
    pub misalign_deg: Vector3<f64>,
    /// Noise per axis, 1σ, deg/s.
    pub noise_deg_s: f64,
    /// The table's turning rate between headings, deg/s.
    pub table_rate_deg_s: f64,
}

impl Default for GyroSim {
    fn default() -> Self {
        GyroSim {
            fault: AxisFault::None,
            scale: Vector3::new(1.0, 1.0, 1.0),
            bias_deg_s: Vector3::new(0.05, -0.03, 0.02),
            misalign_deg: Vector3::new(0.3, -0.2, 0.4),
            noise_deg_s: 0.02,
            table_rate_deg_s: 10.0,
        }
    }
}

/// The gyro's truth.
#[derive(Debug, Clone, Serialize)]
pub struct GyroTruth {
    /// Gyro sensor → body, rows.
    pub sensor_to_body: [[f64; 3]; 3],
    /// Axis fault.
    pub fault: AxisFault,
    /// Scale per gyro sensor axis.
    pub scale: [f64; 3],
    /// Bias per gyro sensor axis, deg/s.
    pub bias_deg_s: [f64; 3],
    /// Misalignment rotation vector, body frame, deg.
    pub misalignment_deg: [f64; 3],
}

impl GyroSim {
    /// The true gyro → body mapping.
    pub fn mapping(&self) -> Matrix3<f64> {
        rotation_from_vector(&self.misalign_deg.map(f64::to_radians)) * self.fault.matrix()
    }

    /// Its truth.
    pub fn truth(&self) -> GyroTruth {
        let g = self.mapping();
        GyroTruth {
            sensor_to_body: [0, 1, 2].map(|i| [g[(i, 0)], g[(i, 1)], g[(i, 2)]]),
            fault: self.fault,
            scale: [self.scale.x, self.scale.y, self.scale.z],
            bias_deg_s: [self.bias_deg_s.x, self.bias_deg_s.y, self.bias_deg_s.z],
            misalignment_deg: [
                self.misalign_deg.x,
                self.misalign_deg.y,
                self.misalign_deg.z,
            ],
        }
    }

    /// A reading for a body rate in deg/s.
    fn read(
        &self,
        body_deg_s: &Vector3<f64>,
        noise: &Normal<f64>,
        rng: &mut StdRng,
    ) -> Vector3<f64> {
        let n = Vector3::from_fn(|_, _| noise.sample(rng));
        self.scale
            .component_mul(&(self.mapping().transpose() * body_deg_s))
            + self.bias_deg_s
            + n
    }
}

fn normal(sigma: f64, what: &str) -> Result<Normal<f64>, Error> {
    Normal::new(0.0, sigma.max(0.0)).map_err(|e| Error::Usage(format!("{what}: {e}")))
}

/// Turntable rows with gyro columns: `t, angle, mount, bx, by, bz, gx, gy, gz`; still
/// `per_heading` rows at each heading, then rows every 0.25 s while the table turns to
/// the next (offset half a row from the stops, so each row is still or turning).
pub fn table_rows(
    cfg: &AlignConfig,
    gyro: &GyroSim,
    a: &Matrix3<f64>,
    rng: &mut StdRng,
) -> Result<String, Error> {
    let b_noise = normal(cfg.noise_nt, "noise")?;
    let g_noise = normal(gyro.noise_deg_s, "gyro noise")?;
    let rate = gyro.table_rate_deg_s;
    if rate.is_nan() || rate <= 0.0 {
        return Err(Error::Usage("gyro table rate must be > 0 deg/s".into()));
    }
    let dt = 0.25;
    let step = 360.0 / cfg.headings as f64;
    let mut csv = String::from("t,angle [deg],mount,bx,by,bz,gx [deg/s],gy [deg/s],gz [deg/s]\n");
    let mut t = 0.0;
    for (label, m, _) in mounts().iter().take(cfg.mounts) {
        let up_body = m.transpose() * Vector3::z();
        let row = |t: f64, deg: f64, turning: f64, rng: &mut StdRng| {
            let tt = rotation_from_vector(&Vector3::new(0.0, 0.0, deg.to_radians())) * m;
            let n = Vector3::from_fn(|_, _| b_noise.sample(rng));
            let s = a.transpose() * tt.transpose() * cfg.field_table_nt + cfg.hard_iron_nt + n;
            let g = gyro.read(&(up_body * turning), &g_noise, rng);
            format!(
                "{t:.3},{:.4},{label},{:.3},{:.3},{:.3},{:.4},{:.4},{:.4}\n",
                deg.rem_euclid(360.0),
                s.x,
                s.y,
                s.z,
                g.x,
                g.y,
                g.z
            )
        };
        for k in 0..cfg.headings {
            let deg = step * k as f64;
            for _ in 0..cfg.per_heading.max(3) {
                csv.push_str(&row(t, deg, 0.0, rng));
                t += dt;
            }
            if k + 1 == cfg.headings {
                break;
            }
            let start = t - 0.5 * dt;
            let end = start + step / rate;
            while t < end {
                csv.push_str(&row(t, deg + rate * (t - start), rate, rng));
                t += dt;
            }
            // Settle: the next still row is after the stop.
            t = t.max(end + 0.5 * dt);
        }
        t += 5.0;
    }
    Ok(csv)
}

/// A hand tumble: `t, bx, by, bz, gx, gy, gz` at 20 Hz, the rate swelling and ebbing
/// about each body axis in turn, then about all three together.
pub fn tumble_rows(
    cfg: &AlignConfig,
    gyro: &GyroSim,
    a: &Matrix3<f64>,
    rng: &mut StdRng,
) -> Result<String, Error> {
    let b_noise = normal(cfg.noise_nt, "noise")?;
    let g_noise = normal(gyro.noise_deg_s, "gyro noise")?;
    let dt = 0.05;
    let sub = 10;
    let mut csv = String::from("t,bx,by,bz,gx [deg/s],gy [deg/s],gz [deg/s]\n");
    let mut att = Matrix3::identity(); // body → room
    let omega_deg_s = |t: f64| {
        let seg = (t / 20.0).floor() as usize;
        let swell = 1.0 + 0.6 * (1.3 * t).sin();
        match seg {
            0 => Vector3::new(0.0, 0.0, 25.0 * swell),
            1 => Vector3::new(-20.0 * swell, 0.0, 0.0),
            2 => Vector3::new(0.0, 30.0 * swell, 0.0),
            _ => Vector3::new(15.0 * (0.7 * t).sin(), 20.0 * (0.5 * t).cos(), 12.0 * swell),
        }
    };
    for k in 0..1600 {
        let t = k as f64 * dt;
        let b_body = att.transpose() * cfg.field_table_nt;
        let n = Vector3::from_fn(|_, _| b_noise.sample(rng));
        let s = a.transpose() * b_body + cfg.hard_iron_nt + n;
        let g = gyro.read(&omega_deg_s(t), &g_noise, rng);
        csv.push_str(&format!(
            "{t:.3},{:.3},{:.3},{:.3},{:.4},{:.4},{:.4}\n",
            s.x, s.y, s.z, g.x, g.y, g.z
        ));
        for j in 0..sub {
            let tj = t + (j as f64 + 0.5) * dt / sub as f64;
            let w = omega_deg_s(tj).map(f64::to_radians);
            att *= rotation_from_vector(&(w * dt / sub as f64));
        }
    }
    Ok(csv)
}
