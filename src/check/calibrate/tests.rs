//! Tests of `run_calibrate` on simulated logs: frames, saturation, coverage warnings.

use super::*;
use crate::log::plan::parse_plan;
use crate::sim::{
    simulate_cage, simulate_tumble, write_cage_csv, write_tumble_csv, CageConfig, SimCoverage,
    TumbleConfig,
};
use approx::assert_relative_eq;
use nalgebra::Rotation3;

/// Read and screen `log` as closeout would, then calibrate.
fn calibrate(
    log: &Path,
    plan: Option<&str>,
    reference_nt: Option<f64>,
    keep_samples: bool,
) -> Result<CalibrationResult, Error> {
    let plan = plan.map(|t| parse_plan(t, Path::new("plan.toml")).unwrap());
    let options = crate::check::InputOptions {
        plan_range_applies: true,
        ..Default::default()
    };
    let input = crate::check::CheckInput::read(log, plan.as_ref(), &options)?;
    let opts = CalibrateOptions {
        reference_nt,
        robust: Robust::Tukey,
        keep_samples,
    };
    run_calibrate(&CheckRequest::new(&input, plan.as_ref(), opts))
}

use crate::log::ReadOptions;
use std::path::Path;
use std::path::PathBuf;

fn tumble_file(dir: &Path, cfg: &TumbleConfig, seed: u64) -> PathBuf {
    let sim = simulate_tumble(cfg, seed).unwrap();
    let p = dir.join("tumble.csv");
    write_tumble_csv(&sim, std::fs::File::create(&p).unwrap()).unwrap();
    p
}

#[test]
fn saturated_readings_are_left_out_and_counted() {
    let dir = tempfile::tempdir().unwrap();
    let log = tumble_file(dir.path(), &TumbleConfig::default(), 21);
    let plan = "[magnetometer]\nrange_nt = 46000.0\n";
    let res = calibrate(&log, Some(plan), Some(48_000.0), true).unwrap();
    assert!(res.samples_rejected > 0);
    assert_eq!(res.samples_used + res.samples_rejected, 1000);
    assert!(res.warnings.iter().any(|w| matches!(
        w,
        CalibrationWarning::Input(crate::check::InputWarning::Saturated { .. })
    )));
}

#[test]
fn hemisphere_tumble_warns_low_coverage() {
    let dir = tempfile::tempdir().unwrap();
    let cfg = TumbleConfig {
        coverage: SimCoverage::Hemisphere,
        ..TumbleConfig::default()
    };
    let log = tumble_file(dir.path(), &cfg, 8);
    let res = calibrate(&log, None, Some(48_000.0), true).unwrap();
    assert!(res.coverage <= 0.55, "{}", res.coverage);
    assert!(
        res.warnings
            .iter()
            .any(|w| matches!(w, CalibrationWarning::LowCoverage { .. })),
        "{:?}",
        res.warnings
    );
    let hard = res.hard_iron_sigma_nt;
    assert!(hard[2] > hard[0] && hard[2] > hard[1], "{hard:?}");
}

#[test]
fn cage_with_article_to_cage_gives_a_body_frame_correction_and_misalignment() {
    // Truth: h_B = P^T h_C, nominal sensor axes h_S = Q^T h_B, a 1.2° misalignment M,
    // a symmetric gain G: b = G M Q^T P^T h_C + b0. Polar decomposition of A·P = G·(M Q^T)
    // gives R = M Q^T, so the misalignment against the nominal Q is the angle of M.
    let p = crate::physics::frames::rotation_from_axes(&["+y", "-x", "+z"]).unwrap();
    let q = crate::physics::frames::rotation_from_axes(&["+x", "-z", "+y"]).unwrap();
    let m = Rotation3::from_axis_angle(&Vector3::y_axis(), 1.2f64.to_radians()).into_inner();
    let g = Matrix3::new(1.02, 0.003, -0.002, 0.003, 0.98, 0.004, -0.002, 0.004, 1.01);
    let cfg = CageConfig {
        response: g * m * q.transpose() * p.transpose(),
        noise_nt: 5.0,
        ..CageConfig::default()
    };
    let sim = simulate_cage(&cfg, 3).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("cage.csv");
    write_cage_csv(&sim, std::fs::File::create(&log).unwrap()).unwrap();
    let plan = "[magnetometer]\nsensor_to_body = [\"+x\", \"-z\", \"+y\"]\n\
                [cage]\narticle_to_cage = [\"+y\", \"-x\", \"+z\"]\n";
    let res = calibrate(&log, Some(plan), None, true).unwrap();
    assert_eq!(res.method, Method::Cage);
    assert_eq!(res.soft_iron_frame, "body");
    let w = Matrix3::from_fn(|i, j| res.soft_iron[i][j]);
    let want = p.transpose() * cfg.response.try_inverse().unwrap();
    assert_relative_eq!(w, want, epsilon = 2e-5);
    let cage = res.cage.unwrap();
    assert_relative_eq!(cage.misalignment_deg, 1.2, epsilon = 0.01);
    // Corrected readings are the body-frame applied field.
    let h_b = p.transpose() * sim.applied_nt[17];
    assert_relative_eq!(res.data.corrected_nt[17], h_b, epsilon = 40.0);
}

#[test]
fn bad_reference_is_a_usage_error() {
    let dir = tempfile::tempdir().unwrap();
    let log = tumble_file(dir.path(), &TumbleConfig::default(), 1);
    let e = calibrate(&log, None, Some(-5.0), true).unwrap_err();
    assert!(matches!(e, Error::Usage(_)), "{e}");
}

/// The readings and corrected field are kept for a report only; the result is the same
/// either way (the fit reads the log's columns in place when every row is used).
#[test]
fn per_sample_data_is_kept_only_when_asked() {
    let dir = tempfile::tempdir().unwrap();
    let log = tumble_file(dir.path(), &TumbleConfig::default(), 31);
    let with = calibrate(&log.clone(), None, Some(48_000.0), true).unwrap();
    let without = calibrate(&log, None, Some(48_000.0), false).unwrap();
    // Kept: one reading per row, as read from the log, and its correction.
    let read = crate::log::read_sweep(&log, &ReadOptions::default()).unwrap();
    let b = read.b_nt.unwrap();
    assert_eq!(with.data.samples_nt.len(), 1000);
    for (i, s) in with.data.samples_nt.iter().enumerate() {
        assert_eq!(*s, Vector3::new(b[0][i], b[1][i], b[2][i]));
    }
    let w = Matrix3::from_fn(|i, j| with.soft_iron[i][j]);
    let c = Vector3::from(with.hard_iron_nt);
    assert_eq!(with.data.corrected_nt.len(), 1000);
    assert_relative_eq!(
        with.data.corrected_nt[17],
        w * (with.data.samples_nt[17] - c),
        max_relative = 1e-12
    );
    // Not kept: empty, and every number of the result the same.
    assert!(without.data.samples_nt.is_empty() && without.data.corrected_nt.is_empty());
    assert_eq!(without.data.residuals_nt.len(), 1000);
    assert_eq!(
        serde_json::to_value(&with).unwrap(),
        serde_json::to_value(&without).unwrap()
    );
}
