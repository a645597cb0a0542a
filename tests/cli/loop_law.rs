//! `magproof simulate loop` → `magproof loop`: the binary passes a correct law, names a
//! wrong software sign on y as `reversed`, a swapped sensor mapping as cross-wired or
//! reversed, commands sent to the wrong rods as cross-wired, catches a gyro sign fault
//! under the rate law, handles saturated commands, calls too little motion inconclusive,
//! refuses bad input with exit 2 naming file, line and key, and its closeout step reaches
//! the ledger.

use crate::util::{assert_code, assert_stderr_has, json_stdout, stdout, TestDir};

/// Simulate into `dir` with `flags`, then run `loop --json` there: (exit code, JSON).
fn simulate_and_check(dir: &TestDir, flags: &[&str]) -> (i32, serde_json::Value) {
    let mut args = vec!["simulate", "loop", "--seed", "7", "--out", ".", "--force"];
    args.extend_from_slice(flags);
    assert_code(&dir.run(&args), 0);
    let out = dir.run(&["loop", "loop.csv", "--plan", "plan.toml", "--json"]);
    (out.status.code().unwrap(), json_stdout(&out))
}

fn rod_verdicts(j: &serde_json::Value) -> Vec<String> {
    j["rods"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["verdict"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_correct_law_passes_with_the_documented_keys() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_check(&dir, &[]);
    assert_eq!(code, 0, "{j}");
    assert_eq!(j["verdict"], "pass");
    assert_eq!(j["energy"], "removes");
    assert_eq!(rod_verdicts(&j), ["consistent"; 3]);
    // The truth: the simulated body lost energy.
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("truth.json")).unwrap()).unwrap();
    let t = &truth["truth"];
    assert!(t["energy_end_j"].as_f64().unwrap() < t["energy_start_j"].as_f64().unwrap());
    let p = j["power_mean_w"].as_f64().unwrap();
    let s = j["power_sigma_w"].as_f64().unwrap();
    assert!(p < -3.0 * s, "{p} ± {s}");
    for key in [
        "gates",
        "pass",
        "warnings",
        "rods",
        "energy",
        "power_sigma_w",
    ] {
        assert!(j.get(key).is_some(), "missing {key}");
    }
    for key in ["name", "verdict", "slope", "correlation"] {
        assert!(j["rods"][0].get(key).is_some(), "missing rods[].{key}");
    }
}

#[test]
fn a_wrong_software_sign_on_y_is_reversed_and_fails() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_check(&dir, &["--fault", "rod-sign:y"]);
    assert_eq!(code, 1, "{j}");
    assert_eq!(j["verdict"], "fail");
    assert_eq!(rod_verdicts(&j), ["consistent", "reversed", "consistent"]);
    assert!(j["rods"][1]["slope"].as_f64().unwrap() < -0.8);
}

#[test]
fn a_swapped_sensor_mapping_is_cross_wired_or_reversed() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_check(&dir, &["--fault", "swap-sensor:x,y"]);
    assert_eq!(code, 1, "{j}");
    let v = rod_verdicts(&j);
    for r in &v[..2] {
        assert!(r == "cross-wired" || r == "reversed", "{v:?}");
    }
    assert_eq!(v[2], "consistent");
}

#[test]
fn commands_sent_to_the_wrong_rods_are_cross_wired() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_check(&dir, &["--fault", "swap-commands:x,y"]);
    assert_eq!(code, 1, "{j}");
    assert_eq!(
        rod_verdicts(&j),
        ["cross-wired", "cross-wired", "consistent"],
        "{j}"
    );
    assert_eq!(j["rods"][0]["best_other"][0], "y");
}

#[test]
fn a_gyro_sign_fault_with_the_rate_law_is_caught() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_check(&dir, &["--law", "rate", "--fault", "gyro-sign:z"]);
    assert_eq!(code, 1, "{j}");
    assert!(
        rod_verdicts(&j).iter().any(|v| v != "consistent"),
        "{:?}",
        rod_verdicts(&j)
    );
    let (code, j) = simulate_and_check(&dir, &["--law", "rate"]);
    assert_eq!(code, 0, "{j}");
}

