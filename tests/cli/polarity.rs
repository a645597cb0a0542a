//! `magproof polarity`: verdicts, exit codes, JSON keys of `docs/polarity.md`, parameter files and
//! refusals, on logs simulated from the dipole field (`magproof::sim::polarity`).

use std::path::PathBuf;

use magproof::sim::polarity::{simulate_polarity, PolarityConfig};
use serde::Deserialize;

use crate::util::{stderr, stdout, TestDir};

#[derive(Debug, Deserialize)]
#[allow(dead_code)]
struct Rod {
    name: String,
    verdict: String,
    angle_to_expected_deg: Option<f64>,
    coupling_nt_per_command: [f64; 3],
    snr: f64,
    gain_ratio: Option<f64>,
    #[serde(flatten)]
    extra: serde_json::Map<String, serde_json::Value>,
}

#[derive(Debug, Deserialize)]
#[allow(dead_code)]
struct Result {
    rods: Vec<Rod>,
    lag_s: f64,
    pass: bool,
    #[serde(flatten)]
    extra: serde_json::Map<String, serde_json::Value>,
}

fn simulated(dir: &TestDir, cfg: &PolarityConfig) -> (PathBuf, PathBuf) {
    let sim = simulate_polarity(cfg, 5).expect("simulate");
    let [csv, plan, _] = sim.write(dir.path(), "pulses").expect("write");
    (csv, plan)
}

fn run_json(dir: &TestDir, cfg: &PolarityConfig) -> (Option<i32>, Result) {
    let (csv, plan) = simulated(dir, cfg);
    let out = dir
        .magproof()
        .args(["polarity", "--json", "--plan"])
        .arg(&plan)
        .arg(&csv)
        .output()
        .unwrap();
    let text = stdout(&out);
    let r: Result = serde_json::from_str(&text)
        .unwrap_or_else(|e| panic!("one JSON object expected: {e}\n{text}"));
    (out.status.code(), r)
}

#[test]
fn healthy_rods_exit_zero_with_the_design_keys() {
    let dir = TestDir::new();
    let (code, r) = run_json(&dir, &PolarityConfig::default());
    assert_eq!(code, Some(0));
    assert!(r.pass);
    let verdicts: Vec<&str> = r.rods.iter().map(|r| r.verdict.as_str()).collect();
    assert_eq!(verdicts, ["ok", "ok", "ok"]);
    assert!(r.lag_s > 0.0);
    for rod in &r.rods {
        assert!(rod.snr > 50.0 && rod.gain_ratio.is_some());
        assert!(rod.extra.contains_key("settle_time_s"));
        assert!(rod.extra.contains_key("remanent_offset_nt"));
    }
}

#[test]
fn reversed_rod_exits_one_and_still_prints_the_whole_result() {
    let dir = TestDir::new();
    let mut cfg = PolarityConfig::default();
    cfg.rods[2].reversed = true;
    let (code, r) = run_json(&dir, &cfg);
    assert_eq!(code, Some(1));
    assert!(!r.pass);
    assert_eq!(r.rods.len(), 3);
    assert_eq!(r.rods[2].verdict, "reversed");
}

#[test]
fn swapped_rods_say_which_rod_they_match() {
    let dir = TestDir::new();
    let cfg = PolarityConfig {
        swapped: Some((1, 2)),
        ..Default::default()
    };
    let (code, r) = run_json(&dir, &cfg);
    assert_eq!(code, Some(1));
    assert_eq!(r.rods[1].verdict, "wrong-axis");
    assert_eq!(r.rods[1].extra["matches_rod"], "z");
    assert_eq!(r.rods[2].extra["matches_rod"], "y");
}

#[test]
fn table_fits_eighty_columns_and_uses_words() {
    let dir = TestDir::new();
    let mut cfg = PolarityConfig::default();
    cfg.rods[0].reversed = true;
    let (csv, plan) = simulated(&dir, &cfg);
    let out = dir
        .magproof()
        .args(["polarity", "--plan"])
        .arg(&plan)
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let text = stdout(&out);
    assert!(text.contains("reversed") && text.contains("FAIL"), "{text}");
    for line in text.lines() {
        assert!(line.chars().count() <= 80, "too wide: {line}");
    }
}

#[test]
fn params_out_writes_json_and_c_header() {
    let dir = TestDir::new();
    let (csv, plan) = simulated(&dir, &PolarityConfig::default());
    dir.magproof()
        .args(["polarity", "--json", "--plan"])
        .arg(&plan)
        .arg(&csv)
        .arg("--params-out")
        .arg(dir.join("coupling.h"))
        .assert()
        .code(0);
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("coupling.json")).unwrap()).unwrap();
    // One row per rod, three sensor axes each; no calibration in a polarity run.
    let mag = &json["magnetometers"][0];
    let m = mag["rod_coupling_nt_per_command"].as_array().unwrap();
    assert_eq!(m.len(), 3);
    assert_eq!(m[0].as_array().unwrap().len(), 3);
    assert!(mag["calibration"].is_null());
    let header = std::fs::read_to_string(dir.join("coupling.h")).unwrap();
    assert!(header.contains("MAGPROOF_MAG_ROD_COUPLING_NT_PER_CMD[1][3][3]"));
    assert!(
        header.contains("MAGPROOF_MAG_HARD_IRON_NT are not defined")
            || header.contains("No calibration")
    );
    // An existing file is not replaced without --force.
    let out = dir
        .magproof()
        .args(["polarity", "--plan"])
        .arg(&plan)
        .arg(&csv)
        .arg("--params-out")
        .arg(dir.join("coupling.h"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("--force"));
}

#[test]
fn missing_rod_column_is_named_with_exit_two() {
    let dir = TestDir::new();
    let (_, plan) = simulated(&dir, &PolarityConfig::default());
    let csv = dir.write(
        "short.csv",
        "t,bx,by,bz,cmd_x,cmd_y\n0,1,2,3,0,0\n0.1,1,2,3,1,0\n0.2,1,2,3,0,0\n",
    );
    let out = dir
        .magproof()
        .args(["polarity", "--plan"])
        .arg(&plan)
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("cmd_z"), "{}", stderr(&out));
    assert!(stdout(&out).is_empty());
}

#[test]
fn log_without_pulses_is_refused() {
    let dir = TestDir::new();
    let (_, plan) = simulated(&dir, &PolarityConfig::default());
    let csv = dir.write(
        "quiet.csv",
        "t,bx,by,bz,cmd_x,cmd_y,cmd_z\n0,1,2,3,0,0,0\n0.1,1,2,3,0,0,0\n0.2,1,2,3,0,0,0\n",
    );
    let out = dir
        .magproof()
        .args(["polarity", "--json", "--plan"])
        .arg(&plan)
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("no pulses"));
    assert!(stdout(&out).is_empty());
}

#[test]
fn plan_without_rods_or_position_is_refused() {
    let dir = TestDir::new();
    let (csv, _) = simulated(&dir, &PolarityConfig::default());
    let no_rods = dir.write("norods.toml", "[magnetometer]\nposition_m = [0, 0, 0.2]\n");
    let out = dir
        .magproof()
        .args(["polarity", "--plan"])
        .arg(&no_rods)
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("[rod]"), "{}", stderr(&out));
    let no_pos = dir.write(
        "nopos.toml",
        "[magnetometer]\nunit = \"nT\"\n[[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\n",
    );
    let out = dir
        .magproof()
        .args(["polarity", "--plan"])
        .arg(&no_pos)
        .arg(&csv)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("position_m"), "{}", stderr(&out));
}
