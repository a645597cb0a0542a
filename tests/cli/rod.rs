//! `magproof rod` and `magproof simulate rod` through the binary: the documented JSON keys
//! (docs/rods.md), exit codes, the report folder, the ledger under the rod's serial and
//! batch, and a closeout step of kind `rod`.

use crate::util::{assert_code, json_stdout, stdout, TestDir};

fn simulate(dir: &TestDir, extra: &[&str]) {
    let out = dir
        .magproof()
        .args(["simulate", "rod", "--seed", "3", "--out", "sim"])
        .args(extra)
        .output()
        .unwrap();
    assert_code(&out, 0);
}

#[test]
fn simulated_rod_passes_with_every_documented_key() {
    let dir = TestDir::new();
    simulate(&dir, &[]);
    let out = dir.run(&["rod", "sim/rod.csv", "--plan", "sim/plan.toml", "--json"]);
    assert_code(&out, 0);
    let j = json_stdout(&out);
    for key in [
        "moment_per_amp_am2_per_a",
        "moment_per_amp_sigma",
        "air_core_am2_per_a",
        "core_gain",
        "core_gain_predicted",
        "linearity_max_dev_pct",
        "saturation_current_a",
        "remanence_am2",
        "remanence_sigma_am2",
        "remanence_pct",
        "time_constant_s",
        "falloff_exponent",
        "polarity",
        "verdict",
        "gates",
        "pass",
        "warnings",
    ] {
        assert!(j.get(key).is_some(), "key {key} missing: {j}");
    }
    assert_eq!(j["polarity"], "ok");
    assert_eq!(j["verdict"], "pass");
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("sim/truth.json")).unwrap())
            .unwrap();
    let (m, s) = (
        j["moment_per_amp_am2_per_a"].as_f64().unwrap(),
        j["moment_per_amp_sigma"].as_f64().unwrap(),
    );
    let t = truth["truth"]["moment_per_amp_am2_per_a"].as_f64().unwrap();
    assert!((m - t).abs() <= 3.0 * s, "{m} ± {s} against {t}");
    let names: Vec<&str> = j["gates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| g["name"].as_str().unwrap())
        .collect();
    assert_eq!(
        names,
        [
            "polarity",
            "moment_min",
            "remanence_max",
            "linearity_max",
            "point_dipole_distance"
        ]
    );
}

#[test]
fn reversed_rod_exits_one_and_says_reversed() {
    let dir = TestDir::new();
    simulate(&dir, &["--reverse", "rod"]);
    let out = dir.run(&["rod", "sim/rod.csv", "--plan", "sim/plan.toml"]);
    assert_code(&out, 1);
    let text = stdout(&out);
    assert!(text.contains("reversed") && text.contains("FAIL"), "{text}");
}

#[test]
fn report_folder_holds_the_loop_falloff_and_step_figures() {
    let dir = TestDir::new();
    simulate(&dir, &[]);
    let out = dir.run(&[
        "rod",
        "sim/rod.csv",
        "--plan",
        "sim/plan.toml",
        "--report",
        "rep",
    ]);
    assert_code(&out, 0);
    let html = std::fs::read_to_string(dir.join("rep/report.html")).unwrap();
    for part in [
        "Moment against current",
        "log–log",
        "Step responses",
        "TR-SIM-1",
    ] {
        assert!(html.contains(part), "{part} missing from the report");
    }
}

#[test]
fn recorded_rods_are_filed_under_their_serial_and_batch() {
    let dir = TestDir::new();
    simulate(&dir, &[]);
    let out = dir.run(&[
        "rod",
        "sim/rod.csv",
        "--plan",
        "sim/plan.toml",
        "--record",
        "--ledger",
        "l.sqlite",
    ]);
    assert_code(&out, 0);
    let out = dir.run(&["history", "--ledger", "l.sqlite", "--kind", "rod", "--json"]);
    assert_code(&out, 0);
    let j = json_stdout(&out);
    let text = j.to_string();
    assert!(
        text.contains("TR-SIM-1") && text.contains("B-SIM"),
        "{text}"
    );
    assert!(text.contains("rod_moment_per_amp_am2_per_a"), "{text}");
}

#[test]
fn closeout_runs_a_rod_step() {
    let dir = TestDir::new();
    simulate(&dir, &[]);
    let out = dir.run(&[
        "closeout",
        "sim/plan.toml",
        "--json",
        "--ledger",
        "l.sqlite",
    ]);
    let text = stdout(&out);
    assert_code(&out, 0);
    assert!(text.contains("\"rod\""), "{text}");
}
