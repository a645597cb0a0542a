//! `magproof dipole`: simulated logs with known moments through the binary; exit codes,
//! the JSON keys of `docs/dipole.md` and the terminal summary.

use serde::Deserialize;

use crate::util::TestDir;
use magproof::sim::dipole::{
    simulate_static, simulate_turntable, DipoleSim, StaticConfig, TurntableConfig,
};

/// The documented keys (docs/dipole.md, and a few more) as the test reads them back.
#[derive(Debug, Deserialize)]
struct DipoleJson {
    moment_body_am2: [f64; 3],
    magnitude_am2: f64,
    moment_sigma_am2: [f64; 3],
    residual_rms_nt: f64,
    altitude_km: f64,
    orbit_torque_max_n_m: f64,
    pass: Option<bool>,
    method: String,
    offset_m: Option<[f64; 3]>,
    offset_sigma_m: Option<[f64; 3]>,
    warnings: Vec<String>,
}

fn write_sim(dir: &TestDir, sim: &DipoleSim) -> (String, String) {
    let files = sim.write_to(dir.path()).expect("write simulation");
    let name = |p: &std::path::Path| p.file_name().unwrap().to_string_lossy().into_owned();
    (name(&files.log), name(&files.plan))
}

fn run_json(dir: &TestDir, log: &str, plan: &str, extra: &[&str]) -> (i32, DipoleJson) {
    let out = dir
        .magproof()
        .args(["dipole", log, "--plan", plan, "--json"])
        .args(extra)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    let parsed: DipoleJson = serde_json::from_str(&text).unwrap_or_else(|e| {
        panic!(
            "stdout is not one dipole object: {e}\n{text}\n{}",
            String::from_utf8_lossy(&out.stderr)
        )
    });
    (out.status.code().unwrap_or(-1), parsed)
}

#[test]
fn turntable_json_recovers_the_simulated_moment_and_passes() {
    let dir = TestDir::new();
    let sim = simulate_turntable(&TurntableConfig::default(), 101).unwrap();
    let (log, plan) = write_sim(&dir, &sim);
    let (code, r) = run_json(&dir, &log, &plan, &["--inclination-deg", "97.4"]);
    assert_eq!(code, 0);
    assert_eq!(r.method, "turntable");
    for i in 0..3 {
        let err = (r.moment_body_am2[i] - sim.truth.moment_body_am2[i]).abs();
        assert!(err < 4.0 * r.moment_sigma_am2[i], "{i}: {r:?}");
    }
    assert!((r.magnitude_am2 - sim.truth.magnitude_am2).abs() < 1e-3);
    assert_eq!(r.pass, Some(true));
    assert!((r.altitude_km - 500.0).abs() < 1e-12);
    assert!(r.orbit_torque_max_n_m > 0.0 && r.residual_rms_nt > 0.0);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    assert!(r.offset_m.is_none());
}

#[test]
fn moment_over_the_plan_limit_exits_1_with_the_whole_result() {
    let dir = TestDir::new();
    let mut cfg = TurntableConfig::default();
    cfg.article.limit_am2 = Some(0.005);
    let sim = simulate_turntable(&cfg, 102).unwrap();
    let (log, plan) = write_sim(&dir, &sim);
    let (code, r) = run_json(&dir, &log, &plan, &[]);
    assert_eq!(code, 1);
    assert_eq!(r.pass, Some(false));
    assert!(
        r.warnings.iter().any(|w| w.contains("97.4")),
        "default inclination is said"
    );
}

#[test]
fn single_mount_run_names_the_hidden_body_component() {
    let dir = TestDir::new();
    let mut cfg = TurntableConfig::default();
    cfg.mounts.truncate(1);
    let sim = simulate_turntable(&cfg, 103).unwrap();
    let (log, plan) = write_sim(&dir, &sim);
    let (_, r) = run_json(&dir, &log, &plan, &["--inclination-deg", "51.6"]);
    assert!(
        r.warnings.iter().any(|w| w.contains("body z")),
        "{:?}",
        r.warnings
    );
}

#[test]
fn log_without_background_rows_exits_2_with_the_reason() {
    let dir = TestDir::new();
    let sim = simulate_turntable(&TurntableConfig::default(), 104).unwrap();
    let (_, plan) = write_sim(&dir, &sim);
    let csv: Vec<&str> = sim
        .log_csv
        .lines()
        .filter(|l| !l.ends_with(",none"))
        .collect();
    dir.write("nobg.csv", csv.join("\n"));
    dir.magproof()
        .args(["dipole", "nobg.csv", "--plan", &plan])
        .assert()
        .code(2)
        .stderr(predicates::str::contains("no background segment"))
        .stdout("");
}

#[test]
fn static_map_with_fit_offset_reports_position_with_uncertainty() {
    let dir = TestDir::new();
    let mut cfg = StaticConfig::default();
    cfg.article.moment_body_am2 = nalgebra::Vector3::new(0.6, 0.3, -0.5);
    cfg.article.offset_body_m = nalgebra::Vector3::new(0.04, 0.0, -0.02);
    cfg.article.limit_am2 = Some(2.0);
    cfg.positions_m = (0..12)
        .map(|k| {
            let th = k as f64 * 1.1;
            nalgebra::Vector3::new(0.6 * th.cos(), 0.6 * th.sin(), -0.4 + 0.07 * k as f64)
        })
        .collect();
    let sim = simulate_static(&cfg, 106).unwrap();
    let (log, plan) = write_sim(&dir, &sim);
    let (code, r) = run_json(
        &dir,
        &log,
        &plan,
        &["--fit-offset", "--inclination-deg", "97.4"],
    );
    assert_eq!(code, 0);
    assert_eq!(r.method, "static");
    let (o, s) = (r.offset_m.unwrap(), r.offset_sigma_m.unwrap());
    for i in 0..3 {
        assert!(
            (o[i] - sim.truth.offset_body_m[i]).abs() < 4.0 * s[i],
            "{o:?} ± {s:?}"
        );
    }
}

#[test]
fn terminal_summary_fits_80_columns_with_units_and_uncertainties() {
    let dir = TestDir::new();
    let mut cfg = TurntableConfig::default();
    cfg.mounts.truncate(1);
    let sim = simulate_turntable(&cfg, 107).unwrap();
    let (log, plan) = write_sim(&dir, &sim);
    let out = dir
        .magproof()
        .args(["dipole", &log, "--plan", &plan, "--fit-offset"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    for line in text.lines() {
        assert!(line.chars().count() <= 80, "too wide: {line:?}");
    }
    assert!(
        text.contains("A·m²") && text.contains("±") && text.contains("N·m"),
        "{text}"
    );
    assert!(text.contains("PASS"), "{text}");
}

#[test]
fn unknown_mount_label_exits_2_naming_file_and_line() {
    let dir = TestDir::new();
    let sim = simulate_turntable(&TurntableConfig::default(), 108).unwrap();
    let (_, plan) = write_sim(&dir, &sim);
    dir.write("bad.csv", sim.log_csv.replacen(",upright", ",flipped", 1));
    dir.magproof()
        .args(["dipole", "bad.csv", "--plan", &plan])
        .assert()
        .code(2)
        .stderr(predicates::str::contains("bad.csv:"))
        .stderr(predicates::str::contains("\"flipped\""));
}
