//! `magproof closeout`: every step of a plan, one ledger record per step, history across
//! builds. Logs come from the simulators with fixed seeds; the plan is written
//! here so that the geometry matches what was simulated.

use crate::util::TestDir;
use magproof::sim::dipole::{simulate_turntable, TurntableConfig};
use magproof::sim::polarity::{simulate_polarity, PolarityConfig};
use magproof::sim::{simulate_tumble, write_tumble_csv, TumbleConfig};

/// Write the three logs and a plan for `build`; `reversed_y` wires rod y backwards.
fn scenario(dir: &TestDir, build: &str, reversed_y: bool, seed: u64) -> std::path::PathBuf {
    let tumble = simulate_tumble(&TumbleConfig::default(), seed).unwrap();
    let mut csv = Vec::new();
    write_tumble_csv(&tumble, &mut csv).unwrap();
    dir.write(&format!("{build}/tumble.csv"), csv);

    let mut pcfg = PolarityConfig::default();
    if reversed_y {
        pcfg.rods[1].reversed = true;
    }
    let pol = simulate_polarity(&pcfg, seed).unwrap();
    dir.write(&format!("{build}/pulses.csv"), pol.csv.clone());

    let dip = simulate_turntable(&TurntableConfig::default(), seed).unwrap();
    dir.write(&format!("{build}/turntable.csv"), dip.log_csv.clone());

    // The polarity simulator's plan carries the rods and magnetometer it simulated.
    let rods_and_sensor: String = pol
        .plan_toml
        .split("[limits]")
        .next()
        .unwrap()
        .replace("[article]\nserial = \"SIM-ROD-1\"\nbuild = \"B1\"\n", "");
    let plan = format!(
        "[article]\nserial = \"T-1\"\nbuild = \"{build}\"\n{rods_and_sensor}\n\
         [site]\nlat_deg = 47.0\nlon_deg = 8.0\nreference_nt = {}\n\n\
         [dipole_test]\nprobe_position_m = [0.6, 0.0, 0.0]\n\
         [[dipole_test.mount]]\nlabel = \"upright\"\nbody_to_table = [\"+x\", \"+y\", \"+z\"]\n\
         [[dipole_test.mount]]\nlabel = \"on-side\"\nbody_to_table = [\"+x\", \"-z\", \"+y\"]\n\n\
         [[step]]\nkind = \"calibrate\"\nlog = \"tumble.csv\"\n\
         [[step]]\nkind = \"polarity\"\nlog = \"pulses.csv\"\n\
         [[step]]\nkind = \"dipole\"\nlog = \"turntable.csv\"\n\n\
         [limits]\npolarity_angle_max_deg = 30.0\ncalibration_residual_max_nt = 150.0\n\
         residual_dipole_max_am2 = 0.05\n",
        tumble.truth.reference_nt
    );
    dir.write(&format!("{build}/plan.toml"), plan)
}

fn closeout(dir: &TestDir, plan: &std::path::Path) -> std::process::Output {
    dir.magproof()
        .args(["closeout", "--json", "--ledger"])
        .arg(dir.join("ledger.db"))
        .arg(plan)
        .output()
        .unwrap()
}

