//! Verdicts a reviewer can sign: logs that are physically wrong for the test, or fits
//! the data cannot support, never give exit 0. Each case drives the binary on logs made
//! by `magproof simulate`, changed the way a real mistake would change them.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util::{assert_code, json_stdout, stderr, TestDir};

/// `magproof simulate KIND --seed 3 --out DIR` in the test folder.
fn simulate(t: &TestDir, kind: &str) -> PathBuf {
    let out = t.run(&["simulate", kind, "--seed", "3", "--out", kind]);
    assert_code(&out, 0);
    t.join(kind)
}

fn gate<'a>(j: &'a Value, name: &str) -> &'a Value {
    j["gates"]
        .as_array()
        .unwrap()
        .iter()
        .find(|g| g["name"] == name)
        .unwrap_or_else(|| panic!("no gate {name} in {}", j["gates"]))
}

/// Rewrite the data rows of a simulated tumble log (`t, bx, by, bz`).
fn rewrite_tumble(src: &Path, dst: &Path, header: &str, row: impl Fn(usize, [f64; 4]) -> String) {
    let text = std::fs::read_to_string(src).unwrap();
    let mut out = vec![header.to_string()];
    for (i, line) in text.lines().skip(2).enumerate() {
        let v: Vec<f64> = line.split(',').map(|c| c.parse().unwrap()).collect();
        out.push(row(i, [v[0], v[1], v[2], v[3]]));
    }
    std::fs::write(dst, out.join("\n") + "\n").unwrap();
}

#[test]
fn a_rod_pulse_log_given_to_calibrate_fails_on_its_gates() {
    let t = TestDir::new();
    let pol = simulate(&t, "polarity");
    let out = t
        .magproof()
        .args(["calibrate", "--json"])
        .arg(pol.join("pulses.csv"))
        .output()
        .unwrap();
    assert_code(&out, 1);
    let j = json_stdout(&out);
    assert_eq!(j["verdict"], "fail");
    assert_eq!(j["pass"], false);
    assert_eq!(gate(&j, "coverage")["ok"], false);
    assert_eq!(gate(&j, "hard_iron_magnitude")["ok"], false);
}

#[test]
fn a_cage_run_whose_plan_mounting_is_90_degrees_off_fails_alignment() {
    let t = TestDir::new();
    let cage = simulate(&t, "cage");
    let plan = |sensor_to_body: &str| {
        t.write(
            "p.toml",
            format!(
                "[cage]\narticle_to_cage = [\"+x\", \"+y\", \"+z\"]\n\n\
                 [magnetometer]\nsensor_to_body = {sensor_to_body}\n"
            ),
        )
    };
    let run = |p: &Path| {
        t.magproof()
            .args(["calibrate", "--json", "--plan"])
            .arg(p)
            .arg(cage.join("cage.csv"))
            .output()
            .unwrap()
    };
    let right = run(&plan("[\"+x\", \"+y\", \"+z\"]"));
    assert_code(&right, 0);
    assert_eq!(gate(&json_stdout(&right), "alignment")["ok"], true);
    let wrong = run(&plan("[\"+y\", \"-x\", \"+z\"]"));
    assert_code(&wrong, 1);
    let j = json_stdout(&wrong);
    assert_eq!(j["verdict"], "fail");
    let a = gate(&j, "alignment");
    assert!(a["value"].as_f64().unwrap() > 80.0, "{a}");
    assert_eq!(a["ok"], false);
}

#[test]
fn a_tumble_in_microtesla_without_a_unit_is_refused_naming_the_unit() {
    let t = TestDir::new();
    let tum = simulate(&t, "tumble");
    let ut = t.join("ut.csv");
    rewrite_tumble(&tum.join("tumble.csv"), &ut, "t,bx,by,bz", |_, v| {
        format!("{},{},{},{}", v[0], v[1] / 1e3, v[2] / 1e3, v[3] / 1e3)
    });
    let out = t
        .magproof()
        .args(["calibrate", "--plan"])
        .arg(tum.join("plan.toml"))
        .arg(&ut)
        .output()
        .unwrap();
    assert_code(&out, 2);
    assert!(stderr(&out).contains("uT read as nT"), "{}", stderr(&out));
    // Given the unit, the same file calibrates.
    let out = t
        .magproof()
        .args(["calibrate", "--unit", "uT", "--plan"])
        .arg(tum.join("plan.toml"))
        .arg(&ut)
        .output()
        .unwrap();
    assert_code(&out, 0);
}

