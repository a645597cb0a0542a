//! Synthetic torque-rod pulse logs with known truth, built from the dipole field.
//!
//! Each rod is pulsed in turn, positive then negative, with quiet gaps between. A rod's
//! dipole follows a target after a pure delay (the lag) through a first-order lag of time
//! constant τ (the rise): while the rod is driven the target is its dipole per command
//! times the command; once it is off, the remanent dipole along its axis with the sign of
//! the last pulse (zero before the first pulse). The command changes only at sample
//! times (the logged value holds until the next sample), so the dipole at the sample
//! times is computed in closed form: each change ΔM of the target at time tₑ adds
//! ΔM·(1 − exp(−(t − tₑ − lag)/τ)) once t ≥ tₑ + lag. Faults can be
//! injected: a rod wired backwards, two rods' commands swapped, a dead rod (gain 0). The
//! field at the sensor is the sum of every rod's dipole field plus an ambient
//! field, a drift (linear plus a slow sinusoid) and white noise.
//!
//! [`simulate_polarity`] returns the CSV log, a matching plan (TOML) and the truth (JSON),
//! for tests, rehearsal and the demo. The settings live in `config`, the returned log,
//! plan and truth in `output`.

mod config;
mod output;

use std::fmt::Write as _;

use nalgebra::Vector3;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

use crate::physics::dipole::dipole_matrix;
use crate::Error;
pub use config::{PolarityConfig, SimRod};
pub use output::{PolaritySim, PolarityTruth, RodTruth};

/// Simulate a polarity test (see the module doc).
pub fn simulate_polarity(cfg: &PolarityConfig, seed: u64) -> Result<PolaritySim, Error> {
    check_config(cfg)?;
    let drives = command_drives(cfg)?;
    let per_am2 = field_per_am2_nt(cfg)?;
    let dt = 1.0 / cfg.sample_rate_hz;
    let commands = pulse_commands(cfg, dt);
    let moments = rod_moments(cfg, &drives, &commands, dt);
    let csv = log_csv(cfg, seed, dt, &per_am2, &moments, &commands)?;
    let truth = truth(cfg, seed, &drives, &per_am2);
    Ok(PolaritySim {
        csv,
        plan_toml: plan_toml(cfg),
        truth,
    })
}

/// Refuse a configuration that cannot be simulated: no rod or cycle, a rate, pulse or
/// gap that is not positive, negative noise or rise time, a lag that is not finite.
fn check_config(cfg: &PolarityConfig) -> Result<(), Error> {
    if cfg.rods.is_empty() || cfg.cycles == 0 {
        return Err(Error::Usage(
            "simulation needs at least one rod and one cycle".into(),
        ));
    }
    let positive = |x: f64| x.is_finite() && x > 0.0;
    if !(positive(cfg.sample_rate_hz) && positive(cfg.pulse_s) && positive(cfg.gap_s)) {
        return Err(Error::Usage(
            "sample rate, pulse and gap must be positive".into(),
        ));
    }
    if !(cfg.noise_nt >= 0.0 && cfg.rise_time_s >= 0.0 && cfg.lag_s.is_finite()) {
        return Err(Error::Usage(
            "noise and rise time must be ≥ 0, lag finite".into(),
        ));
    }
    Ok(())
}

/// Which physical rod each command column drives: itself, unless two are swapped.
fn command_drives(cfg: &PolarityConfig) -> Result<Vec<usize>, Error> {
    let nr = cfg.rods.len();
    let mut drives: Vec<usize> = (0..nr).collect();
    if let Some((a, b)) = cfg.swapped {
        if a >= nr || b >= nr || a == b {
            return Err(Error::Usage(format!(
                "swapped rods ({a}, {b}) out of range"
            )));
        }
        drives.swap(a, b);
    }
    Ok(drives)
}

