//! Flight parameters of a plan with two magnetometers, each calibrated by its own
//! closeout step: one file set with an entry per magnetometer (JSON) and both indexed
//! and named arrays (C header). The header compiles, and small C programs that apply
//! it, by index and by name, reproduce each magnetometer's corrected field as the tool
//! computed it (double to rounding, float within a few float epsilons).

use std::process::Command;

use serde_json::Value;

use super::flight_params::{cc, APPLY_C};
use super::util::{assert_code, stderr, TestDir};

/// The same order of operations as `APPLY_C`, with each magnetometer's numbers taken by
/// name; prints one line per worked example of that magnetometer.
const APPLY_NAMED_C: &str = r#"
#include <stdio.h>
#include "magproof-flight.h"

static void apply(int mag, const double c[3], const double w[3][3], const double r[3][3],
                  const float cf[3], const float wf[3][3], const float rf[3][3]) {
    int t, i, j;
    for (t = 0; t < MAGPROOF_TEST_COUNT; t++) {
        double b1[3], b2[3], bb[3];
        float f1[3], f2[3], fb[3];
        if (MAGPROOF_TEST_MAG[t] != mag) continue;
        for (i = 0; i < 3; i++) {
            b1[i] = MAGPROOF_TEST_RAW_NT[t][i] - c[i];
            f1[i] = MAGPROOF_TEST_RAW_NT_F[t][i] - cf[i];
        }
        for (i = 0; i < 3; i++) {
            b2[i] = 0.0; f2[i] = 0.0f;
            for (j = 0; j < 3; j++) { b2[i] += w[i][j] * b1[j]; f2[i] += wf[i][j] * f1[j]; }
        }
        for (i = 0; i < 3; i++) {
            bb[i] = 0.0; fb[i] = 0.0f;
            for (j = 0; j < 3; j++) { bb[i] += r[i][j] * b2[j]; fb[i] += rf[i][j] * f2[j]; }
        }
        printf("%d %.17g %.17g %.17g %.9g %.9g %.9g\n", t, bb[0], bb[1], bb[2], fb[0], fb[1], fb[2]);
    }
}

int main(void) {
    apply(MAGPROOF_MAG_INDEX_MAG_A, MAGPROOF_MAG_MAG_A_HARD_IRON_NT, MAGPROOF_MAG_MAG_A_SOFT_IRON,
          MAGPROOF_MAG_MAG_A_SENSOR_TO_BODY, MAGPROOF_MAG_MAG_A_HARD_IRON_NT_F,
          MAGPROOF_MAG_MAG_A_SOFT_IRON_F, MAGPROOF_MAG_MAG_A_SENSOR_TO_BODY_F);
    apply(MAGPROOF_MAG_INDEX_MAG_B, MAGPROOF_MAG_MAG_B_HARD_IRON_NT, MAGPROOF_MAG_MAG_B_SOFT_IRON,
          MAGPROOF_MAG_MAG_B_SENSOR_TO_BODY, MAGPROOF_MAG_MAG_B_HARD_IRON_NT_F,
          MAGPROOF_MAG_MAG_B_SOFT_IRON_F, MAGPROOF_MAG_MAG_B_SENSOR_TO_BODY_F);
    return 0;
}
"#;

/// Two tumble logs (MAG-B's hard iron planted at (500, −300, 200) nT) and a plan with
/// two named magnetometers, MAG-B mounted turned 90° about z, one calibrate step each.
fn two_magnetometers(d: &TestDir) {
    for (out, seed, hi) in [("a", "2", None), ("b", "3", Some("500,-300,200"))] {
        let mut args = vec!["simulate", "tumble", "--seed", seed, "--out", out];
        if let Some(h) = hi {
            args.extend(["--hard-iron-nt", h]);
        }
        assert_code(&d.run(&args), 0);
    }
    d.write(
        "plan.toml",
        "[article]\nserial = \"TWO-1\"\nbuild = \"B1\"\n\n\
         [site]\nlat_deg = 0.0\nlon_deg = 0.0\nreference_nt = 48000\n\n\
         [[magnetometer]]\nname = \"MAG-A\"\nserial = \"A-1\"\n\n\
         [[magnetometer]]\nname = \"MAG-B\"\nserial = \"B-1\"\n\
         sensor_to_body = [\"+y\", \"-x\", \"+z\"]\n\n\
         [[step]]\nkind = \"calibrate\"\nlog = \"a/tumble.csv\"\nsensor = \"MAG-A\"\n\n\
         [[step]]\nkind = \"calibrate\"\nlog = \"b/tumble.csv\"\nsensor = \"MAG-B\"\n",
    );
}

