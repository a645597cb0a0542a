//! Calibration verdicts against simulated logs (library level): a good tumble at the
//! edges of what is normal passes its gates, and wrong-but-parseable logs — rod pulses,
//! turntable runs, a field in the wrong unit, coplanar data — never pass. Property tests
//! with proptest over the simulators' seeds (a few cases each, fixed by proptest's
//! deterministic runner).

use std::path::Path;

use magproof::check::calibrate::{run_calibrate, CalibrateOptions, CalibrationResult};
use magproof::check::{CheckInput, CheckRequest, Verdict};
use magproof::log::{read_sweep_from, ReadOptions};
use magproof::sim::dipole::{simulate_turntable, TurntableConfig};
use magproof::sim::polarity::{simulate_polarity, PolarityConfig};
use magproof::sim::{simulate_tumble, write_tumble_csv, SimCoverage, TumbleConfig};
use nalgebra::{Matrix3, Rotation3, Vector3};
use proptest::prelude::*;

/// Calibrate a CSV text as `calibrate` would, with an optional reference magnitude.
fn calibrate(csv: &str, reference_nt: Option<f64>) -> Result<CalibrationResult, magproof::Error> {
    let log = read_sweep_from(
        csv.as_bytes(),
        Path::new("log.csv"),
        &ReadOptions::default(),
        &mut |_| {},
    )?;
    let input = CheckInput::screen(log, Default::default(), None)?;
    let options = CalibrateOptions {
        reference_nt,
        ..Default::default()
    };
    run_calibrate(&CheckRequest::new(&input, None, options))
}

fn tumble_csv(cfg: &TumbleConfig, seed: u64) -> String {
    let sim = simulate_tumble(cfg, seed).unwrap();
    let mut buf = Vec::new();
    write_tumble_csv(&sim, &mut buf).unwrap();
    String::from_utf8(buf).unwrap()
}

/// Never a pass: refused as bad input, or a verdict that is not pass.
fn never_passes(r: Result<CalibrationResult, magproof::Error>) -> Result<(), TestCaseError> {
    if let Ok(res) = r {
        prop_assert_ne!(res.verdict, Verdict::Pass, "gates: {:?}", res.gates);
    }
    Ok(())
}

#[test]
fn a_full_tumble_with_50_nt_noise_and_30_percent_soft_iron_passes() {
    // W with principal gains 1.3 and 1/1.3 about a tilted frame, 2 µT of hard iron.
    let r = Rotation3::from_euler_angles(0.3, -0.5, 0.8).into_inner();
    let w = r * Matrix3::from_diagonal(&Vector3::new(1.3, 1.0 / 1.3, 1.0)) * r.transpose();
    let cfg = TumbleConfig {
        noise_nt: 50.0,
        soft_iron: w,
        hard_iron_nt: Vector3::new(1500.0, -1200.0, 600.0),
        ..TumbleConfig::default()
    };
    let res = calibrate(&tumble_csv(&cfg, 5), Some(cfg.reference_nt)).unwrap();
    assert_eq!(res.verdict, Verdict::Pass, "{:?}", res.gates);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(6))]

    #[test]
    fn a_rod_pulse_log_never_passes_calibrate(seed in 0u64..10_000) {
        let sim = simulate_polarity(&PolarityConfig::default(), seed).unwrap();
        never_passes(calibrate(&sim.csv, None))?;
        never_passes(calibrate(&sim.csv, Some(48_000.0)))?;
    }

    #[test]
    fn a_turntable_log_never_passes_calibrate(seed in 0u64..10_000) {
        let sim = simulate_turntable(&TurntableConfig::default(), seed).unwrap();
        never_passes(calibrate(&sim.log_csv, None))?;
    }

    #[test]
    fn a_tumble_in_the_wrong_unit_never_passes(
        seed in 0u64..10_000,
        scale in prop::sample::select(vec![1e-3, 1e-2, 1e3, 1e5, 1e-5]),
    ) {
        let cfg = TumbleConfig::default();
        let csv = tumble_csv(&cfg, seed);
        // Keep the numbers, drop the header's unit: as a lab export in another unit.
        let mut out = String::new();
        for (k, line) in csv.lines().filter(|l| !l.starts_with('#')).enumerate() {
            if k == 0 {
                out.push_str("t,bx,by,bz\n");
                continue;
            }
            let v: Vec<f64> = line.split(',').map(|c| c.parse().unwrap()).collect();
            out.push_str(&format!("{},{},{},{}\n", v[0], v[1] * scale, v[2] * scale, v[3] * scale));
        }
        never_passes(calibrate(&out, Some(cfg.reference_nt)))?;
    }

    #[test]
    fn a_coplanar_tumble_never_passes(seed in 0u64..10_000) {
        let cfg = TumbleConfig { coverage: SimCoverage::Plane, ..TumbleConfig::default() };
        never_passes(calibrate(&tumble_csv(&cfg, seed), Some(cfg.reference_nt)))?;
    }
}