/// Field at the sensor per A·m² of each physical rod's axis, sensor frame, nT.
fn field_per_am2_nt(cfg: &PolarityConfig) -> Result<Vec<Vector3<f64>>, Error> {
    let body_to_sensor = cfg.sensor_to_body.transpose();
    let mut per_am2 = Vec::with_capacity(cfg.rods.len());
    for r in &cfg.rods {
        let d = cfg.sensor_position_m - r.position_m;
        let at_sensor = || Error::Usage(format!("rod {} sits at the sensor", r.name));
        let f = match cfg.finite_rod_radius_m {
            Some(radius_m) => crate::physics::finite_rod::FiniteRod {
                length_m: r.length_m,
                radius_m,
            }
            .field_along_nt(1.0, &r.axis_body, &d)
            .ok_or_else(at_sensor)?,
            None => dipole_matrix(&d).ok_or_else(at_sensor)? * r.axis_body.normalize(),
        };
        per_am2.push(body_to_sensor * f);
    }
    Ok(per_am2)
}

/// The command of every column at every sample (step `dt` s). Schedule: per cycle, per
/// rod: gap, +pulse, gap, −pulse; then a final gap. Edges are rounded to the sample grid
/// (rows `on..off` carry the command).
fn pulse_commands(cfg: &PolarityConfig, dt: f64) -> Vec<Vec<f64>> {
    let nr = cfg.rods.len();
    let row = |time: f64| (time / dt).round() as usize;
    let period = cfg.gap_s + cfg.pulse_s;
    let mut pulses: Vec<(usize, usize, usize, f64)> = Vec::new(); // column, on, off, command
    let mut t = 0.0;
    for _ in 0..cfg.cycles {
        for c in 0..nr {
            for sign in [1.0, -1.0] {
                t += cfg.gap_s;
                pulses.push((c, row(t), row(t + cfg.pulse_s), sign * cfg.command));
                t += cfg.pulse_s;
            }
        }
    }
    let end = t + 2.0 * cfg.gap_s.max(period / 2.0);
    let n = (end / dt).floor() as usize + 1;
    let mut commands = vec![vec![0.0; n]; nr];
    for &(c, on, off, cmd) in &pulses {
        commands[c][on.min(n)..off.min(n)].fill(cmd);
    }
    commands
}

/// The log as CSV text: time (s), the field (nT) of ambient, drift, wander, every rod's
/// dipole and white noise seeded by `seed`, then the command columns.
fn log_csv(
    cfg: &PolarityConfig,
    seed: u64,
    dt: f64,
    per_am2: &[Vector3<f64>],
    moments: &[Vec<f64>],
    commands: &[Vec<f64>],
) -> Result<String, Error> {
    let n = commands.first().map_or(0, Vec::len);
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let noise =
        Normal::new(0.0, cfg.noise_nt.max(0.0)).map_err(|e| Error::Usage(format!("noise: {e}")))?;
    let mut csv = String::with_capacity(n * 80);
    csv.push_str("# synthetic torque-rod pulse log (magproof sim)\nt,bx [nT],by [nT],bz [nT]");
    for r in &cfg.rods {
        let _ = write!(csv, ",cmd_{}", r.name);
    }
    csv.push('\n');
    for i in 0..n {
        let ti = i as f64 * dt;
        let mut b = cfg.ambient_nt
            + cfg.drift_nt_per_s * ti
            + Vector3::repeat(
                cfg.wander_nt * (std::f64::consts::TAU * ti / cfg.wander_period_s).sin(),
            );
        for (k, m) in moments.iter().enumerate() {
            b += per_am2[k] * m[i];
        }
        let _ = write!(
            csv,
            "{:.4},{:.3},{:.3},{:.3}",
            ti,
            b.x + noise.sample(&mut rng),
            b.y + noise.sample(&mut rng),
            b.z + noise.sample(&mut rng)
        );
        for col in commands {
            let _ = write!(csv, ",{}", col[i]);
        }
        csv.push('\n');
    }
    Ok(csv)
}

