//! `magproof simulate align` → `magproof align`: the binary names a flipped or swapped
//! axis, recovers a small misalignment within 3σ of the truth the simulator wrote,
//! reports one mount as inconclusive, refuses bad input with exit 2, and its closeout
//! step reaches the ledger.

use crate::util::{assert_code, assert_stderr_has, json_stdout, stdout, TestDir};

/// Simulate into `dir` with `flags`, then run `align --json` there: (exit code, JSON).
fn simulate_and_align(dir: &TestDir, flags: &[&str]) -> (i32, serde_json::Value) {
    let mut args = vec!["simulate", "align", "--seed", "3", "--out", ".", "--force"];
    args.extend_from_slice(flags);
    assert_code(&dir.run(&args), 0);
    let out = dir.run(&["align", "align.csv", "--plan", "plan.toml", "--json"]);
    (out.status.code().unwrap(), json_stdout(&out))
}

fn verdicts(j: &serde_json::Value) -> Vec<String> {
    j["axes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a["verdict"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_small_misalignment_passes_and_matches_the_truth_within_three_sigma() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--misalign-deg", "1.0,-0.8,0.6"]);
    assert_eq!(code, 0, "{j}");
    assert_eq!(j["verdict"], "pass");
    assert_eq!(j["handedness"], "right");
    assert_eq!(verdicts(&j), ["ok", "ok", "ok"]);
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("truth.json")).unwrap()).unwrap();
    for i in 0..3 {
        let v = j["misalignment_deg"][i].as_f64().unwrap();
        let s = j["misalignment_sigma_deg"][i].as_f64().unwrap();
        let t = truth["truth"]["misalignment_deg"][i].as_f64().unwrap();
        assert!(
            (v - t).abs() < 3.0 * s,
            "component {i}: {v} ± {s} vs truth {t}"
        );
    }
    for key in [
        "sensor_to_body_measured",
        "misalignment_total_deg",
        "field_table_nt",
        "residual_rms_nt",
        "gates",
        "pass",
        "warnings",
        "hard_iron_nt",
    ] {
        assert!(j.get(key).is_some(), "missing {key}");
    }
    assert!(j["gyro"].is_null());
}

#[test]
fn a_flipped_axis_fails_by_name() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--axis-fault", "flip-z"]);
    assert_eq!(code, 1);
    assert_eq!(verdicts(&j), ["ok", "ok", "flipped"]);
    assert_eq!(j["axes"][2]["measured"], "-z");
    assert_eq!(j["handedness"], "mirrored");
    assert!(j["misalignment_total_deg"].as_f64().unwrap() < 5.0);
    let text = stdout(&dir.run(&["align", "align.csv", "--plan", "plan.toml"]));
    assert!(text.contains("flipped") && text.contains("FAIL"), "{text}");
}

#[test]
fn a_swapped_pair_fails_by_name() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--axis-fault", "swap-yz"]);
    assert_eq!(code, 1);
    assert_eq!(verdicts(&j), ["ok", "swapped", "swapped"]);
    assert_eq!(j["axes"][1]["measured"], "+z");
}

#[test]
fn one_mount_is_inconclusive_with_a_null_vertical_component() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_align(&dir, &["--mounts", "1"]);
    assert_eq!(code, 1, "inconclusive is not a pass");
    assert_eq!(j["verdict"], "inconclusive");
    assert_eq!(verdicts(&j), ["inconclusive", "inconclusive", "ok"]);
    assert!(j["misalignment_deg"][2].is_null());
    assert!(j["misalignment_sigma_deg"][2].is_null());
}

#[test]
fn a_plan_without_align_test_and_a_bad_calibration_are_refused() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "align", "--seed", "1", "--out", "."]),
        0,
    );
    dir.write("bare.toml", "[article]\nserial = \"A\"\nbuild = \"B\"\n");
    let out = dir.run(&["align", "align.csv", "--plan", "bare.toml"]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["bare.toml", "[align_test]"]);
    dir.write("cal.json", "{\"soft_iron\": [[1,0,0],[0,1,0],[0,0,1]]}");
    let out = dir.run(&[
        "align",
        "align.csv",
        "--plan",
        "plan.toml",
        "--calibration",
        "cal.json",
    ]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["cal.json", "hard_iron_nt"]);
}

#[test]
fn the_plan_step_runs_in_closeout_and_reaches_the_ledger() {
    let dir = TestDir::new();
    let sim = [
        "simulate",
        "align",
        "--seed",
        "4",
        "--out",
        ".",
        "--misalign-deg",
        "0.3,0.2,0.1",
    ];
    assert_code(&dir.run(&sim), 0);
    let ledger = dir.join("ledger.db");
    let ledger = ledger.to_str().unwrap();
    let out = dir.run(&["closeout", "--json", "--ledger", ledger, "plan.toml"]);
    assert_code(&out, 0);
    assert!(stdout(&out).contains("\"align\""), "{}", stdout(&out));
    let out = dir.run(&["history", "--ledger", ledger, "--kind", "align", "--json"]);
    assert_code(&out, 0);
    assert!(
        stdout(&out).contains("misalignment_total_deg"),
        "{}",
        stdout(&out)
    );
}

#[test]
fn a_corrected_calibration_file_at_the_same_path_is_a_new_run() {
    // The dedupe key carries the calibration's SHA-256, not only its path: a file fixed
    // in place and re-run must be recorded, never "already recorded".
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "align", "--seed", "5", "--out", "."]),
        0,
    );
    let cal = |h: f64| {
        format!("{{\"hard_iron_nt\": [{h}, 0, 0], \"soft_iron\": [[1,0,0],[0,1,0],[0,0,1]]}}")
    };
    let run = || {
        let args = [
            "align",
            "align.csv",
            "--plan",
            "plan.toml",
            "--calibration",
            "cal.json",
            "--record",
            "--ledger",
            "l.db",
        ];
        let out = dir.run(&args);
        String::from_utf8_lossy(&out.stderr).to_string()
    };
    dir.write("cal.json", cal(0.0));
    let first = run();
    assert!(first.contains("recorded as run #1"), "{first}");
    let same = run();
    assert!(same.contains("already recorded as run #1"), "{same}");
    dir.write("cal.json", cal(40.0));
    let fixed = run();
    assert!(fixed.contains("recorded as run #2"), "{fixed}");
}
