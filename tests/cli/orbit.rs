//! `magproof orbit` and `simulate orbit` through the binary: the simulator's truth is
//! recovered within 3σ on both position routes, a 300 nT change from the ground
//! calibration in the ledger is flagged, closeout runs an orbit step, and bad input is
//! refused with the file, line and column.

use super::util::{assert_code, json_stdout, stderr, stdout, TestDir};
use serde_json::Value;

fn nums(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .flat_map(|x| match x {
            Value::Array(_) => nums(x),
            _ => vec![x.as_f64().unwrap()],
        })
        .collect()
}

fn within_3_sigma(what: &str, fit: &Value, sigma: &Value, truth: &Value) {
    let (f, s, t) = (nums(fit), nums(sigma), nums(truth));
    assert_eq!(f.len(), t.len());
    for i in 0..f.len() {
        assert!(s[i] > 0.0, "{what}[{i}]: σ {}", s[i]);
        assert!(
            (f[i] - t[i]).abs() <= 3.0 * s[i],
            "{what}[{i}]: {} vs {} (σ {})",
            f[i],
            t[i],
            s[i]
        );
    }
}

fn simulate(d: &TestDir, out: &str, positions: &str) -> Value {
    let run = d.run(&[
        "simulate",
        "orbit",
        "--seed",
        "5",
        "--positions",
        positions,
        "--out",
        out,
    ]);
    assert_code(&run, 0);
    serde_json::from_str(&std::fs::read_to_string(d.join(out).join("truth.json")).unwrap()).unwrap()
}

