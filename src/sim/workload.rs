//! Fixed, repeatable workloads of a requested size, shared by the benchmarks
//! (`benches/`) and the profiling examples (`examples/`) so that both time the same data.

use nalgebra::{Matrix3, Vector3};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};

use super::dipole::TurntableConfig;
use super::polarity::PolarityConfig;
use crate::fit::dipole::{model_field_nt, DipoleSample};
use crate::physics::frames::rotation_z;

/// `n` dipole-fit samples made directly from the dipole field model: moment
/// (0.012, −0.007, 0.009) A·m² at offset (0.02, −0.01, 0.01) m (body frame), probe at
/// (0.6, 0, 0.05) m (table frame), two mounts (upright and on its side) alternating,
/// four full turns, 1 nT Gaussian noise per axis, seed 7. `None` if the probe sat at the
/// dipole (it does not for these values).
pub fn dipole_fit_samples(n: usize) -> Option<Vec<DipoleSample>> {
    let m = Vector3::new(0.012, -0.007, 0.009);
    let o = Vector3::new(0.02, -0.01, 0.01);
    let on_side = Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0);
    let mut rng = StdRng::seed_from_u64(7);
    let noise = Normal::new(0.0, 1.0).ok()?;
    let mut data = Vec::with_capacity(n);
    for i in 0..n {
        let mount = if i % 2 == 0 {
            Matrix3::identity()
        } else {
            on_side
        };
        let angle_rad = std::f64::consts::TAU * i as f64 / n as f64 * 4.0;
        let mut s = DipoleSample {
            probe_m: Vector3::new(0.6, 0.0, 0.05),
            body_to_table: rotation_z(angle_rad) * mount,
            b_nt: Vector3::zeros(),
        };
        s.b_nt = model_field_nt(&s, &m, &o)? + Vector3::from_fn(|_, _| noise.sample(&mut rng));
        data.push(s);
    }
    Some(data)
}

/// The default turntable simulation (two mounts, 15° steps) at 100 Hz with about `n`
/// article-present rows; and the exact number of those rows.
pub fn turntable_config(n: usize) -> (TurntableConfig, usize) {
    let mut cfg = TurntableConfig::default();
    let steps = cfg.mounts.len() * (360.0 / cfg.step_deg).round() as usize;
    cfg.samples_per_step = (n / steps).max(1);
    cfg.article.sample_interval_s = 0.01;
    let rows = steps * cfg.samples_per_step;
    (cfg, rows)
}

/// The default polarity simulation with its number of pulse cycles scaled to give about
/// `n` rows.
pub fn polarity_config(n: usize) -> PolarityConfig {
    let base = PolarityConfig::default();
    // Rows per cycle: rods × (+, −) × (pulse + gap) × rate.
    let per_cycle =
        base.rods.len() as f64 * 2.0 * (base.pulse_s + base.gap_s) * base.sample_rate_hz;
    PolarityConfig {
        cycles: ((n as f64 / per_cycle).round() as usize).max(1),
        ..base
    }
}
