//! Flight parameters as a flight team receives them: the C header compiles with the
//! system C compiler, and a small C program that applies it (in `double` and in
//! `float`) reproduces the field the tool computed for a sample of the log.

use std::path::Path;
use std::process::Command;

use serde_json::Value;

use super::battery_outputs::sample;
use super::util::{assert_code, stderr, TestDir};

/// The C program: the order of operations the header's comment states, written from
/// that comment alone, once in double and once in float.
pub(super) const APPLY_C: &str = r#"
#include <stdio.h>
#include "magproof-flight.h"

int main(void) {
    int t, i, j;
    for (t = 0; t < MAGPROOF_TEST_COUNT; t++) {
        int m = MAGPROOF_TEST_MAG[t];
        double b1[3], b2[3], bb[3];
        float f1[3], f2[3], fb[3];
        for (i = 0; i < 3; i++) {
            b1[i] = MAGPROOF_TEST_RAW_NT[t][i];
            f1[i] = MAGPROOF_TEST_RAW_NT_F[t][i];
#if MAGPROOF_ROD_COUNT > 0
            int r;
            for (r = 0; r < MAGPROOF_ROD_COUNT; r++) {
                b1[i] -= MAGPROOF_MAG_ROD_COUPLING_NT_PER_CMD[m][r][i] * MAGPROOF_TEST_COMMAND[t][r];
                f1[i] -= MAGPROOF_MAG_ROD_COUPLING_NT_PER_CMD_F[m][r][i] * MAGPROOF_TEST_COMMAND_F[t][r];
            }
#endif
            b1[i] -= MAGPROOF_MAG_HARD_IRON_NT[m][i] + MAGPROOF_MAG_TEMP_SLOPE_NT_PER_C[m][i]
                * (MAGPROOF_TEST_TEMP_C[t] - MAGPROOF_MAG_TEMP_REF_C[m]);
            f1[i] -= MAGPROOF_MAG_HARD_IRON_NT_F[m][i] + MAGPROOF_MAG_TEMP_SLOPE_NT_PER_C_F[m][i]
                * (MAGPROOF_TEST_TEMP_C_F[t] - MAGPROOF_MAG_TEMP_REF_C_F[m]);
        }
        for (i = 0; i < 3; i++) {
            b2[i] = 0.0; f2[i] = 0.0f;
            for (j = 0; j < 3; j++) {
                b2[i] += MAGPROOF_MAG_SOFT_IRON[m][i][j] * b1[j];
                f2[i] += MAGPROOF_MAG_SOFT_IRON_F[m][i][j] * f1[j];
            }
        }
        for (i = 0; i < 3; i++) {
            bb[i] = 0.0; fb[i] = 0.0f;
            for (j = 0; j < 3; j++) {
                bb[i] += MAGPROOF_MAG_SENSOR_TO_BODY[m][i][j] * b2[j];
                fb[i] += MAGPROOF_MAG_SENSOR_TO_BODY_F[m][i][j] * f2[j];
            }
        }
        printf("%.17g %.17g %.17g %.9g %.9g %.9g\n", bb[0], bb[1], bb[2], fb[0], fb[1], fb[2]);
    }
    return 0;
}
"#;

/// Strict C99 flags: a flight build treats warnings as errors.
const CFLAGS: [&str; 5] = ["-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror"];

pub(super) fn cc(args: &[&str], dir: &Path) -> std::process::Output {
    Command::new("cc")
        .args(CFLAGS)
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the system C compiler `cc` (.ci/run installs gcc when it is missing)")
}

fn closeout(d: &TestDir, build: &str, extra: &[&str]) -> std::process::Output {
    let plan = sample(d, build);
    d.magproof()
        .args(["closeout", plan, "--no-record", "--params-out", "fp"])
        .args(extra)
        .output()
        .unwrap()
}

#[test]
fn the_header_compiles_and_a_c_program_reproduces_the_corrected_field() {
    let d = TestDir::new();
    let out = closeout(&d, "b3", &[]);
    assert_code(&out, 0);
    assert!(
        stderr(&out).contains("fp/magproof-flight.h"),
        "{}",
        stderr(&out)
    );
    let fp = d.join("fp");
    let syntax = cc(&["-fsyntax-only", "magproof-flight.h"], &fp);
    assert!(
        syntax.status.success(),
        "{}",
        String::from_utf8_lossy(&syntax.stderr)
    );
    std::fs::write(fp.join("apply.c"), APPLY_C).unwrap();
    let built = cc(&["-o", "apply", "apply.c"], &fp);
    assert!(
        built.status.success(),
        "{}",
        String::from_utf8_lossy(&built.stderr)
    );
    let run = Command::new(fp.join("apply")).output().unwrap();
    assert!(run.status.success());
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(fp.join("magproof-flight.json")).unwrap())
            .unwrap();
    let vectors = json["test_vectors"].as_array().unwrap();
    // One sample with every rod off, one with a unit command on every rod.
    assert_eq!(vectors.len(), 2);
    let text = String::from_utf8(run.stdout).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), vectors.len());
    for (line, v) in lines.iter().zip(vectors) {
        let got: Vec<f64> = line.split(' ').map(|x| x.parse().unwrap()).collect();
        let want: Vec<f64> = (0..3).map(|i| v["body_nt"][i].as_f64().unwrap()).collect();
        let raw_mag = (0..3)
            .map(|i| v["raw_nt"][i].as_f64().unwrap().abs())
            .fold(0.0, f64::max);
        for i in 0..3 {
            // double: the tool's own arithmetic, to rounding.
            assert!(
                (got[i] - want[i]).abs() < 1e-9 * raw_mag,
                "{line} vs {want:?}"
            );
            // float: a few roundings of float epsilon (2^-23 ≈ 1.2e-7, IEEE 754 binary32)
            // on the largest term.
            assert!(
                (got[3 + i] - want[i]).abs() < 16.0 * f64::from(f32::EPSILON) * raw_mag,
                "float {line} vs {want:?}"
            );
        }
    }
    // The first example is a row of the log itself, as the log wrote it.
    let origin = vectors[0]["origin"].as_str().unwrap();
    let line_no: usize = origin
        .rsplit("line ")
        .next()
        .and_then(|s| s.split(')').next())
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| panic!("{origin}"));
    let log = std::fs::read_to_string(d.join("tumble.csv")).unwrap();
    let row = log.lines().nth(line_no - 1).unwrap();
    let header: Vec<&str> = log
        .lines()
        .find(|l| !l.starts_with('#'))
        .unwrap()
        .split(',')
        .collect();
    let cells: Vec<&str> = row.split(',').collect();
    for (i, axis) in ["bx", "by", "bz"].iter().enumerate() {
        let col = header
            .iter()
            .position(|h| h.trim().starts_with(axis))
            .unwrap();
        let logged: f64 = cells[col].trim().parse().unwrap();
        assert!(
            (logged - vectors[0]["raw_nt"][i].as_f64().unwrap()).abs() < 1e-9,
            "{row}"
        );
    }
}

