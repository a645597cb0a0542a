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
//! for tests, rehearsal and the demo.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use nalgebra::{Matrix3, Vector3};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use crate::physics::dipole::dipole_matrix;
use crate::Error;

/// One simulated rod: what the plan says about it and how it is really built and wired.
#[derive(Debug, Clone)]
pub struct SimRod {
    /// Name (log column `cmd_<name>`).
    pub name: String,
    /// Positive dipole direction for a positive command, body frame (B), unit vector.
    pub axis_body: Vector3<f64>,
    /// Rod centre, body frame (B), m.
    pub position_m: Vector3<f64>,
    /// Nominal dipole per command unit, A·m² (written to the plan).
    pub dipole_per_command_am2: f64,
    /// Rod length, m (written to the plan).
    pub length_m: f64,
    /// True dipole over nominal (1 = as designed, 0 = dead rod).
    pub gain: f64,
    /// Wired backwards: a positive command gives a negative dipole.
    pub reversed: bool,
    /// Remanent dipole once the rod is off after a pulse, A·m² (along the axis, sign of
    /// the last pulse); while the rod is driven its dipole is set by the command alone.
    pub remanent_am2: f64,
}

/// Settings of a simulated polarity test.
#[derive(Debug, Clone)]
pub struct PolarityConfig {
    /// The rods, in plan order.
    pub rods: Vec<SimRod>,
    /// Two rods (indices) whose command lines drive each other's coils.
    pub swapped: Option<(usize, usize)>,
    /// Sensor position, body frame (B), m.
    pub sensor_position_m: Vector3<f64>,
    /// Sensor mounting: `v_b = sensor_to_body · v_s`.
    pub sensor_to_body: Matrix3<f64>,
    /// Write the sensor as a `[probe]` instead of `[magnetometer]` in the plan.
    pub as_probe: bool,
    /// Sample rate, Hz.
    pub sample_rate_hz: f64,
    /// Pulse length, s.
    pub pulse_s: f64,
    /// Quiet gap before each pulse, s.
    pub gap_s: f64,
    /// Number of (+, −) pulse pairs per rod.
    pub cycles: usize,
    /// Command amplitude, command units.
    pub command: f64,
    /// Command-to-dipole pure delay, s.
    pub lag_s: f64,
    /// First-order rise/fall time constant of the rod's dipole, s (0 = instant).
    pub rise_time_s: f64,
    /// Ambient field, sensor frame (S), nT.
    pub ambient_nt: Vector3<f64>,
    /// Linear drift, sensor frame, nT/s.
    pub drift_nt_per_s: Vector3<f64>,
    /// Amplitude of a slow sinusoidal wander on every axis, nT.
    pub wander_nt: f64,
    /// Period of the wander, s.
    pub wander_period_s: f64,
    /// White noise σ per axis, nT.
    pub noise_nt: f64,
    /// Angle limit written to the plan, deg (`None`: no `[limits]`).
    pub angle_max_deg: Option<f64>,
}

impl Default for PolarityConfig {
    /// Three rods in the lower bay of an invented 3U-class vehicle, sensor on the top deck.
    fn default() -> Self {
        let rod = |name: &str, axis: [f64; 3], pos: [f64; 3]| SimRod {
            name: name.into(),
            axis_body: Vector3::from(axis),
            position_m: Vector3::from(pos),
            dipole_per_command_am2: 0.2,
            length_m: 0.06,
            gain: 1.0,
            reversed: false,
            remanent_am2: 0.002,
        };
        Self {
            rods: vec![
                rod("x", [1.0, 0.0, 0.0], [0.0, 0.04, 0.0]),
                rod("y", [0.0, 1.0, 0.0], [0.04, 0.0, 0.0]),
                rod("z", [0.0, 0.0, 1.0], [-0.03, -0.03, 0.02]),
            ],
            swapped: None,
            sensor_position_m: Vector3::new(0.02, 0.015, 0.21),
            sensor_to_body: Matrix3::identity(),
            as_probe: false,
            sample_rate_hz: 50.0,
            pulse_s: 1.0,
            gap_s: 1.5,
            cycles: 2,
            command: 1.0,
            lag_s: 0.03,
            rise_time_s: 0.02,
            ambient_nt: Vector3::new(18_500.0, -4_200.0, -41_000.0),
            drift_nt_per_s: Vector3::new(0.8, -0.5, 0.3),
            wander_nt: 15.0,
            wander_period_s: 40.0,
            noise_nt: 3.0,
            angle_max_deg: Some(30.0),
        }
    }
}

