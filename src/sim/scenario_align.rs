//! The demo vehicle's alignment runs (sample-logs/tmr-0207-b*/align/): on integration
//! day of each build, before the other tests, the vehicle turns on a table in three
//! mounts with its magnetometer and gyro logging. In B1 the magnetometer's harness has
//! its sensor-x pair reversed (body +y then reads −x): `align` names the axis `flipped`;
//! the harness was re-terminated the same day, before B1's closeout logs were taken, so
//! those logs and their verdicts are as before.

use nalgebra::Vector3;

use super::align::{simulate_align, AlignConfig, AxisFault};
use super::align_gyro::GyroSim;
use super::scenario::{builds, SERIAL};
use crate::Error;

/// The align folders under `sample-logs/`, one per build in order.
pub const ALIGN_FOLDERS: [&str; 3] = [
    "tmr-0207-b1/align",
    "tmr-0207-b2/align",
    "tmr-0207-b3/align",
];

/// The configuration of one build's run: small mounting errors, B1's harness fault.
fn config(build: &str, reversed_mag_axis: bool) -> AlignConfig {
    AlignConfig {
        mounts: 3,
        headings: 12,
        per_heading: 4,
        misalign_deg: Vector3::new(0.4, -0.3, 0.6),
        // Sensor x reversed: with sensor x along body +y, body y reads −x.
        fault: if reversed_mag_axis {
            AxisFault::Flip(1)
        } else {
            AxisFault::None
        },
        noise_nt: 20.0,
        hard_iron_nt: Vector3::new(1_180.0, -760.0, 430.0),
        // The site's field in the table frame (IGRF-14 there, ≈ 47 900 nT, 63° dip),
        // as the facility's reference probe reads it.
        field_table_nt: Vector3::new(21_500.0, 600.0, -42_800.0),
        reference_in_plan: true,
        gyro: Some(GyroSim {
            misalign_deg: Vector3::new(0.2, 0.3, -0.25),
            ..GyroSim::default()
        }),
        tumble: false,
        mag_planned: super::scenario::sensor_to_body(),
        article: (SERIAL.to_string(), build.to_string()),
    }
}

/// Every align file: (path relative to `sample-logs/`, text).
pub fn align_files() -> Result<Vec<(String, String)>, Error> {
    let mut out = Vec::new();
    for (k, (b, folder)) in builds().iter().zip(ALIGN_FOLDERS).enumerate() {
        let cfg = config(b.build, b.build == "B1");
        let sim = simulate_align(&cfg, 2_100 + k as u64, "align.csv")?;
        let head = format!(
            "# Alignment run of the invented vehicle \"Tamarin\", serial {SERIAL}, build {}.\n\
             # Simulated data (magproof's simulators); see ../../README.md.\n\n",
            b.build
        );
        out.push((format!("{folder}/plan.toml"), head + &sim.plan));
        out.push((format!("{folder}/align.csv"), sim.csv));
    }
    Ok(out)
}
