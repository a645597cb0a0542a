//! Several magnetometers in one plan (`docs/formats.md`), through closeout and history:
//! each step names its sensor, the ledger keeps the name with each run, and history
//! compares a sensor's calibrations with the same sensor's only.

use crate::util::{assert_code, assert_stderr_has, json_stdout, TestDir};

const SAMPLE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/sample-logs");

/// A log with two magnetometers: A (the build's tumble log in nT) and B (the same
/// field in µT, as another sensor would give it).
fn two_sensor_log(dir: &TestDir, build: &str) -> std::path::PathBuf {
    let text = std::fs::read_to_string(format!("{SAMPLE}/tmr-0207-{build}/tumble.csv")).unwrap();
    let mut out = String::from("t,A_X,A_Y,A_Z,B_X [uT],B_Y [uT],B_Z [uT]\n");
    for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let c: Vec<&str> = line.split(',').collect();
        let ut: Vec<String> = c[1..4]
            .iter()
            .map(|v| format!("{}", v.parse::<f64>().unwrap() / 1000.0))
            .collect();
        out.push_str(&format!(
            "{},{},{},{},{}\n",
            c[0],
            c[1],
            c[2],
            c[3],
            ut.join(",")
        ));
    }
    dir.write(&format!("{build}.csv"), out)
}

fn plan(dir: &TestDir, build: &str, steps: &str) -> std::path::PathBuf {
    dir.write(
        &format!("{build}.toml"),
        format!(
            "[article]\nserial = \"TMR-0207\"\nbuild = \"{build}\"\n\n\
             [[magnetometer]]\nname = \"A\"\ncolumns = [\"A_X\", \"A_Y\", \"A_Z\"]\nserial = \"MAG-0001\"\n\n\
             [[magnetometer]]\nname = \"B\"\ncolumns = [\"B_X\", \"B_Y\", \"B_Z\"]\nserial = \"MAG-0002\"\n\n\
             [site]\nlat_deg = 46.2\nlon_deg = 7.3\nalt_m = 510\ndate = \"2026-03-10\"\n\n{steps}"
        ),
    )
}

fn steps(build: &str) -> String {
    format!(
        "[[step]]\nkind = \"calibrate\"\nlog = \"{build}.csv\"\nsensor = \"A\"\n\n\
         [[step]]\nkind = \"calibrate\"\nlog = \"{build}.csv\"\nsensor = \"B\"\n"
    )
}

#[test]
fn each_step_reads_its_sensor_and_history_compares_like_with_like() {
    let d = TestDir::new();
    for build in ["b1", "b2"] {
        two_sensor_log(&d, build);
        let p = plan(&d, build, &steps(build));
        let r = d.run(&[
            "closeout",
            p.to_str().unwrap(),
            "--ledger",
            "l.db",
            "--json",
        ]);
        assert!(
            matches!(r.status.code(), Some(0 | 1)),
            "{}",
            String::from_utf8_lossy(&r.stderr)
        );
        let v = json_stdout(&r);
        assert_eq!(v["steps"][0]["sensor"], "A");
        assert_eq!(v["steps"][1]["sensor"], "B");
        // B's columns are ignored by A's step and the other way round.
        assert_eq!(
            v["steps"][0]["ignored_columns"],
            serde_json::json!(["B_X [uT]", "B_Y [uT]", "B_Z [uT]"])
        );
    }
    // The terminal summary names each step's sensor and the columns it ignored.
    let p = d.join("b2.toml");
    let r = d.run(&["closeout", p.to_str().unwrap(), "--no-record"]);
    let text = crate::util::stdout(&r);
    assert!(
        text.contains("Magnetometer: A") && text.contains("Magnetometer: B"),
        "{text}"
    );
    assert!(text.contains("(ignored): B_X [uT]"), "{text}");
    let conn = rusqlite::Connection::open(d.join("l.db")).unwrap();
    let sensors: Vec<Option<String>> = conn
        .prepare("SELECT sensor FROM runs ORDER BY id")
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    let some = |s: &str| Some(s.to_string());
    assert_eq!(sensors, vec![some("A"), some("B"), some("A"), some("B")]);
    let r = d.run(&["history", "--ledger", "l.db", "--json"]);
    assert_code(&r, 0);
    let h = json_stdout(&r);
    let changes = h["changes"].as_array().unwrap();
    let names: Vec<&str> = changes
        .iter()
        .filter_map(|c| c["quantity"].as_str())
        .collect();
    assert!(names.contains(&"hard_iron_x_nt@A"), "{names:?}");
    assert!(names.contains(&"hard_iron_x_nt@B"), "{names:?}");
    // Each sensor's runs are compared with its own: one hard-iron change per sensor,
    // and a soft-iron change and a verdict per sensor.
    for q in ["hard_iron_x_nt@A", "hard_iron_x_nt@B"] {
        assert_eq!(names.iter().filter(|n| **n == q).count(), 1, "{names:?}");
    }
    assert_eq!(
        names
            .iter()
            .filter(|n| **n == "soft_iron_max_element")
            .count(),
        2
    );
    assert_eq!(names.iter().filter(|n| **n == "calibrate_pass").count(), 2);
    // The two sensors read the same field: A's change equals B's within rounding.
    let delta = |q: &str| {
        changes.iter().find(|c| c["quantity"] == q).unwrap()["delta"]
            .as_f64()
            .unwrap()
    };
    assert!((delta("hard_iron_x_nt@A") - delta("hard_iron_x_nt@B")).abs() < 1e-3);
}

#[test]
fn a_step_without_a_sensor_under_several_is_refused_listing_them() {
    let d = TestDir::new();
    two_sensor_log(&d, "b1");
    let p = plan(
        &d,
        "b1",
        "[[step]]\nkind = \"calibrate\"\nlog = \"b1.csv\"\n",
    );
    let r = d.run(&["closeout", p.to_str().unwrap(), "--no-record"]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["A, B", "sensor = \"NAME\""]);
    let p = plan(
        &d,
        "b1",
        "[[step]]\nkind = \"calibrate\"\nlog = \"b1.csv\"\nsensor = \"C\"\n",
    );
    let r = d.run(&["closeout", p.to_str().unwrap(), "--no-record"]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["step[0].sensor", "\"C\""]);
}
