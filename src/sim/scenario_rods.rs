//! The demo scenario's rod batch: the three torque rods of the invented vehicle
//! "Tamarin" measured on the bench before integration (batch `R-2602`), each with its
//! plan and bench log, simulated from fixed seeds by [`crate::sim::rod`].
//!
//! - `TMR-TR-X` and `TMR-TR-Z`: healthy rods; they pass.
//! - `TMR-TR-Y`: its core keeps a high remanence (about 8 % of its moment at the rated
//!   current against a 5 % limit); the bench fails it.
//!
//! Every number here is invented; nothing comes from a real rod.

use nalgebra::Vector3;

use super::rod::{simulate_rod_bench, RodBenchConfig, SimStation};
use crate::Error;

/// The batch label of the three rods.
pub const BATCH: &str = "R-2602";

/// Folder of each rod under `sample-logs/`, in the order the demo closes them out.
pub const ROD_FOLDERS: [&str; 3] = ["rods/tmr-tr-x", "rods/tmr-tr-y", "rods/tmr-tr-z"];

/// One rod of the batch: (serial, moment per ampere A·m²/A, saturation A·m², play A,
/// |m| limit A·m², seed).
fn batch() -> [(&'static str, f64, f64, f64, f64, u64); 3] {
    [
        ("TMR-TR-X", 1.5, 0.30, 0.0012, 0.13, 2101),
        ("TMR-TR-Y", 1.5, 0.30, 0.0080, 0.13, 2102),
        ("TMR-TR-Z", 1.2, 0.24, 0.0010, 0.10, 2103),
    ]
}

/// The bench of every rod: 5 cm cored rods, rated 0.1 A, probe on the axis at 3 and 5
/// rod lengths, 100 Hz.
fn config(serial: &str, k: f64, m_sat: f64, play_a: f64, m_min: f64) -> RodBenchConfig {
    let l = 0.05;
    let station = |label: &str, n: f64| SimStation {
        label: label.into(),
        position_m: Vector3::new(0.0, 0.0, n * l),
        probe_to_rod: ["+x", "+y", "+z"],
    };
    RodBenchConfig {
        serial: serial.into(),
        batch: BATCH.into(),
        moment_per_amp: k,
        saturation_am2: m_sat,
        play_a,
        time_constant_s: 0.06,
        length_m: l,
        core_diameter_m: 0.006,
        core_mu_r: 1500.0,
        turns: 500.0,
        coil_diameter_m: 0.009,
        levels_a: vec![0.02, 0.04, 0.06, 0.08, 0.10],
        step_s: 1.0,
        rate_hz: 100.0,
        ambient_nt: Vector3::new(21_900.0, 1_310.0, 42_380.0),
        drift_nt_per_s: Vector3::new(0.03, -0.02, 0.01),
        noise_nt: 0.5,
        current_noise_a: 1e-5,
        stations: vec![station("axial-3L", 3.0), station("axial-5L", 5.0)],
        limits: (0.1, m_min, 5.0, 10.0),
    }
}

/// The rod batch's files: (path relative to `sample-logs/`, text).
pub fn rod_batch_files() -> Result<Vec<(String, String)>, Error> {
    let mut out = Vec::new();
    for ((serial, k, m_sat, play, m_min, seed), folder) in batch().into_iter().zip(ROD_FOLDERS) {
        let sim = simulate_rod_bench(&config(serial, k, m_sat, play, m_min), seed)?;
        out.push((format!("{folder}/plan.toml"), sim.plan_toml));
        out.push((format!("{folder}/rod.csv"), sim.csv));
    }
    Ok(out)
}