#[test]
fn saturated_commands_are_counted_and_left_out_and_the_law_still_passes() {
    let dir = TestDir::new();
    // A fast tumble drives the commands into the plan's command_max much of the time.
    let (code, j) = simulate_and_check(&dir, &["--rate-deg-s", "25,-20,30"]);
    let saturated: u64 = j["rods"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["saturated"].as_u64().unwrap())
        .sum();
    assert!(saturated > 100, "{j}");
    assert_eq!(rod_verdicts(&j), ["consistent"; 3], "{j}");
    assert_eq!(code, 0, "{j}");
    assert!(
        j["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().contains("at the limit")),
        "{j}"
    );
}

#[test]
fn too_little_motion_is_inconclusive() {
    let dir = TestDir::new();
    let (code, j) = simulate_and_check(&dir, &["--rate-deg-s", "0.02,0.01,-0.03"]);
    assert_eq!(j["verdict"], "inconclusive", "{j}");
    assert_eq!(code, 1);
    assert_eq!(rod_verdicts(&j), ["inconclusive"; 3]);
}

#[test]
fn a_plan_without_control_or_with_a_bad_law_is_refused_by_file_line_and_key() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "loop", "--seed", "1", "--out", "."]),
        0,
    );
    let plan = std::fs::read_to_string(dir.join("plan.toml")).unwrap();
    dir.write("bad.toml", plan.replace("law = \"bdot\"", "law = \"pd\""));
    let out = dir.run(&["loop", "loop.csv", "--plan", "bad.toml"]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["bad.toml", "control.law", "pd"]);
    let line = plan.lines().position(|l| l.starts_with("law =")).unwrap() + 1;
    assert_stderr_has(&out, &[&format!("{line}")]);
    let cut = plan.replace("[control]", "[unused]");
    dir.write("none.toml", &cut);
    let out = dir.run(&["loop", "loop.csv", "--plan", "none.toml"]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["none.toml"]);
}

#[test]
fn a_log_without_a_rods_command_is_refused_naming_the_column() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "loop", "--seed", "1", "--out", "."]),
        0,
    );
    let csv = std::fs::read_to_string(dir.join("loop.csv")).unwrap();
    let cut: String = csv
        .lines()
        .map(|l| {
            let mut f: Vec<&str> = l.split(',').collect();
            f.pop();
            f.join(",") + "\n"
        })
        .collect();
    dir.write("cut.csv", &cut);
    let out = dir.run(&["loop", "cut.csv", "--plan", "plan.toml"]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["cut.csv", "cmd_z"]);
}

#[test]
fn the_plan_step_runs_in_closeout_and_reaches_the_ledger_and_history() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "loop", "--seed", "8", "--out", "."]),
        0,
    );
    let ledger = dir.join("ledger.db");
    let ledger = ledger.to_str().unwrap();
    let out = dir.run(&["closeout", "--json", "--ledger", ledger, "plan.toml"]);
    assert_code(&out, 0);
    assert!(stdout(&out).contains("\"loop\""), "{}", stdout(&out));
    let out = dir.run(&["history", "--ledger", ledger, "--kind", "loop", "--json"]);
    assert_code(&out, 0);
    let text = stdout(&out);
    assert!(text.contains("loop_power_mean_uw"), "{text}");
    assert!(text.contains("loop_rod_y"), "{text}");
}

#[test]
fn the_report_shows_both_plots_and_the_cautions_of_a_closed_loop_test() {
    let dir = TestDir::new();
    assert_code(
        &dir.run(&["simulate", "loop", "--seed", "3", "--out", "."]),
        0,
    );
    let out = dir.run(&["loop", "loop.csv", "--plan", "plan.toml", "--report", "rep"]);
    assert_code(&out, 0);
    let html = std::fs::read_to_string(dir.join("rep/report.html")).unwrap();
    let section = &html[html.find("id=\"loop\"").expect("a loop section")..];
    // Power over time and each rod's command against its ideal command.
    assert!(section.matches("<svg").count() >= 2, "plots missing");
    for caution in [
        "rated current and duty",
        "pacemakers",
        "procedures",
        "verification authority",
    ] {
        assert!(section.contains(caution), "caution missing: {caution}");
    }
}