#[test]
fn the_files_say_who_what_and_from_which_inputs() {
    let d = TestDir::new();
    assert_code(&closeout(&d, "b3", &[]), 0);
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("fp/magproof-flight.json")).unwrap())
            .unwrap();
    let header = std::fs::read_to_string(d.join("fp/magproof-flight.h")).unwrap();
    assert_eq!(json["identity"]["serial"], "TMR-0207");
    assert_eq!(json["identity"]["build"], "B3");
    assert_eq!(json["verdict_passed"], true);
    assert!(header.contains("#define MAGPROOF_SERIAL \"TMR-0207\""));
    assert!(header.contains("#define MAGPROOF_VERDICT_PASSED 1"));
    // One prefix for every name the header defines.
    for l in header
        .lines()
        .filter(|l| l.starts_with("#define") || l.starts_with("static"))
    {
        let name = l
            .split_whitespace()
            .find(|w| w.chars().next().is_some_and(|c| c.is_ascii_uppercase()))
            .unwrap();
        assert!(name.starts_with("MAGPROOF_"), "{l}");
    }
    // Every input hashed, each hash the SHA-256 of the file's bytes (sha2 crate,
    // FIPS 180-4).
    let inputs = json["identity"]["inputs"].as_array().unwrap();
    let roles: Vec<&str> = inputs.iter().map(|i| i["role"].as_str().unwrap()).collect();
    assert_eq!(roles, ["plan", "calibrate", "polarity"]);
    for i in inputs {
        use sha2::Digest;
        let bytes = std::fs::read(d.join(i["path"].as_str().unwrap())).unwrap();
        let hex: String = sha2::Sha256::digest(&bytes)
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        assert_eq!(i["sha256"], hex.as_str());
        assert!(header.contains(&hex));
    }
    // The order of operations is stated, and the mounting says where it came from.
    assert!(json["order_of_operations"][0]
        .as_str()
        .unwrap()
        .contains("b_raw - sum"));
    assert!(header.contains("b_body = sensor_to_body * b2"));
    assert_eq!(json["magnetometers"][0]["sensor_to_body_source"], "plan");
    // Blanking: the 95th percentile of the rods' pulses, never above the slowest.
    for r in json["rods"].as_array().unwrap() {
        let b = &r["blanking"];
        assert_eq!(b["percentile"], 95.0);
        assert!(b["window_s"].as_f64().unwrap() <= b["longest_s"].as_f64().unwrap());
    }
    assert!(json["blanking_window_s"].as_f64().unwrap() > 0.0);
    // Measured dipoles, signed along the rod axes: the plan's nominal within 5 %.
    for r in json["rods"].as_array().unwrap() {
        let m = r["dipole_per_command_am2"].as_f64().unwrap();
        let nominal = r["nominal_dipole_per_command_am2"].as_f64().unwrap();
        assert!((m / nominal - 1.0).abs() < 0.05, "{r}");
    }
    assert_eq!(json["gyros"].as_array().unwrap().len(), 0);
    assert!(header.contains("#define MAGPROOF_GYRO_COUNT 0"));
}

#[test]
fn a_failing_closeout_writes_flight_parameters_only_when_forced_and_says_so() {
    let d = TestDir::new();
    // Build B1 has a rod wired backwards.
    let out = closeout(&d, "b1", &[]);
    assert_code(&out, 2);
    assert!(stderr(&out).contains("passing verdict"), "{}", stderr(&out));
    assert!(!d.join("fp").exists());
    let out = closeout(&d, "b1", &["--force"]);
    assert_code(&out, 1);
    let header = std::fs::read_to_string(d.join("fp/magproof-flight.h")).unwrap();
    assert!(
        header.contains("#define MAGPROOF_VERDICT_PASSED 0"),
        "{header}"
    );
    assert!(header.contains("WARNING: the verdict is FAIL"), "{header}");
    let json: Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("fp/magproof-flight.json")).unwrap())
            .unwrap();
    assert_eq!(json["verdict_passed"], false);
    // The reversed rod's measured dipole is negative along its axis.
    assert!(json["rods"]
        .as_array()
        .unwrap()
        .iter()
        .any(|r| r["dipole_per_command_am2"].as_f64().unwrap() < 0.0));
    let syntax = cc(&["-fsyntax-only", "magproof-flight.h"], &d.join("fp"));
    assert!(
        syntax.status.success(),
        "{}",
        String::from_utf8_lossy(&syntax.stderr)
    );
}