/// The truth behind a simulated log.
#[derive(Debug, Clone, Serialize)]
pub struct PolarityTruth {
    /// Seed of the noise.
    pub seed: u64,
    /// Command-to-dipole pure delay, s.
    pub lag_s: f64,
    /// Rise time constant, s.
    pub rise_time_s: f64,
    /// White noise σ, nT.
    pub noise_nt: f64,
    /// Per rod, in plan order.
    pub rods: Vec<RodTruth>,
}

/// Truth for one rod (one command column).
#[derive(Debug, Clone, Serialize)]
pub struct RodTruth {
    /// Rod name.
    pub name: String,
    /// True response per unit command, sensor frame (S), nT.
    pub coupling_nt_per_command: [f64; 3],
    /// The verdict a correct check should give.
    pub verdict: String,
    /// For a swapped rod: the rod whose coil this command really drives.
    pub drives_rod: String,
    /// True dipole per command over nominal (magnitude).
    pub gain_ratio: f64,
    /// Remanent field after a positive pulse relative to the never-pulsed state,
    /// sensor frame, nT.
    pub remanent_offset_nt: [f64; 3],
}

/// A simulated log with its plan and truth.
#[derive(Debug, Clone)]
pub struct PolaritySim {
    /// The log, CSV text.
    pub csv: String,
    /// The plan, TOML text.
    pub plan_toml: String,
    /// The truth.
    pub truth: PolarityTruth,
}

impl PolaritySim {
    /// Write `<stem>.csv`, `<stem>.plan.toml` and `<stem>.truth.json` into `dir`;
    /// returns the three paths.
    pub fn write(&self, dir: &Path, stem: &str) -> Result<[PathBuf; 3], Error> {
        let paths = [
            dir.join(format!("{stem}.csv")),
            dir.join(format!("{stem}.plan.toml")),
            dir.join(format!("{stem}.truth.json")),
        ];
        let truth = serde_json::to_string_pretty(&self.truth)
            .map_err(|e| Error::Internal(format!("truth JSON: {e}")))?;
        for (p, text) in paths.iter().zip([&self.csv, &self.plan_toml, &truth]) {
            std::fs::write(p, text).map_err(|e| Error::io(p, e))?;
        }
        Ok(paths)
    }
}

/// Simulate a polarity test (see the module doc).
#[allow(clippy::needless_range_loop)] // command columns and physical rods are indexed together
pub fn simulate_polarity(cfg: &PolarityConfig, seed: u64) -> Result<PolaritySim, Error> {
    let nr = cfg.rods.len();
    if nr == 0 || cfg.cycles == 0 {
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
    // Which physical rod each command column drives.
    let mut drives: Vec<usize> = (0..nr).collect();
    if let Some((a, b)) = cfg.swapped {
        if a >= nr || b >= nr || a == b {
            return Err(Error::Usage(format!(
                "swapped rods ({a}, {b}) out of range"
            )));
        }
        drives.swap(a, b);
    }
    let body_to_sensor = cfg.sensor_to_body.transpose();
    // Field per A·m² of each physical rod's axis, sensor frame.
    let mut per_am2 = Vec::with_capacity(nr);
    for r in &cfg.rods {
        let g = dipole_matrix(&(cfg.sensor_position_m - r.position_m))
            .ok_or_else(|| Error::Usage(format!("rod {} sits at the sensor", r.name)))?;
        per_am2.push(body_to_sensor * g * r.axis_body.normalize());
    }
    // Schedule: per cycle, per rod: gap, +pulse, gap, −pulse; then a final gap. Edges
    // are rounded to the sample grid (rows `on..off` carry the command).
    let dt = 1.0 / cfg.sample_rate_hz;
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
    let moments = rod_moments(cfg, &drives, &commands, dt);

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
        for col in &commands {
            let _ = write!(csv, ",{}", col[i]);
        }
        csv.push('\n');
    }

    let truth = truth(cfg, seed, &drives, &per_am2);
    Ok(PolaritySim {
        csv,
        plan_toml: plan_toml(cfg),
        truth,
    })
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
