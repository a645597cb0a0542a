//! Round trips through `sim::polarity`: known wiring faults, lag, drift and noise must
//! come back as the right verdicts and numbers.

use std::path::Path;

use approx::assert_relative_eq;
use nalgebra::Vector3;

use super::*;
use crate::log::plan::parse_plan;
use crate::log::read_sweep_from;
use crate::sim::polarity::{simulate_polarity, PolarityConfig, PolaritySim};

fn check(sim: &PolaritySim) -> PolarityResult {
    let plan = parse_plan(&sim.plan_toml, Path::new("sim.plan.toml")).unwrap();
    let log = read_sweep_from(
        sim.csv.as_bytes(),
        Path::new("sim.csv"),
        &Default::default(),
        &mut |_| {},
    )
    .unwrap();
    run_polarity(&PolarityRequest::new(&log, &plan)).unwrap()
}

fn verdicts(r: &PolarityResult) -> Vec<&'static str> {
    r.rods.iter().map(|r| r.verdict.as_str()).collect()
}

#[test]
fn healthy_rods_pass_with_coupling_lag_and_gain() {
    let sim = simulate_polarity(&PolarityConfig::default(), 11).unwrap();
    let r = check(&sim);
    eprintln!("{}", serde_json::to_string_pretty(&r).unwrap());
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
    assert!(r.pass);
    for (rod, truth) in r.rods.iter().zip(&sim.truth.rods) {
        let c = Vector3::from(rod.coupling_nt_per_command);
        let t = Vector3::from(truth.coupling_nt_per_command);
        assert!((c - t).norm() < 0.03 * t.norm(), "{}: {c} vs {t}", rod.name);
        assert_relative_eq!(
            rod.gain_ratio.unwrap(),
            truth.gain_ratio,
            max_relative = 0.03
        );
        assert!(rod.angle_to_expected_deg.unwrap() < 2.0);
    }
    assert!((r.lag_s - sim.truth.lag_s).abs() < 0.02, "lag {}", r.lag_s);
}

fn assert_close(got: [f64; 3], want: [f64; 3], tol_nt: f64, what: &str) {
    let d = Vector3::from(got) - Vector3::from(want);
    assert!(d.norm() < tol_nt, "{what}: got {got:?}, want {want:?}");
}

#[test]
fn remanence_and_settle_time_are_measured() {
    let sim = simulate_polarity(&PolarityConfig::default(), 12).unwrap();
    let r = check(&sim);
    for (rod, truth) in r.rods.iter().zip(&sim.truth.rods) {
        let rem = rod.remanent_offset_nt.unwrap();
        assert_close(rem, truth.remanent_offset_nt, 3.0, &rod.name);
        // Lag 0.03 s plus a 0.02 s first-order fall to within 3σ (3·3 nT of ~2000 nT:
        // ln(2000/9) ≈ 5.4 time constants ≈ 0.11 s), sampled every 0.02 s.
        let settle = rod.settle_time_s.unwrap();
        assert!(
            settle > 0.08 && settle < 0.25,
            "{}: settle {settle}",
            rod.name
        );
    }
}
