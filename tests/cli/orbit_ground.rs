//! The orbit calibration's ground comparison through the binary: a named magnetometer
//! (`--sensor`, a closeout step's `sensor`) is compared with its own ground calibration
//! (same serial and sensor), never another sensor's; a missing one is said in the
//! terminal, the JSON and the report; a closeout's orbit step is compared with what its
//! ledger held before the closeout.

use super::util::{assert_code, json_stdout, stderr, stdout, TestDir};
use serde_json::Value;

/// Two named magnetometers, both logged in `bx by bz` in their own files.
const TWO_MAGS: &str = "[[magnetometer]]\nname = \"MAG-A\"\nserial = \"A-1\"\n\n\
                        [[magnetometer]]\nname = \"MAG-B\"\nserial = \"B-1\"\n";

/// Simulated telemetry of serial SIM-ORBIT (true hard iron y −940 nT) in `s/`, its plan
/// given `extra` tables.
fn telemetry(d: &TestDir, extra: &str) {
    let run = d.run(&[
        "simulate",
        "orbit",
        "--seed",
        "5",
        "--positions",
        "geodetic",
        "--out",
        "s",
    ]);
    assert_code(&run, 0);
    let plan = std::fs::read_to_string(d.join("s/plan.toml")).unwrap();
    let plan = plan.replace("build = \"S1\"", "build = \"orbit\"");
    std::fs::write(d.join("s/plan.toml"), format!("{plan}\n{extra}")).unwrap();
}

/// A ground calibration of SIM-ORBIT build `build`, read by the magnetometer `sensor`
/// (`None`: the plan's unnamed one), whose hard iron is the orbit truth moved by `dy`
/// nT on y; recorded in `l.sqlite`.
fn record_ground(d: &TestDir, build: &str, sensor: Option<&str>, dy: f64) {
    let out = format!("g-{build}");
    let hi = format!("1820,{},2310", -940.0 - dy);
    let run = d.run(&[
        "simulate",
        "tumble",
        "--seed",
        "2",
        "--hard-iron-nt",
        &hi,
        "--out",
        &out,
    ]);
    assert_code(&run, 0);
    let plan_path = d.join(&out).join("plan.toml");
    let plan = std::fs::read_to_string(&plan_path).unwrap();
    let mut plan = plan
        .replace("SIM-TUMBLE", "SIM-ORBIT")
        .replace("build = \"S1\"", &format!("build = \"{build}\""));
    let (log, plan_arg) = (format!("{out}/tumble.csv"), format!("{out}/plan.toml"));
    let mut args = vec!["calibrate", log.as_str(), "--plan", plan_arg.as_str()];
    if let Some(s) = sensor {
        plan.push_str(&format!("\n{TWO_MAGS}"));
        args.extend(["--sensor", s]);
    }
    std::fs::write(&plan_path, plan).unwrap();
    args.extend(["--record", "--ledger", "l.sqlite"]);
    let run = d.run(&args);
    assert_code(&run, 0);
}

fn orbit(d: &TestDir, extra: &[&str]) -> std::process::Output {
    let mut args = vec!["orbit", "s/orbit.csv", "--plan", "s/plan.toml"];
    args.extend(extra);
    args.extend(["--ledger", "l.sqlite"]);
    d.run(&args)
}

fn warnings(r: &Value) -> String {
    r["warnings"].to_string()
}

#[test]
fn a_named_magnetometer_is_compared_with_its_own_ground_calibration() {
    let d = TestDir::new();
    telemetry(&d, TWO_MAGS);
    // MAG-B's ground run is older and 300 nT off; MAG-A's is the latest of the serial.
    record_ground(&d, "B3", Some("MAG-B"), 300.0);
    record_ground(&d, "B4", Some("MAG-A"), 0.0);
    let a = json_stdout(&orbit(&d, &["--sensor", "MAG-A", "--json"]));
    assert_eq!(a["ground"]["build"], "B4", "{}", a["ground"]);
    assert_eq!(a["ground"]["flag"], false);
    let run = orbit(&d, &["--sensor", "MAG-B", "--json"]);
    assert_code(&run, 0); // a change is a warning, not a failed verdict
    let b = json_stdout(&run);
    assert_eq!(b["ground"]["build"], "B3", "{}", b["ground"]);
    assert_eq!(b["ground"]["flag"], true);
    let dy = b["ground"]["hard_iron_delta_nt"][1].as_f64().unwrap();
    assert!(
        (dy - 300.0).abs() < 3.0 * b["ground"]["sigma_nt"][1].as_f64().unwrap(),
        "{dy}"
    );
    // The plan lists two: which one must be said.
    let run = orbit(&d, &["--json"]);
    assert_code(&run, 2);
    assert!(stderr(&run).contains("--sensor NAME"), "{}", stderr(&run));
}

