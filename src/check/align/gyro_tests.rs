//! The gyro part, round trips: simulated gyro columns with known faults, scale and bias
//! → `run_align` → each fault named as such, scale and bias within 3σ of the truth.

use nalgebra::Vector3;

use super::tests::{mag, run};
use super::*;
use crate::sim::align::{AlignConfig, AxisFault};
use crate::sim::align_gyro::GyroSim;

fn table(gyro: GyroSim, mounts: usize) -> AlignConfig {
    AlignConfig {
        misalign_deg: Vector3::new(0.4, -0.3, 0.2),
        mounts,
        gyro: Some(gyro),
        ..AlignConfig::default()
    }
}

fn gyro_verdicts(r: &AlignResult) -> Vec<AxisVerdict> {
    r.gyro
        .as_ref()
        .unwrap()
        .axes
        .iter()
        .map(|a| a.verdict)
        .collect()
}

fn within_3_sigma(v: Option<f64>, s: Option<f64>, truth: f64, what: &str) {
    let (v, s) = (v.unwrap(), s.unwrap());
    assert!(
        s > 0.0 && (v - truth).abs() < 3.0 * s,
        "{what}: {v} ± {s} vs {truth}"
    );
}

#[test]
fn a_good_gyro_on_the_table_passes_with_scale_bias_and_mapping_within_three_sigma() {
    let sim = GyroSim {
        scale: Vector3::new(1.01, 0.99, 1.0),
        ..GyroSim::default()
    };
    let r = run(&table(sim.clone(), 3), 11, None);
    let g = r.gyro.as_ref().unwrap();
    assert_eq!(gyro_verdicts(&r), vec![AxisVerdict::Ok; 3]);
    assert_eq!(g.reference, GyroReference::Table);
    // Mounts z-up, x-up and y-up spin body z, x and y.
    for i in 0..3 {
        within_3_sigma(g.scale[i], g.scale_sigma[i], sim.scale[i], "scale");
    }
    assert_eq!(g.handedness, Handedness::Right);
    for i in 0..3 {
        within_3_sigma(
            g.bias_deg_s[i],
            g.bias_sigma_deg_s[i],
            sim.bias_deg_s[i],
            "bias",
        );
        within_3_sigma(
            g.misalignment_deg[i],
            g.misalignment_sigma_deg[i],
            sim.misalign_deg[i],
            "gyro misalignment",
        );
    }
    assert_eq!(r.verdict, Verdict::Pass, "{:?}", r.gates);
    assert!(r.gates.iter().any(|g| g.name == "gyro_scale:x" && g.ok));
}

#[test]
fn a_flipped_gyro_axis_is_named_flipped_never_a_large_misalignment() {
    let sim = GyroSim {
        fault: AxisFault::Flip(0),
        ..GyroSim::default()
    };
    let r = run(&table(sim.clone(), 3), 12, None);
    let g = r.gyro.as_ref().unwrap();
    assert_eq!(
        gyro_verdicts(&r),
        vec![AxisVerdict::Flipped, AxisVerdict::Ok, AxisVerdict::Ok]
    );
    assert_eq!(g.handedness, Handedness::Mirrored);
    within_3_sigma(g.scale[0], g.scale_sigma[0], -1.0, "flipped scale");
    assert!(
        (g.misalignment_total_deg - sim.misalign_deg.norm()).abs() < 0.3,
        "{}",
        g.misalignment_total_deg
    );
    assert_eq!(r.verdict, Verdict::Fail);
    // The magnetometer is unaffected.
    assert!(mag(&r).axes.iter().all(|a| a.verdict == AxisVerdict::Ok));
}

#[test]
fn swapped_gyro_axes_are_named_swapped() {
    let sim = GyroSim {
        fault: AxisFault::Swap(0, 2),
        ..GyroSim::default()
    };
    let r = run(&table(sim, 3), 13, None);
    assert_eq!(
        gyro_verdicts(&r),
        vec![AxisVerdict::Swapped, AxisVerdict::Ok, AxisVerdict::Swapped]
    );
    assert_eq!(r.verdict, Verdict::Fail);
}

#[test]
fn a_scale_error_fails_its_gate_and_is_recovered_within_three_sigma() {
    let sim = GyroSim {
        scale: Vector3::new(1.0, 1.0, 1.08),
        ..GyroSim::default()
    };
    let r = run(&table(sim, 3), 14, None);
    let g = r.gyro.as_ref().unwrap();
    within_3_sigma(g.scale[2], g.scale_sigma[2], 1.08, "scale z");
    assert_eq!(gyro_verdicts(&r), vec![AxisVerdict::Ok; 3]);
    let gate = r.gates.iter().find(|g| g.name == "gyro_scale:z").unwrap();
    assert!(!gate.ok);
    assert_eq!(r.verdict, Verdict::Fail);
}

