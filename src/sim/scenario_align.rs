//! The demo vehicle's alignment runs (sample-logs/tmr-0207-b*/align/): on integration
//! day of each build, before the other tests, the vehicle turns on a table in three
//! mounts with its magnetometer and gyro logging. Each folder holds the run with a plan
//! of its own (for `magproof align`), and each build's plan lists the run as its first
//! step, so the build's sign chain has the magnetometer and gyro proved.
//!
//! In B1 the first run finds the magnetometer's harness with its sensor-x pair reversed
//! (body +y then reads −x): `align` names the axis `flipped`. The harness was
//! re-terminated the same day and the run repeated (`align-retest.csv`, all axes ok)
//! before B1's other closeout logs were taken; B1's plan lists the repeat.

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

/// B1's repeated run after the harness was re-terminated, in B1's align folder.
pub const B1_RETEST_LOG: &str = "align-retest.csv";

/// The log a build's plan lists as its align step, relative to the build's folder.
pub fn build_step_log(build: &str) -> String {
    let log = if build == "B1" {
        B1_RETEST_LOG
    } else {
        "align.csv"
    };
    format!("align/{log}")
}

/// The `[align_test]` table with its mounts, as the align simulator writes it into a plan
/// (the same in every build): the text between `[align_test]` and the first step.
pub fn align_test_toml() -> Result<String, Error> {
    let sim = simulate_align(&config("B2", false), 2_101, "align.csv")?;
    let start = sim.plan.find("[align_test]");
    let end = sim.plan.find("[[step]]");
    match (start, end) {
        (Some(a), Some(b)) if a < b => Ok(sim.plan[a..b].trim_end().to_string() + "\n"),
        _ => Err(Error::Internal(
            "the align simulator's plan has no [align_test] table before its step".into(),
        )),
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
        if b.build == "B1" {
            let retest = simulate_align(&config(b.build, false), 2_110, B1_RETEST_LOG)?;
            out.push((format!("{folder}/{B1_RETEST_LOG}"), retest.csv));
        }
    }
    Ok(out)
}
