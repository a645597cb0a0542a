//! A synthetic torque-rod bench run with known truth: a finite rod (uniformly magnetised
//! cylinder, [`crate::physics::finite_rod`]) whose moment saturates smoothly and lags the
//! current with one time constant, with hysteresis from a play (backlash) operator on
//! the current; probe stations around it, each running the staircase of docs/rods.md
//! between two rod-off segments; an ambient field drifting linearly; Gaussian noise.
//! Writes a bench log (CSV), a plan (TOML) and the truth (JSON).
//!
//! Moment model: I_eff follows I with a backlash of half-width `play_a`;
//! m = k·I_eff / (1 + |k·I_eff / m_sat|⁴)^¼ (linear, then saturating at m_sat). The
//! remanence at I = 0 after ±I_max is ±m(play_a). The truth's slope is what the
//! contract's definition gives on the noiseless level moments (least-squares line
//! through the levels with |I| ≤ I_max/2).

use std::fmt::Write as _;

use nalgebra::{Matrix3, Vector3};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use crate::physics::finite_rod::FiniteRod;
use crate::Error;

/// Rows of the demagnetising sequence before the last background.
const DEMAG_ROWS: usize = 30;

/// A probe station of the simulated bench.
#[derive(Debug, Clone)]
pub struct SimStation {
    /// Label in the log's `position` column.
    pub label: String,
    /// Probe position, rod frame, m.
    pub position_m: Vector3<f64>,
    /// Probe → rod rotation as signed axes for the plan, e.g. `["+x","+y","+z"]`.
    pub probe_to_rod: [&'static str; 3],
}

/// What the rod and the bench are like.
#[derive(Debug, Clone)]
pub struct RodBenchConfig {
    /// Serial written into the plan.
    pub serial: String,
    /// Batch written into the plan.
    pub batch: String,
    /// Small-signal moment per ampere, A·m²/A (negative: a reversed rod).
    pub moment_per_amp: f64,
    /// Saturation moment, A·m².
    pub saturation_am2: f64,
    /// Half-width of the hysteresis play, A.
    pub play_a: f64,
    /// Time constant of the moment after a current step, s.
    pub time_constant_s: f64,
    /// Rod (core) length, m.
    pub length_m: f64,
    /// Core diameter, m.
    pub core_diameter_m: f64,
    /// Core relative permeability written into the plan.
    pub core_mu_r: f64,
    /// Turns written into the plan.
    pub turns: f64,
    /// Coil diameter written into the plan, m.
    pub coil_diameter_m: f64,
    /// Current levels of the staircase (positive), A; the last is the largest.
    pub levels_a: Vec<f64>,
    /// Time at each level, s.
    pub step_s: f64,
    /// Sample rate, Hz.
    pub rate_hz: f64,
    /// Ambient field at t = 0, probe frame, nT.
    pub ambient_nt: Vector3<f64>,
    /// Ambient drift, nT/s.
    pub drift_nt_per_s: Vector3<f64>,
    /// Probe noise, 1σ per axis, nT.
    pub noise_nt: f64,
    /// Current noise, 1σ, A.
    pub current_noise_a: f64,
    /// Stations.
    pub stations: Vec<SimStation>,
    /// Limits written into the plan: rated current (A), |m| min (A·m²), remanence max
    /// (%), linearity max (%).
    pub limits: (f64, f64, f64, f64),
}

impl Default for RodBenchConfig {
    /// A 7 cm cored rod of 1.6 A·m²/A rated at 0.15 A, two stations on the axis (3 and
    /// 5 rod lengths) and one broadside (4), 200 Hz.
    fn default() -> Self {
        let l = 0.07;
        RodBenchConfig {
            serial: "TR-SIM-1".into(),
            batch: "B-SIM".into(),
            moment_per_amp: 1.6,
            saturation_am2: 0.32,
            play_a: 0.0015,
            time_constant_s: 0.03,
            length_m: l,
            core_diameter_m: 0.008,
            core_mu_r: 2000.0,
            turns: 600.0,
            coil_diameter_m: 0.010,
            levels_a: vec![0.03, 0.06, 0.09, 0.12, 0.15],
            step_s: 1.0,
            rate_hz: 200.0,
            ambient_nt: Vector3::new(18_200.0, -2_300.0, 41_700.0),
            drift_nt_per_s: Vector3::new(0.02, -0.01, 0.015),
            noise_nt: 0.5,
            current_noise_a: 1e-5,
            stations: vec![
                SimStation {
                    label: "axial-3L".into(),
                    position_m: Vector3::new(0.0, 0.0, 3.0 * l),
                    probe_to_rod: ["+x", "+y", "+z"],
                },
                SimStation {
                    label: "axial-5L".into(),
                    position_m: Vector3::new(0.0, 0.0, 5.0 * l),
                    probe_to_rod: ["+x", "+y", "+z"],
                },
                SimStation {
                    label: "side-4L".into(),
                    position_m: Vector3::new(4.0 * l, 0.0, 0.0),
                    probe_to_rod: ["+y", "-x", "+z"],
                },
            ],
            limits: (0.15, 0.2, 5.0, 10.0),
        }
    }
}

/// The truth behind a simulated bench run.
#[derive(Debug, Clone, Serialize)]
pub struct RodTruth {
    /// The slope by the contract's definition on the noiseless level moments, A·m²/A.
    pub moment_per_amp_am2_per_a: f64,
    /// The small-signal slope k, A·m²/A.
    pub small_signal_am2_per_a: f64,
    /// Remanence along +axis, A·m².
    pub remanence_am2: f64,
    /// Time constant, s.
    pub time_constant_s: f64,
    /// |m| at the largest current on the first rise, A·m².
    pub moment_at_max_am2: f64,
}

/// A simulated bench run.
#[derive(Debug, Clone)]
pub struct RodSim {
    /// The log, CSV.
    pub csv: String,
    /// The plan, TOML (its `[[step]]` names `rod.csv`).
    pub plan_toml: String,
    /// The truth.
    pub truth: RodTruth,
}

/// The backlash (play) operator: `state` follows `i` within ±`w`.
fn play(state: f64, i: f64, w: f64) -> f64 {
    state.max(i - w).min(i + w)
}

fn saturate(x: f64, m_sat: f64) -> f64 {
    x / (1.0 + (x / m_sat).powi(4)).powf(0.25)
}

/// The staircase of one station: 0, +up, +down, 0, −up, −down, 0, (demagnetise), 0;
/// `true` marks the level the demagnetising sequence precedes.
fn staircase(levels: &[f64]) -> Vec<(f64, bool)> {
    let mut s = vec![(0.0, false)];
    for sign in [1.0, -1.0] {
        s.extend(levels.iter().map(|i| (sign * i, false)));
        s.extend(levels.iter().rev().skip(1).map(|i| (sign * i, false)));
        s.push((0.0, false));
    }
    s.push((0.0, true));
    s
}

/// Simulate a bench run.
pub fn simulate_rod_bench(cfg: &RodBenchConfig, seed: u64) -> Result<RodSim, Error> {
    check_config(cfg)?;
    let mut noise = BenchNoise {
        rng: StdRng::seed_from_u64(seed),
        field_nt: Normal::new(0.0, cfg.noise_nt).map_err(|e| bad(&e.to_string()))?,
        current_a: Normal::new(0.0, cfg.current_noise_a).map_err(|e| bad(&e.to_string()))?,
    };
    let rod = FiniteRod {
        length_m: cfg.length_m,
        radius_m: cfg.core_diameter_m / 2.0,
    };
    let mut rows = LogRows {
        csv: String::from("t [s],i [A],bx [nT],by [nT],bz [nT],position\n"),
        t_s: 0.0,
        dt_s: 1.0 / cfg.rate_hz,
    };
    let mut level_moments: Vec<(f64, f64)> = Vec::new();
    for (si, st) in cfg.stations.iter().enumerate() {
        let moments = (si == 0).then_some(&mut level_moments);
        simulate_station(cfg, &rod, st, &mut noise, &mut rows, moments)?;
    }
    let truth = truth(cfg, &level_moments, moment_am2(cfg, cfg.play_a));
    Ok(RodSim {
        csv: rows.csv,
        plan_toml: plan_toml(cfg),
        truth,
    })
}

/// A usage error of the simulation.
fn bad(m: &str) -> Error {
    Error::Usage(format!("rod bench simulation: {m}"))
}

/// Refuse a configuration the bench run cannot be simulated from.
fn check_config(cfg: &RodBenchConfig) -> Result<(), Error> {
    if cfg.levels_a.len() < 2 || cfg.levels_a.iter().any(|i| !(i.is_finite() && *i > 0.0)) {
        return Err(bad("need at least two positive current levels"));
    }
    if !(cfg.rate_hz > 0.0 && cfg.step_s * cfg.rate_hz >= 10.0) {
        return Err(bad("each step needs at least 10 samples"));
    }
    if !(cfg.noise_nt >= 0.0 && cfg.saturation_am2 > 0.0 && cfg.time_constant_s >= 0.0) {
        return Err(bad(
            "noise, saturation and time constant must be non-negative",
        ));
    }
    Ok(())
}

/// The rod's moment (A·m²) at the effective current `ieff_a` (A): linear, then
/// saturating (module doc).
fn moment_am2(cfg: &RodBenchConfig, ieff_a: f64) -> f64 {
    saturate(cfg.moment_per_amp * ieff_a, cfg.saturation_am2)
}

/// The noise of the probe (nT, each axis) and of the current reading (A), drawn from one
/// seeded generator in row order.
struct BenchNoise {
    rng: StdRng,
    field_nt: Normal<f64>,
    current_a: Normal<f64>,
}

/// The log being written: rows of `t, i, b, position` at the bench's rate.
struct LogRows {
    csv: String,
    /// Time of the next row, s.
    t_s: f64,
    /// Sample interval, s.
    dt_s: f64,
}

impl LogRows {
    /// The ambient field (nT, probe frame) at the next row's time.
    fn ambient_nt(&self, cfg: &RodBenchConfig) -> Vector3<f64> {
        cfg.ambient_nt + cfg.drift_nt_per_s * self.t_s
    }