/// Dipole of every physical rod at every sample time, A·m² along its axis: the target
/// (dipole per command × command while driven, the remanent dipole of the last pulse's
/// sign once off) delayed by the lag and passed through the first-order rise, exactly
/// for a command that changes only at sample times. `commands[c]` is command column c;
/// `drives[c]` the physical rod it drives.
fn rod_moments(
    cfg: &PolarityConfig,
    drives: &[usize],
    commands: &[Vec<f64>],
    dt_s: f64,
) -> Vec<Vec<f64>> {
    let n = commands.first().map_or(0, Vec::len);
    let mut out = vec![vec![0.0; n]; cfg.rods.len()];
    for (c, col) in commands.iter().enumerate() {
        let k = drives[c];
        let rod = &cfg.rods[k];
        let sign = if rod.reversed { -1.0 } else { 1.0 };
        let per_command = sign * rod.gain * rod.dipole_per_command_am2;
        // Target per row, and its changes (time of the row, step).
        let mut last_sign = 0.0;
        let target: Vec<f64> = col
            .iter()
            .map(|&u| {
                if u != 0.0 {
                    last_sign = (sign * u).signum();
                    per_command * u
                } else {
                    rod.remanent_am2 * last_sign
                }
            })
            .collect();
        // The rod is at rest (target 0) before the log starts.
        let before = |j: usize| if j == 0 { 0.0 } else { target[j - 1] };
        let edges: Vec<(f64, f64)> = (0..n)
            .filter(|&j| (target[j] - before(j)).abs() > 0.0)
            .map(|j| (j as f64 * dt_s + cfg.lag_s, target[j] - before(j)))
            .collect();
        let m = &mut out[k];
        let mut next = 0; // first edge not yet reached
        let mut level = 0.0; // target reached so far (sum of the passed steps)
        let mut tail = 0.0; // Σ steps · exp(−(t − tₑ)/τ) over the passed edges
        for (i, mi) in m.iter_mut().enumerate() {
            let ti = i as f64 * dt_s;
            if cfg.rise_time_s > 0.0 {
                tail *= (-dt_s / cfg.rise_time_s).exp();
            }
            while next < edges.len() && edges[next].0 <= ti + 1e-9 * dt_s {
                let (te, step) = edges[next];
                level += step;
                if cfg.rise_time_s > 0.0 {
                    tail += step * (-(ti - te).max(0.0) / cfg.rise_time_s).exp();
                }
                next += 1;
            }
            *mi = level - tail;
        }
    }
    out
}

fn truth(
    cfg: &PolarityConfig,
    seed: u64,
    drives: &[usize],
    per_am2: &[Vector3<f64>],
) -> PolarityTruth {
    let rods = cfg
        .rods
        .iter()
        .enumerate()
        .map(|(c, r)| {
            let k = drives[c];
            let phys = &cfg.rods[k];
            let sign = if phys.reversed { -1.0 } else { 1.0 };
            let coupling = per_am2[k] * (sign * phys.gain * phys.dipole_per_command_am2);
            let verdict = if phys.gain == 0.0 {
                "no-response"
            } else if k != c {
                "wrong-axis"
            } else if phys.reversed {
                "reversed"
            } else {
                "ok"
            };
            let gain_ratio = coupling.norm() / per_am2[c].norm() / r.dipole_per_command_am2;
            RodTruth {
                name: r.name.clone(),
                coupling_nt_per_command: coupling.into(),
                verdict: verdict.into(),
                drives_rod: phys.name.clone(),
                gain_ratio,
                remanent_offset_nt: (per_am2[k] * (sign * phys.remanent_am2)).into(),
            }
        })
        .collect();
    PolarityTruth {
        seed,
        lag_s: cfg.lag_s,
        rise_time_s: cfg.rise_time_s,
        noise_nt: cfg.noise_nt,
        rods,
    }
}