/// Lines of `t bx by bz fx fy fz` (the named program) or `bx by bz fx fy fz` (indexed)
/// against the worked examples' body-frame field.
fn assert_reproduced(text: &str, vectors: &[Value], numbered: bool) {
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), vectors.len(), "{text}");
    for (k, line) in lines.iter().enumerate() {
        let mut got: Vec<f64> = line.split(' ').map(|x| x.parse().unwrap()).collect();
        let t = if numbered { got.remove(0) as usize } else { k };
        let v = &vectors[t];
        let raw_mag = (0..3)
            .map(|i| v["raw_nt"][i].as_f64().unwrap().abs())
            .fold(0.0, f64::max);
        for i in 0..3 {
            let want = v["body_nt"][i].as_f64().unwrap();
            // double: the tool's own arithmetic, to rounding.
            assert!((got[i] - want).abs() < 1e-9 * raw_mag, "{line} vs {v}");
            // float: a few roundings of float epsilon (2^-23, IEEE 754 binary32).
            assert!(
                (got[3 + i] - want).abs() < 16.0 * f64::from(f32::EPSILON) * raw_mag,
                "float {line} vs {v}"
            );
        }
    }
}

fn compile_and_run(fp: &std::path::Path, name: &str, source: &str) -> String {
    std::fs::write(fp.join(format!("{name}.c")), source).unwrap();
    let built = cc(&["-o", name, &format!("{name}.c")], fp);
    assert!(
        built.status.success(),
        "{}",
        String::from_utf8_lossy(&built.stderr)
    );
    let run = Command::new(fp.join(name)).output().unwrap();
    assert!(run.status.success());
    String::from_utf8(run.stdout).unwrap()
}