    /// Write one row (current A, field nT in the probe frame) and step the time.
    fn push(&mut self, i_a: f64, b_nt: &Vector3<f64>, label: &str) -> Result<(), Error> {
        let t = self.t_s;
        writeln!(
            self.csv,
            "{t:.4},{i_a:.6},{:.3},{:.3},{:.3},{label}",
            b_nt.x, b_nt.y, b_nt.z
        )
        .map_err(|e| Error::Internal(e.to_string()))?;
        self.t_s += self.dt_s;
        Ok(())
    }
}

/// One station's staircase (and its demagnetising sequence) into `rows`; when
/// `level_moments` is given, each level's current (A) and noiseless moment (A·m²).
fn simulate_station(
    cfg: &RodBenchConfig,
    rod: &FiniteRod,
    st: &SimStation,
    noise: &mut BenchNoise,
    rows: &mut LogRows,
    mut level_moments: Option<&mut Vec<(f64, f64)>>,
) -> Result<(), Error> {
    let rod_to_probe = rotation(&st.probe_to_rod)?.transpose();
    let unit_field = rod
        .field_nt(1.0, &st.position_m)
        .ok_or_else(|| bad("a station on the rod"))?;
    let rows_per_step = (cfg.step_s * cfg.rate_hz).round() as usize;
    let (mut ieff, mut m) = (0.0, 0.0);
    for (i_level, demag) in staircase(&cfg.levels_a) {
        if demag {
            // Demagnetise: a decaying alternating current (rows between levels),
            // leaving the rod at zero.
            let i_max = cfg.levels_a.iter().copied().fold(0.0, f64::max);
            for n in 0..DEMAG_ROWS {
                let i = i_max * (-0.85_f64).powi(n as i32 + 1);
                let b = rod_to_probe * (unit_field * moment_am2(cfg, i)) + rows.ambient_nt(cfg);
                rows.push(i, &b, &st.label)?;
            }
            ieff = 0.0;
            m = 0.0;
        }
        ieff = play(ieff, i_level, cfg.play_a);
        let target = moment_am2(cfg, ieff);
        if let Some(lm) = level_moments.as_deref_mut() {
            lm.push((i_level, target));
        }
        let start = m;
        for r in 0..rows_per_step {
            let since = (r as f64 + 0.5) * rows.dt_s;
            m = if cfg.time_constant_s > 0.0 {
                target + (start - target) * (-since / cfg.time_constant_s).exp()
            } else {
                target
            };
            let b = rod_to_probe * (unit_field * m)
                + rows.ambient_nt(cfg)
                + Vector3::from_fn(|_, _| noise.field_nt.sample(&mut noise.rng));
            let i = i_level + noise.current_a.sample(&mut noise.rng);
            rows.push(i, &b, &st.label)?;
        }
        m = target;
    }
    Ok(())
}

fn rotation(axes: &[&str; 3]) -> Result<Matrix3<f64>, Error> {
    crate::physics::frames::rotation_from_axes(axes).map_err(Error::Usage)
}

/// The truth by the contract's definitions on the noiseless level moments (the first
/// station's, the same at every station).
fn truth(cfg: &RodBenchConfig, levels: &[(f64, f64)], remanence: f64) -> RodTruth {
    let i_max = cfg.levels_a.iter().copied().fold(0.0, f64::max);
    let pts: Vec<&(f64, f64)> = levels
        .iter()
        .filter(|(i, _)| *i != 0.0 && i.abs() <= 0.5 * i_max + 1e-12)
        .collect();
    let n = pts.len() as f64;
    let xm = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let ym = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - xm).powi(2)).sum();
    let slope = pts.iter().map(|p| (p.0 - xm) * (p.1 - ym)).sum::<f64>() / sxx;
    let at_max = levels
        .iter()
        .find(|(i, _)| (*i - i_max).abs() < 1e-12)
        .map_or(f64::NAN, |p| p.1.abs());
    RodTruth {
        moment_per_amp_am2_per_a: slope,
        small_signal_am2_per_a: cfg.moment_per_amp,
        remanence_am2: remanence,
        time_constant_s: cfg.time_constant_s,
        moment_at_max_am2: at_max,
    }
}