#[test]
fn rods_firing_most_of_a_tumble_are_left_out_and_make_it_inconclusive() {
    let t = TestDir::new();
    let tum = simulate(&t, "tumble");
    let rods = t.join("rods.csv");
    // A rod adds 3000 nT along sensor z while on: three blocks of 40 rows in four.
    rewrite_tumble(
        &tum.join("tumble.csv"),
        &rods,
        "t [s],bx [nT],by [nT],bz [nT],cmd_x",
        |i, v| {
            let on = (i / 40) % 4 != 0;
            let bz = v[3] + if on { 3000.0 } else { 0.0 };
            format!("{},{},{},{bz},{}", v[0], v[1], v[2], u8::from(on))
        },
    );
    let out = t
        .magproof()
        .args(["calibrate", "--json", "--plan"])
        .arg(tum.join("plan.toml"))
        .arg(&rods)
        .output()
        .unwrap();
    assert_code(&out, 1);
    let j = json_stdout(&out);
    assert_eq!(j["verdict"], "inconclusive");
    assert_eq!(gate(&j, "rods_on_share")["ok"], false);
    // The rod's field did not leak into the hard iron (simulated truth: z = 410 nT,
    // `tumble/truth.json`), because the rod-on rows were left out.
    let hz = j["hard_iron_nt"][2].as_f64().unwrap();
    assert!((hz - 410.0).abs() < 30.0, "hard iron z {hz}");
    assert!(j["warnings"].to_string().contains("torque rod on"));
}

#[test]
fn flight_parameters_of_a_failing_calibration_need_force_and_say_so() {
    let t = TestDir::new();
    let pol = simulate(&t, "polarity");
    let h = t.join("cal.h");
    let args = |force: bool| {
        let mut c = t.magproof();
        c.arg("calibrate")
            .arg(pol.join("pulses.csv"))
            .arg("--params-out")
            .arg(&h);
        if force {
            c.arg("--force");
        }
        c.output().unwrap()
    };
    let out = args(false);
    assert_code(&out, 2);
    assert!(stderr(&out).contains("passing verdict"), "{}", stderr(&out));
    assert!(!h.exists(), "nothing written for a failing verdict");
    let out = args(true);
    assert_code(&out, 1);
    let text = std::fs::read_to_string(&h).unwrap();
    assert!(text.contains("#define MAGPROOF_VERDICT_PASSED 0"), "{text}");
    assert!(text.contains("verdict is FAIL"), "{text}");
}

#[test]
fn a_flipped_magnetometer_axis_is_never_ok_and_the_fitting_mapping_is_named() {
    let t = TestDir::new();
    let pol = simulate(&t, "polarity");
    // The harness reverses the magnetometer's z axis: every bz reading changes sign.
    let text = std::fs::read_to_string(pol.join("pulses.csv")).unwrap();
    let mut lines = text.lines();
    let mut out: Vec<String> = Vec::new();
    for l in lines.by_ref() {
        out.push(l.to_string());
        if !l.starts_with('#') {
            break;
        }
    }
    for l in lines {
        let mut cells: Vec<String> = l.split(',').map(String::from).collect();
        let bz: f64 = cells[3].parse().unwrap();
        cells[3] = format!("{}", -bz);
        out.push(cells.join(","));
    }
    let flipped = t.write("flipped.csv", out.join("\n") + "\n");
    let run = t
        .magproof()
        .args(["polarity", "--json", "--plan"])
        .arg(pol.join("plan.toml"))
        .arg(&flipped)
        .output()
        .unwrap();
    assert_code(&run, 1);
    let j = json_stdout(&run);
    let verdicts: Vec<&str> = j["rods"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["verdict"].as_str().unwrap())
        .collect();
    assert!(!verdicts.contains(&"ok"), "{verdicts:?}");
    assert!(verdicts.contains(&"off-axis"), "{verdicts:?}");
    assert!(
        j["warnings"].to_string().contains("z reads −z"),
        "{}",
        j["warnings"]
    );
}
