//! What a simulated polarity test returns: the log, the plan and the truth behind them.

use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::Error;

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