#[test]
fn failing_build_then_fixed_build_are_recorded_and_compared() {
    let dir = TestDir::new();
    let b1 = scenario(&dir, "B1", true, 11);
    let b2 = scenario(&dir, "B2", false, 12);

    let out = closeout(&dir, &b1);
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["build"], "B1");
    assert_eq!(v["pass"], false);
    assert_eq!(v["steps"].as_array().unwrap().len(), 3);
    let rods = &v["steps"][1]["result"]["rods"];
    let y = rods
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == "y")
        .unwrap();
    assert_eq!(y["verdict"], "reversed");

    let out = closeout(&dir, &b2);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );

    // Running the same build again records nothing new (same input hashes).
    let again = dir
        .magproof()
        .args(["closeout", "--ledger"])
        .arg(dir.join("ledger.db"))
        .arg(&b2)
        .output()
        .unwrap();
    assert!(String::from_utf8_lossy(&again.stdout).contains("not recorded again"));

    let hist = dir
        .magproof()
        .args(["history", "--json", "--ledger"])
        .arg(dir.join("ledger.db"))
        .output()
        .unwrap();
    assert_eq!(
        hist.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&hist.stderr)
    );
    let h: serde_json::Value = serde_json::from_slice(&hist.stdout).unwrap();
    assert_eq!(
        h["runs"].as_array().unwrap().len(),
        8,
        "two builds × (three steps + the sign chain)"
    );
    let changes = h["changes"].as_array().unwrap();
    assert!(
        changes.iter().any(|c| c["from_build"] == "B1"
            && c["to_build"] == "B2"
            && c["flag"] == "verdict-changed"),
        "rod y reversed → ok must be flagged: {changes:?}"
    );
}

#[test]
fn missing_log_names_the_step_and_records_nothing() {
    let dir = TestDir::new();
    let plan = scenario(&dir, "B1", false, 3);
    std::fs::remove_file(dir.join("B1/pulses.csv")).unwrap();
    let out = closeout(&dir, &plan);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("step 2 (polarity"), "{err}");
    assert!(err.contains("pulses.csv"), "{err}");
    assert!(!dir.join("ledger.db").exists(), "nothing may be recorded");
}

#[test]
fn plan_without_article_or_steps_is_refused() {
    let dir = TestDir::new();
    let p = dir.write(
        "p.toml",
        "[[step]]\nkind = \"calibrate\"\nlog = \"x.csv\"\n",
    );
    let out = closeout(&dir, &p);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("[article]"));
    let p = dir.write("q.toml", "[article]\nserial = \"A\"\nbuild = \"B\"\n");
    let out = closeout(&dir, &p);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("[step]"));
}

#[test]
fn closeout_report_has_one_section_per_step_and_refuses_an_existing_folder() {
    let dir = TestDir::new();
    let plan = scenario(&dir, "B1", false, 5);
    let report = dir.join("rep");
    let out = dir
        .magproof()
        .args(["closeout", "--no-record", "--report"])
        .arg(&report)
        .arg(&plan)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let html = std::fs::read_to_string(report.join("report.html")).unwrap();
    for title in ["Step 1", "Step 2", "Step 3"] {
        assert!(html.contains(title), "{title} missing");
    }
    assert!(report.join("result.json").is_file());
    assert!(std::fs::read_dir(&report).unwrap().any(|e| e
        .unwrap()
        .file_name()
        .to_string_lossy()
        .starts_with("step2-polarity")));
    assert!(
        !dir.join("ledger.db").exists(),
        "--no-record writes no ledger"
    );

    let again = dir
        .magproof()
        .args(["closeout", "--no-record", "--report"])
        .arg(&report)
        .arg(&plan)
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
}

#[test]
fn single_checks_record_only_when_asked() {
    let dir = TestDir::new();
    let plan = scenario(&dir, "B1", false, 7);
    let ledger = dir.join("single.db");
    let run = |extra: &[&str]| {
        dir.magproof()
            .args(["polarity", "--json", "--plan"])
            .arg(&plan)
            .arg(dir.join("B1/pulses.csv"))
            .args(extra)
            .arg("--ledger")
            .arg(&ledger)
            .output()
            .unwrap()
    };
    let out = run(&[]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(!ledger.exists(), "no --record, no ledger");
    let out = run(&["--record"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // stdout stays one JSON object; the note goes to stderr.
    let _: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains("recorded as run"));
    let hist = dir
        .magproof()
        .args(["history", "--json", "--ledger"])
        .arg(&ledger)
        .output()
        .unwrap();
    let h: serde_json::Value = serde_json::from_slice(&hist.stdout).unwrap();
    assert_eq!(h["runs"].as_array().unwrap().len(), 1);
    assert_eq!(h["runs"][0]["kind"], "polarity");
}