#[test]
fn two_mounts_leave_the_axis_never_spun_inconclusive_and_the_verdict_with_it() {
    let sim = GyroSim {
        fault: AxisFault::Flip(1),
        ..GyroSim::default()
    };
    // Body y is never turned: its reversal cannot be seen, and is not guessed.
    let r = run(&table(sim, 2), 19, None);
    let g = r.gyro.as_ref().unwrap();
    assert_eq!(
        gyro_verdicts(&r),
        vec![AxisVerdict::Ok, AxisVerdict::Inconclusive, AxisVerdict::Ok]
    );
    assert!(g.scale[1].is_none());
    assert_eq!(g.handedness, Handedness::Inconclusive);
    assert!(g.misalignment_deg.iter().all(Option::is_some));
    assert_eq!(r.verdict, Verdict::Inconclusive, "{:?}", r.gates);
}

#[test]
fn one_mount_spins_one_axis_the_others_are_inconclusive_with_null_scale() {
    let r = run(&table(GyroSim::default(), 1), 15, None);
    let g = r.gyro.as_ref().unwrap();
    assert_eq!(
        gyro_verdicts(&r),
        vec![
            AxisVerdict::Inconclusive,
            AxisVerdict::Inconclusive,
            AxisVerdict::Ok
        ]
    );
    assert!(g.scale[0].is_none() && g.scale[1].is_none() && g.scale[2].is_some());
    let json = serde_json::to_value(&r).unwrap();
    assert!(json["gyro"]["scale"][0].is_null());
    assert_eq!(json["gyro"]["axes"][2]["verdict"], "ok");
}

fn tumble(gyro: GyroSim) -> AlignConfig {
    AlignConfig {
        misalign_deg: Vector3::zeros(),
        gyro: Some(gyro),
        tumble: true,
        ..AlignConfig::default()
    }
}

#[test]
fn a_hand_tumble_judges_the_gyro_against_the_magnetometer() {
    let sim = GyroSim {
        bias_deg_s: Vector3::new(0.2, -0.1, 0.15),
        scale: Vector3::new(1.0, 1.03, 1.0),
        ..GyroSim::default()
    };
    let cal = Calibration {
        hard_iron_nt: AlignConfig::default().hard_iron_nt,
        soft_iron: nalgebra::Matrix3::identity(),
    };
    let r = run(&tumble(sim.clone()), 16, Some(cal));
    let g = r.gyro.as_ref().unwrap();
    assert_eq!(g.reference, GyroReference::Magnetometer);
    assert_eq!(gyro_verdicts(&r), vec![AxisVerdict::Ok; 3]);
    for i in 0..3 {
        within_3_sigma(g.scale[i], g.scale_sigma[i], sim.scale[i], "tumble scale");
        within_3_sigma(
            g.bias_deg_s[i],
            g.bias_sigma_deg_s[i],
            sim.bias_deg_s[i],
            "tumble bias",
        );
        within_3_sigma(
            g.misalignment_deg[i],
            g.misalignment_sigma_deg[i],
            sim.misalign_deg[i],
            "tumble misalignment",
        );
    }
    assert!(r.magnetometer.0.is_none());
    let json = serde_json::to_value(&r).unwrap();
    for k in result::MAG_KEYS {
        assert!(json[k].is_null(), "{k} should be null on a hand tumble");
    }
    assert_eq!(r.verdict, Verdict::Pass, "{:?}", r.gates);
}

#[test]
fn a_hand_tumble_names_a_flipped_gyro_axis() {
    let sim = GyroSim {
        fault: AxisFault::Flip(1),
        ..GyroSim::default()
    };
    let r = run(&tumble(sim), 17, None);
    assert_eq!(
        gyro_verdicts(&r),
        vec![AxisVerdict::Ok, AxisVerdict::Flipped, AxisVerdict::Ok]
    );
    assert!(r.warnings.contains(&AlignWarning::TumbleUncalibrated));
    assert!(r.gyro.as_ref().unwrap().misalignment_total_deg < 2.0);
    assert_eq!(r.verdict, Verdict::Fail);
}

#[test]
fn the_magnetometer_keys_serialise_as_the_null_list() {
    let r = run(&table(GyroSim::default(), 2), 18, None);
    let json = serde_json::to_value(&r).unwrap();
    for k in result::MAG_KEYS {
        assert!(json.get(k).is_some(), "{k}");
    }
    let obj = serde_json::to_value(mag(&r)).unwrap();
    assert_eq!(obj.as_object().unwrap().len(), result::MAG_KEYS.len());
}