#[test]
fn two_magnetometers_get_one_file_set_and_a_c_program_reproduces_both() {
    let d = TestDir::new();
    two_magnetometers(&d);
    let out = d.run(&["closeout", "plan.toml", "--no-record", "--params-out", "fp"]);
    assert_code(&out, 0);
    let fp = d.join("fp");
    let syntax = cc(&["-fsyntax-only", "magproof-flight.h"], &fp);
    assert!(
        syntax.status.success(),
        "{}",
        String::from_utf8_lossy(&syntax.stderr)
    );
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(fp.join("magproof-flight.json")).unwrap())
            .unwrap();
    let mags = json["magnetometers"].as_array().unwrap();
    let names: Vec<&str> = mags.iter().map(|m| m["name"].as_str().unwrap()).collect();
    assert_eq!(names, ["MAG-A", "MAG-B"]);
    assert_eq!(mags[1]["serial"], "B-1");
    assert_eq!(
        mags[1]["sensor_to_body"][0][1], 1.0,
        "+y of the sensor is body x"
    );
    // Each entry is its own magnetometer's calibration: MAG-B's planted hard iron.
    let (c, s) = (
        &mags[1]["calibration"]["hard_iron_nt"],
        &mags[1]["calibration"]["hard_iron_sigma_nt"],
    );
    for (i, truth) in [500.0, -300.0, 200.0].iter().enumerate() {
        let (c, s) = (c[i].as_f64().unwrap(), s[i].as_f64().unwrap());
        assert!(
            (c - truth).abs() < 4.0 * s.max(1.0),
            "MAG-B c[{i}] = {c} ± {s}"
        );
    }
    assert_ne!(mags[0]["calibration"]["log"], mags[1]["calibration"]["log"]);
    let vectors = json["test_vectors"].as_array().unwrap();
    let which: Vec<u64> = vectors
        .iter()
        .map(|v| v["magnetometer"].as_u64().unwrap())
        .collect();
    assert_eq!(which, [0, 1], "one worked example per magnetometer");
    // By index (the program the single-magnetometer test uses) and by name.
    assert_reproduced(&compile_and_run(&fp, "apply", APPLY_C), vectors, false);
    assert_reproduced(&compile_and_run(&fp, "named", APPLY_NAMED_C), vectors, true);
    assert!(
        stderr(&out).contains("magproof-flight.h"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn a_magnetometer_no_step_read_is_listed_without_a_calibration() {
    let d = TestDir::new();
    two_magnetometers(&d);
    let plan = std::fs::read_to_string(d.join("plan.toml")).unwrap();
    let one_step = plan
        .split("[[step]]")
        .take(2)
        .collect::<Vec<_>>()
        .join("[[step]]");
    d.write("plan.toml", one_step);
    let out = d.run(&["closeout", "plan.toml", "--no-record", "--params-out", "fp"]);
    assert_code(&out, 0);
    let fp = d.join("fp");
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(fp.join("magproof-flight.json")).unwrap())
            .unwrap();
    assert!(json["magnetometers"][1]["calibration"].is_null());
    assert!(json["notes"]
        .to_string()
        .contains("magnetometer MAG-B: no step"));
    let header = std::fs::read_to_string(fp.join("magproof-flight.h")).unwrap();
    assert!(header.contains("MAGPROOF_MAG_MAG_A_HARD_IRON_NT"));
    assert!(!header.contains("static const double MAGPROOF_MAG_MAG_B_HARD_IRON_NT"));
    assert!(header.contains("MAGPROOF_MAG_MAG_B_SENSOR_TO_BODY"));
    let syntax = cc(&["-fsyntax-only", "magproof-flight.h"], &fp);
    assert!(syntax.status.success());
}

/// MAG-A's numbers by name with its rod coupling (step 1 of the order of operations),
/// MAG-B's without (no polarity step read it: its examples have every rod off).
const APPLY_COUPLED_C: &str = r#"
#include <stdio.h>
#include "magproof-flight.h"

int main(void) {
    int t, i, j, r;
    for (t = 0; t < MAGPROOF_TEST_COUNT; t++) {
        int a = MAGPROOF_TEST_MAG[t] == MAGPROOF_MAG_INDEX_MAG_A;
        double b1[3], b2[3], bb[3];
        float f1[3], f2[3], fb[3];
        for (i = 0; i < 3; i++) {
            b1[i] = MAGPROOF_TEST_RAW_NT[t][i];
            f1[i] = MAGPROOF_TEST_RAW_NT_F[t][i];
            for (r = 0; r < MAGPROOF_ROD_COUNT; r++) {
                if (a) {
                    b1[i] -= MAGPROOF_MAG_MAG_A_ROD_COUPLING_NT_PER_CMD[r][i] * MAGPROOF_TEST_COMMAND[t][r];
                    f1[i] -= MAGPROOF_MAG_MAG_A_ROD_COUPLING_NT_PER_CMD_F[r][i] * MAGPROOF_TEST_COMMAND_F[t][r];
                }
            }
            b1[i] -= a ? MAGPROOF_MAG_MAG_A_HARD_IRON_NT[i] : MAGPROOF_MAG_MAG_B_HARD_IRON_NT[i];
            f1[i] -= a ? MAGPROOF_MAG_MAG_A_HARD_IRON_NT_F[i] : MAGPROOF_MAG_MAG_B_HARD_IRON_NT_F[i];
        }
        for (i = 0; i < 3; i++) {
            b2[i] = 0.0; f2[i] = 0.0f;
            for (j = 0; j < 3; j++) {
                b2[i] += (a ? MAGPROOF_MAG_MAG_A_SOFT_IRON[i][j] : MAGPROOF_MAG_MAG_B_SOFT_IRON[i][j]) * b1[j];
                f2[i] += (a ? MAGPROOF_MAG_MAG_A_SOFT_IRON_F[i][j] : MAGPROOF_MAG_MAG_B_SOFT_IRON_F[i][j]) * f1[j];
            }
        }
        for (i = 0; i < 3; i++) {
            bb[i] = 0.0; fb[i] = 0.0f;
            for (j = 0; j < 3; j++) {
                bb[i] += (a ? MAGPROOF_MAG_MAG_A_SENSOR_TO_BODY[i][j] : MAGPROOF_MAG_MAG_B_SENSOR_TO_BODY[i][j]) * b2[j];
                fb[i] += (a ? MAGPROOF_MAG_MAG_A_SENSOR_TO_BODY_F[i][j] : MAGPROOF_MAG_MAG_B_SENSOR_TO_BODY_F[i][j]) * f2[j];
            }
        }
        printf("%d %.17g %.17g %.17g %.9g %.9g %.9g\n", t, bb[0], bb[1], bb[2], fb[0], fb[1], fb[2]);
    }
    return 0;
}
"#;

#[test]
fn rod_coupling_measured_at_one_of_two_magnetometers_is_given_by_its_name() {
    let d = TestDir::new();
    let plan = super::battery_outputs::sample(&d, "b3");
    // The demo's B3 plan with a second magnetometer; the tumble log read as each.
    let text = std::fs::read_to_string(d.join(plan)).unwrap();
    let text = text
        .replace(
            "[magnetometer]\n",
            "[[magnetometer]]\nname = \"MAG-A\"\n",
        )
        .replace(
            "unit = \"nT\"\n",
            "unit = \"nT\"\n\n[[magnetometer]]\nname = \"MAG-B\"\nposition_m = [-0.02, 0.015, 0.21]\nunit = \"nT\"\n",
        )
        .replace(
            "log = \"tumble.csv\"\n",
            "log = \"tumble.csv\"\nsensor = \"MAG-A\"\n\n[[step]]\nkind = \"calibrate\"\nlog = \"tumble.csv\"\nsensor = \"MAG-B\"\n",
        )
        .replace(
            "log = \"rod-pulses.csv\"\n",
            "log = \"rod-pulses.csv\"\nsensor = \"MAG-A\"\n",
        )
        .replace("log = \"loop.csv\"\n", "log = \"loop.csv\"\nsensor = \"MAG-A\"\n")
        .replace(
            "log = \"align/align.csv\"\n",
            "log = \"align/align.csv\"\nsensor = \"MAG-A\"\n",
        );
    assert_eq!(text.matches("sensor = ").count(), 5, "{text}");
    d.write(plan, text);
    let out = d.run(&["closeout", plan, "--no-record", "--params-out", "fp"]);
    assert_code(&out, 0);
    let fp = d.join("fp");
    let header = std::fs::read_to_string(fp.join("magproof-flight.h")).unwrap();
    // The indexed coupling needs it at every magnetometer; MAG-A's is given by name.
    assert!(!header.contains("double MAGPROOF_MAG_ROD_COUPLING_NT_PER_CMD["));
    assert!(!header.contains("MAGPROOF_MAG_MAG_B_ROD_COUPLING"));
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(fp.join("magproof-flight.json")).unwrap())
            .unwrap();
    assert!(json["magnetometers"][0]["rod_coupling_nt_per_command"].is_array());
    assert!(json["magnetometers"][1]["rod_coupling_nt_per_command"].is_null());
    let vectors = json["test_vectors"].as_array().unwrap();
    let which: Vec<(u64, f64)> = vectors
        .iter()
        .map(|v| {
            (
                v["magnetometer"].as_u64().unwrap(),
                v["commands"][0].as_f64().unwrap(),
            )
        })
        .collect();
    // MAG-A: rods off and a unit command on every rod; MAG-B: rods off.
    assert_eq!(which, [(0, 0.0), (0, 1.0), (1, 0.0)]);
    assert_eq!(json["rods"].as_array().unwrap().len(), 3);
    assert_reproduced(
        &compile_and_run(&fp, "coupled", APPLY_COUPLED_C),
        vectors,
        true,
    );
}