fn plan_toml(cfg: &RodBenchConfig) -> String {
    let mut s = format!(
        "# synthetic rod bench plan (magproof simulate rod)\n\
         # The article on the bench is the rod: closeout files it under its serial.\n\
         [article]\nserial = \"{0}\"\nbuild = \"{1}\"\n\n\
         [rod_bench]\nserial = \"{0}\"\nbatch = \"{1}\"\nturns = {2}\nlength_m = {3}\n\
         coil_diameter_m = {4}\ncore_diameter_m = {5}\ncore_mu_r = {6}\n",
        cfg.serial,
        cfg.batch,
        cfg.turns,
        cfg.length_m,
        cfg.coil_diameter_m,
        cfg.core_diameter_m,
        cfg.core_mu_r
    );
    for st in &cfg.stations {
        let p = st.position_m;
        let _ = write!(
            s,
            "\n[[rod_bench.position]]\nlabel = \"{}\"\nposition_m = [{}, {}, {}]\n\
             probe_to_rod = [\"{}\", \"{}\", \"{}\"]\n",
            st.label, p.x, p.y, p.z, st.probe_to_rod[0], st.probe_to_rod[1], st.probe_to_rod[2]
        );
    }
    let (i, m, r, l) = cfg.limits;
    let _ = write!(
        s,
        "\n[limits]\nrod_current_max_a = {i}\nrod_moment_min_am2 = {m}\n\
         rod_remanence_max_pct = {r}\nrod_linearity_max_pct = {l}\n\n\
         [[step]]\nkind = \"rod\"\nlog = \"rod.csv\"\n"
    );
    s
}