fn plan_toml(cfg: &PolarityConfig) -> String {
    let v = |x: &Vector3<f64>| format!("[{}, {}, {}]", x.x, x.y, x.z);
    let m = &cfg.sensor_to_body;
    let rot = format!(
        "[[{}, {}, {}], [{}, {}, {}], [{}, {}, {}]]",
        m[(0, 0)],
        m[(0, 1)],
        m[(0, 2)],
        m[(1, 0)],
        m[(1, 1)],
        m[(1, 2)],
        m[(2, 0)],
        m[(2, 1)],
        m[(2, 2)]
    );
    let mut s = String::from(
        "# synthetic polarity test plan (magproof sim)\n[article]\nserial = \"SIM-ROD-1\"\nbuild = \"B1\"\n\n",
    );
    if cfg.as_probe {
        let _ = writeln!(
            s,
            "[probe]\nposition_m = {}\nsensor_to_body = {rot}\n",
            v(&cfg.sensor_position_m)
        );
    } else {
        let _ = writeln!(
            s,
            "[magnetometer]\nposition_m = {}\nsensor_to_body = {rot}\nunit = \"nT\"\n",
            v(&cfg.sensor_position_m)
        );
    }
    for r in &cfg.rods {
        let _ = writeln!(
            s,
            "[[rod]]\nname = \"{}\"\naxis_body = {}\nposition_m = {}\ndipole_per_command_am2 = {}\nlength_m = {}\n",
            r.name,
            v(&r.axis_body),
            v(&r.position_m),
            r.dipole_per_command_am2,
            r.length_m
        );
    }
    if let Some(a) = cfg.angle_max_deg {
        let _ = writeln!(s, "[limits]\npolarity_angle_max_deg = {a}");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    #[test]
    fn log_and_plan_are_readable() {
        let sim = simulate_polarity(&PolarityConfig::default(), 1).unwrap();
        let plan = crate::log::plan::parse_plan(&sim.plan_toml, Path::new("p.toml")).unwrap();
        assert_eq!(plan.rods.len(), 3);
        let log = crate::log::read_sweep_from(
            sim.csv.as_bytes(),
            Path::new("s.csv"),
            &Default::default(),
            &mut |_| {},
        )
        .unwrap();
        assert_eq!(log.commands.len(), 3);
        assert!(log.len() > 1000);
    }

    // One rod, no noise, drift or ambient field: after the +1 command turns on at
    // t_on, the field is G·m·(1 − exp(−(t − t_on − lag)/τ)) (first-order step response
    // after the delay), and once off it decays to the remanent field G·m_r.
    #[test]
    fn field_is_the_delayed_first_order_response_and_remanence_only_when_off() {
        let mut cfg = PolarityConfig {
            cycles: 1,
            noise_nt: 0.0,
            ambient_nt: Vector3::zeros(),
            drift_nt_per_s: Vector3::zeros(),
            wander_nt: 0.0,
            ..Default::default()
        };
        cfg.rods.truncate(1);
        let (lag, tau) = (cfg.lag_s, cfg.rise_time_s);
        let sim = simulate_polarity(&cfg, 1).unwrap();
        let rows: Vec<Vec<f64>> = sim
            .csv
            .lines()
            .skip(2)
            .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
            .collect();
        let c = Vector3::from(sim.truth.rods[0].coupling_nt_per_command);
        let rem = Vector3::from(sim.truth.rods[0].remanent_offset_nt);
        let (t_on, t_off) = (cfg.gap_s, cfg.gap_s + cfg.pulse_s);
        for r in &rows {
            let (t, b) = (r[0], Vector3::new(r[1], r[2], r[3]));
            let s = t - t_on - lag;
            let want = if s < 0.0 {
                Vector3::zeros()
            } else if t < t_off + lag {
                c * (1.0 - (-s / tau).exp())
            } else if t < t_off + cfg.gap_s {
                let k = 1.0 - (-(t - t_off - lag) / tau).exp();
                c * (1.0 - (-(t_off - t_on) / tau).exp()) * (1.0 - k) + rem * k
            } else {
                continue; // the negative pulse
            };
            assert!((b - want).norm() < 2e-3, "t {t}: {b} vs {want}");
        }
    }
}