fn check_round_trip(positions: &str, route: &str) {
    let d = TestDir::new();
    let truth = &simulate(&d, "s", positions)["truth"];
    let run = d.run(&[
        "orbit",
        "s/orbit.csv",
        "--plan",
        "s/plan.toml",
        "--json",
        "--ledger",
        "none.sqlite",
    ]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    assert_eq!(r["reference"], route);
    assert_eq!(r["verdict"], "pass");
    within_3_sigma(
        "hard iron",
        &r["hard_iron_nt"],
        &r["hard_iron_sigma_nt"],
        &truth["hard_iron_nt"],
    );
    within_3_sigma(
        "soft iron",
        &r["soft_iron"],
        &r["soft_iron_sigma"],
        &truth["soft_iron"],
    );
    for (k, reg) in truth["regressors"].as_array().unwrap().iter().enumerate() {
        assert_eq!(r["regressors"][k]["name"], reg[0]);
        within_3_sigma(
            "regressor",
            &r["regressors"][k]["bias_nt_per_unit"],
            &r["regressors"][k]["sigma"],
            &reg[1],
        );
    }
    within_3_sigma(
        "temperature slope",
        &r["temperature_slope_nt_per_c"],
        &r["temperature_slope_sigma_nt_per_c"],
        &truth["temperature_slope_nt_per_c"],
    );
    assert!(r["model_grid_error_nt"].as_f64().unwrap() < 1.0);
    assert!(r["ground"].is_null());
}

#[test]
fn truth_is_recovered_through_the_binary_from_the_element_set() {
    check_round_trip("tle", "tle-sgp4");
}

#[test]
fn truth_is_recovered_through_the_binary_from_logged_positions() {
    check_round_trip("ecef", "positions-ecef");
}

/// A ground calibration of the same serial, recorded with `calibrate --record`, whose
/// hard iron is the orbit truth moved by `dy` nT on y.
fn record_ground(d: &TestDir, dy: f64) {
    let hi = format!("1820,{},2310", -940.0 - dy);
    let run = d.run(&[
        "simulate",
        "tumble",
        "--seed",
        "2",
        "--hard-iron-nt",
        &hi,
        "--out",
        "g",
    ]);
    assert_code(&run, 0);
    let plan = std::fs::read_to_string(d.join("g/plan.toml")).unwrap();
    let plan = plan
        .replace("SIM-TUMBLE", "SIM-ORBIT")
        .replace("build = \"S1\"", "build = \"B3\"");
    std::fs::write(d.join("g/plan.toml"), plan).unwrap();
    let run = d.run(&[
        "calibrate",
        "g/tumble.csv",
        "--plan",
        "g/plan.toml",
        "--record",
        "--ledger",
        "l.sqlite",
    ]);
    assert_code(&run, 0);
}

#[test]
fn a_planted_300_nt_change_from_the_ground_calibration_is_flagged() {
    let d = TestDir::new();
    simulate(&d, "s", "tle");
    record_ground(&d, 300.0);
    let run = d.run(&[
        "orbit",
        "s/orbit.csv",
        "--plan",
        "s/plan.toml",
        "--json",
        "--ledger",
        "l.sqlite",
    ]);
    assert_code(&run, 0); // a change is a warning, not a failed verdict
    let r = json_stdout(&run);
    let g = &r["ground"];
    assert_eq!(g["build"], "B3");
    assert_eq!(g["flag"], true, "{g}");
    let dy = g["hard_iron_delta_nt"][1].as_f64().unwrap();
    assert!(
        (dy - 300.0).abs() < 3.0 * g["sigma_nt"][1].as_f64().unwrap(),
        "{dy}"
    );
    assert!(r["warnings"]
        .to_string()
        .contains("changed since the ground calibration"));
    // Recorded under the plan's build, then history shows both kinds for the serial.
    let run = d.run(&[
        "orbit",
        "s/orbit.csv",
        "--plan",
        "s/plan.toml",
        "--record",
        "--ledger",
        "l.sqlite",
    ]);
    assert_code(&run, 0);
    let h = d.run(&["history", "--serial", "SIM-ORBIT", "--ledger", "l.sqlite"]);
    assert_code(&h, 0);
    let text = stdout(&h);
    assert!(
        text.contains("orbit") && text.contains("calibrate") && text.contains("B3"),
        "{text}"
    );
}

#[test]
fn an_unchanged_ground_calibration_is_not_flagged() {
    let d = TestDir::new();
    simulate(&d, "s", "tle");
    record_ground(&d, 0.0);
    let run = d.run(&[
        "orbit",
        "s/orbit.csv",
        "--plan",
        "s/plan.toml",
        "--json",
        "--ledger",
        "l.sqlite",
    ]);
    assert_code(&run, 0);
    assert_eq!(json_stdout(&run)["ground"]["flag"], false);
}

#[test]
fn closeout_runs_an_orbit_step() {
    let d = TestDir::new();
    simulate(&d, "s", "geodetic");
    let run = d.run(&["closeout", "s/plan.toml", "--json", "--ledger", "l.sqlite"]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    assert_eq!(r["steps"][0]["kind"], "orbit");
    assert_eq!(r["steps"][0]["result"]["reference"], "positions-geodetic");
}

#[test]
fn no_positions_and_no_element_set_is_refused() {
    let d = TestDir::new();
    d.write("o.csv", "t,bx,by,bz\n2026-07-19T06:10:00Z,1,2,30000\n");
    d.write("p.toml", "[article]\nserial = \"X\"\nbuild = \"orbit\"\n");
    let run = d.run(&[
        "orbit",
        "o.csv",
        "--plan",
        "p.toml",
        "--ledger",
        "none.sqlite",
    ]);
    assert_code(&run, 2);
    assert!(stderr(&run).contains("[orbit] tle"), "{}", stderr(&run));
}

#[test]
fn a_bad_time_tag_names_its_line_and_column() {
    let d = TestDir::new();
    simulate(&d, "s", "tle");
    let text = std::fs::read_to_string(d.join("s/orbit.csv")).unwrap();
    let bad = text.replacen("2026-07-19T06:10:05Z", "2026-07-19 06:10:05 UTC", 1);
    std::fs::write(d.join("s/orbit.csv"), bad).unwrap();
    let run = d.run(&[
        "orbit",
        "s/orbit.csv",
        "--plan",
        "s/plan.toml",
        "--ledger",
        "none.sqlite",
    ]);
    assert_code(&run, 2);
    let e = stderr(&run);
    assert!(e.contains("orbit.csv:7: column \"t\""), "{e}");
}

#[test]
fn dipole_takes_the_orbit_from_the_plan_and_assumes_none() {
    let d = TestDir::new();
    assert_code(
        &d.run(&["simulate", "dipole", "--seed", "4", "--out", "s"]),
        0,
    );
    let plan = std::fs::read_to_string(d.join("s/plan.toml")).unwrap();
    std::fs::write(
        d.join("s/plan.toml"),
        format!("{plan}\n[orbit]\naltitude_km = 700.0\ninclination_deg = 51.6\n"),
    )
    .unwrap();
    let run = d.run(&[
        "dipole",
        "s/dipole-turntable.csv",
        "--plan",
        "s/plan.toml",
        "--json",
    ]);
    let r = json_stdout(&run);
    assert_eq!(r["altitude_km"], 700.0);
    assert_eq!(r["inclination_deg"], 51.6);
    assert!(
        !r["warnings"].to_string().contains("inclination not given"),
        "{}",
        r["warnings"]
    );
    // The command line still wins.
    let run = d.run(&[
        "dipole",
        "s/dipole-turntable.csv",
        "--plan",
        "s/plan.toml",
        "--json",
        "--altitude-km",
        "400",
    ]);
    assert_eq!(json_stdout(&run)["altitude_km"], 400.0);
}

#[test]
fn closeout_reads_unix_time_tags() {
    let d = TestDir::new();
    simulate(&d, "s", "ecef");
    let text = std::fs::read_to_string(d.join("s/orbit.csv")).unwrap();
    let mut out = String::new();
    for (k, line) in text.lines().enumerate() {
        let (t, rest) = line.split_once(',').unwrap();
        if k == 0 {
            out += &format!("t [unix],{rest}\n");
        } else {
            let unix = magproof::log::parse_iso8601(t).unwrap();
            out += &format!("{unix:.1},{rest}\n");
        }
    }
    std::fs::write(d.join("s/orbit.csv"), out).unwrap();
    let run = d.run(&["closeout", "s/plan.toml", "--json", "--ledger", "l.sqlite"]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    assert_eq!(r["steps"][0]["result"]["reference"], "positions-ecef");
    assert_eq!(r["steps"][0]["verdict"], "pass");
}