#[test]
fn the_unnamed_magnetometer_does_not_take_a_named_ones_ground_calibration() {
    let d = TestDir::new();
    telemetry(&d, "");
    record_ground(&d, "B3", Some("MAG-A"), 0.0);
    let run = orbit(&d, &["--json"]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    assert!(r["ground"].is_null(), "{}", r["ground"]);
    let w = warnings(&r);
    assert!(
        w.contains("no ground comparison")
            && w.contains(
                "holds no calibrate run of serial SIM-ORBIT with the unnamed magnetometer"
            ),
        "{w}"
    );
    // The same in the terminal, and in the report.
    let run = orbit(&d, &["--report", "rep"]);
    assert_code(&run, 0);
    assert!(
        stdout(&run).contains("no ground comparison"),
        "{}",
        stdout(&run)
    );
    let html = std::fs::read_to_string(d.join("rep/report.html")).unwrap();
    assert!(html.contains("ground comparison"), "report");
    assert!(html.contains("none: the ledger"), "report");
}

#[test]
fn a_missing_ledger_is_said_and_no_ground_asks_for_nothing() {
    let d = TestDir::new();
    telemetry(&d, "");
    let r = json_stdout(&orbit(&d, &["--json"]));
    assert!(r["ground"].is_null());
    assert!(
        warnings(&r).contains("l.sqlite does not exist"),
        "{}",
        warnings(&r)
    );
    let r = json_stdout(&orbit(&d, &["--json", "--no-ground"]));
    assert!(!warnings(&r).contains("ground"), "{}", warnings(&r));
}

/// The orbit plan as a closeout: one orbit step reading `sensor`.
fn orbit_closeout_plan(d: &TestDir, sensor: &str) {
    let plan = std::fs::read_to_string(d.join("s/plan.toml")).unwrap();
    let plan = plan.replace(
        "kind = \"orbit\"\n",
        &format!("kind = \"orbit\"\nsensor = \"{sensor}\"\n"),
    );
    std::fs::write(d.join("s/plan.toml"), plan).unwrap();
}

#[test]
fn a_closeout_orbit_step_is_compared_with_the_ground_calibration_in_its_ledger() {
    let d = TestDir::new();
    telemetry(&d, TWO_MAGS);
    orbit_closeout_plan(&d, "MAG-B");
    record_ground(&d, "B3", Some("MAG-B"), 300.0);
    record_ground(&d, "B4", Some("MAG-A"), 0.0);
    let run = d.run(&["closeout", "s/plan.toml", "--json", "--ledger", "l.sqlite"]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    let g = &r["steps"][0]["result"]["ground"];
    assert_eq!(g["build"], "B3", "{g}");
    assert_eq!(g["flag"], true, "{g}");
    assert!(
        warnings(&r["steps"][0]["result"]).contains("changed since the ground calibration"),
        "{}",
        r["steps"][0]["result"]["warnings"]
    );
    // The comparison is in the ledger with the run, under the sensor's name.
    let h = d.run(&[
        "history",
        "--serial",
        "SIM-ORBIT",
        "--ledger",
        "l.sqlite",
        "--json",
    ]);
    assert_code(&h, 0);
    assert!(
        stdout(&h).contains("ground_delta_y_nt@MAG-B"),
        "{}",
        stdout(&h)
    );
}

#[test]
fn a_closeout_orbit_step_without_a_ground_calibration_says_so() {
    let d = TestDir::new();
    telemetry(&d, TWO_MAGS);
    orbit_closeout_plan(&d, "MAG-A");
    record_ground(&d, "B3", Some("MAG-B"), 0.0);
    let run = d.run(&["closeout", "s/plan.toml", "--ledger", "l.sqlite"]);
    assert_code(&run, 0);
    assert!(
        stdout(&run).contains("with magnetometer MAG-A"),
        "{}",
        stdout(&run)
    );
    let run = d.run(&["closeout", "s/plan.toml", "--json", "--no-record"]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    assert!(
        warnings(&r["steps"][0]["result"]).contains("this run reads no ledger"),
        "{}",
        r["steps"][0]["result"]["warnings"]
    );
}
