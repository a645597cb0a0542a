//! The gyro part of `magproof align`, through the binary: `simulate align` with gyro
//! faults, scale and bias → `align --json` names each fault, recovers scale and bias
//! within 3σ of the truth the simulator wrote, never reports a flipped gyro axis as a
//! large misalignment; the hand tumble leaves the magnetometer's keys null; the report
//! lists the calibration file with its SHA-256.

use crate::util::{assert_code, assert_stderr_has, json_stdout, TestDir};

fn simulate_and_align(dir: &TestDir, flags: &[&str]) -> (i32, serde_json::Value) {
    let mut args = vec!["simulate", "align", "--seed", "7", "--out", ".", "--force"];
    args.extend_from_slice(flags);
    assert_code(&dir.run(&args), 0);
    let out = dir.run(&["align", "align.csv", "--plan", "plan.toml", "--json"]);
    (out.status.code().unwrap(), json_stdout(&out))
}

fn gyro_verdicts(j: &serde_json::Value) -> Vec<String> {
    j["gyro"]["axes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["verdict"].as_str().unwrap().to_string())
        .collect()
}

fn truth(dir: &TestDir) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.path().join("truth.json")).unwrap()).unwrap()
}

#[test]
fn a_good_gyro_passes_and_its_scale_and_bias_match_the_truth_within_three_sigma() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(
        &dir,
        &[
            "--gyro",
            "--gyro-scale",
            "1.02,0.98,1.0",
            "--misalign-deg",
            "0.5,0.3,-0.4",
        ],
    );
    assert_eq!(code, 0, "{j}");
    assert_eq!(gyro_verdicts(&j), ["ok", "ok", "ok"]);
    let t = truth(&dir);
    let g = &j["gyro"];
    for i in 0..3 {
        let f = |k: &str| g[k][i].as_f64().unwrap();
        let want = t["truth"]["gyro"]["scale"][i].as_f64().unwrap();
        assert!(
            (f("scale") - want).abs() < 3.0 * f("scale_sigma"),
            "scale {i}: {g}"
        );
        let want = t["truth"]["gyro"]["bias_deg_s"][i].as_f64().unwrap();
        assert!(
            (f("bias_deg_s") - want).abs() < 3.0 * f("bias_sigma_deg_s"),
            "bias {i}: {g}"
        );
    }
    assert_eq!(g["reference"], "table");
}

#[test]
fn a_flipped_gyro_axis_fails_by_name_and_not_as_a_large_misalignment() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--gyro-fault", "flip-z"]);
    assert_eq!(code, 1);
    assert_eq!(gyro_verdicts(&j), ["ok", "ok", "flipped"]);
    assert!(j["gyro"]["scale"][2].as_f64().unwrap() < -0.9);
    assert!(
        j["gyro"]["misalignment_total_deg"].as_f64().unwrap() < 2.0,
        "{j}"
    );
    // The magnetometer is as planned.
    assert!(j["axes"]
        .as_array()
        .unwrap()
        .iter()
        .all(|a| a["verdict"] == "ok"));
}

#[test]
fn swapped_gyro_axes_and_a_scale_error_are_named() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--gyro-fault", "swap-yz"]);
    assert_eq!(code, 1);
    assert_eq!(gyro_verdicts(&j), ["ok", "swapped", "swapped"]);
    let (code, j) = simulate_and_align(&dir, &["--gyro-scale", "0.9,1,1"]);
    assert_eq!(code, 1);
    let gate = j["gates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|g| g["name"] == "gyro_scale:x")
        .unwrap()
        .clone();
    assert_eq!(gate["ok"], false, "{gate}");
}

#[test]
fn a_hand_tumble_judges_the_gyro_and_leaves_the_magnetometer_keys_null() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--tumble", "--gyro-fault", "flip-x"]);
    assert_eq!(code, 1);
    assert_eq!(gyro_verdicts(&j), ["flipped", "ok", "ok"]);
    assert_eq!(j["gyro"]["reference"], "magnetometer");
    for k in [
        "sensor_to_body_measured",
        "axes",
        "handedness",
        "misalignment_deg",
    ] {
        assert!(j[k].is_null(), "{k}: {j}");
    }
}

#[test]
fn a_log_with_neither_angle_nor_gyro_is_refused_naming_both() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "align", "--seed", "1", "--out", "."]),
        0,
    );
    dir.write("flat.csv", "t,bx,by,bz\n0,1,2,3\n1,1,2,3\n2,1,2,3\n");
    let out = dir.run(&["align", "flat.csv", "--plan", "plan.toml"]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["flat.csv", "angle", "gx, gy, gz"]);
}

#[test]
fn the_report_lists_the_calibration_with_its_sha256() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "align", "--seed", "2", "--out", "."]),
        0,
    );
    let cal = "{\"hard_iron_nt\": [250, -120, 60], \"soft_iron\": [[1,0,0],[0,1,0],[0,0,1]]}";
    dir.write("cal.json", cal);
    let args = [
        "align",
        "align.csv",
        "--plan",
        "plan.toml",
        "--calibration",
        "cal.json",
        "--report",
        "rep",
    ];
    dir.run(&args);
    let html = std::fs::read_to_string(dir.path().join("rep/report.html")).unwrap();
    // SHA-256 of the bytes above, computed once with GNU coreutils' sha256sum.
    let sha = "20454def1dbc138c890060d8d9e49c82d6e896c06c02aa6f97ddab4d67e34ae0";
    assert!(
        html.contains("cal.json") && html.contains(sha),
        "no calibration input"
    );
}
