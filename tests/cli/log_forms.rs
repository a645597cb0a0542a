//! Logs as labs and flight software write them (`docs/formats.md`), through the binary:
//! each form of a committed sample log must give the same answer as the plain log, and
//! each form that cannot be used must be refused by name.
//!
//! The equivalences are exact where the conversion is exact (raw counts at 0.25 nT per
//! count are the plain values times 4, a power of two; decimal commas and renamed
//! columns change no digit), and within numerical noise where it is not (a 1 s clock
//! spread back over 50 Hz rows differs from the logged times by rounding only).

use crate::util::{assert_code, assert_stderr_has, json_stdout, stdout, TestDir};

const SAMPLE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/sample-logs/tmr-0207-b1");

fn sample(name: &str) -> String {
    std::fs::read_to_string(format!("{SAMPLE}/{name}")).expect("sample log")
}

/// Data rows of a sample log, split into cells (comments and the header dropped).
fn rows(text: &str) -> Vec<Vec<String>> {
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.trim().is_empty())
        .skip(1)
        .map(|l| l.split(',').map(String::from).collect())
        .collect()
}

/// A decimal with at most 3 decimals, times 4, written exactly (as counts at 0.25 nT).
fn times_four(cell: &str) -> String {
    let neg = cell.starts_with('-');
    let digits = cell.trim_start_matches('-');
    let (int, frac) = digits.split_once('.').unwrap_or((digits, ""));
    let frac = format!("{frac:0<3}");
    let milli: i64 = format!("{int}{}", &frac[..3]).parse().expect("decimal");
    let v = milli * 4;
    format!("{}{}.{:03}", if neg { "-" } else { "" }, v / 1000, v % 1000)
}

fn calibrate_json(
    d: &TestDir,
    log: &std::path::Path,
    plan: &std::path::Path,
    extra: &[&str],
) -> serde_json::Value {
    let mut args = vec![
        "calibrate",
        log.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
        "--json",
    ];
    args.extend(extra);
    let r = d.run(&args);
    assert!(
        matches!(r.status.code(), Some(0 | 1)),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    json_stdout(&r)
}

fn same_calibration(a: &serde_json::Value, b: &serde_json::Value) {
    for key in [
        "hard_iron_nt",
        "soft_iron",
        "residual_rms_nt",
        "samples_used",
        "verdict",
    ] {
        assert_eq!(a[key], b[key], "{key}");
    }
}

/// A flight-software export: its own column names (`TIME`, `MAG_X` …), raw counts, a
/// decimal comma with `;`, and a column of its own. Same answer as the plain tumble.
#[test]
fn flight_software_export_with_its_own_names_and_counts_gives_the_plain_answer() {
    let d = TestDir::new();
    let plan_text = sample("plan.toml");
    let plain_plan = d.write("plain.toml", &plan_text);
    let plain_log = d.write("tumble.csv", sample("tumble.csv"));
    let plain = calibrate_json(&d, &plain_log, &plain_plan, &[]);

    let mut fsw = String::from(
        "# exported by the flight software\nTIME;MAG_X [LSB];MAG_Y [LSB];MAG_Z [LSB];RSSI\n",
    );
    for r in rows(&sample("tumble.csv")) {
        let cells: Vec<String> = std::iter::once(r[0].clone())
            .chain(r[1..4].iter().map(|c| times_four(c)))
            .chain(std::iter::once("-70".to_string()))
            .map(|c| c.replace('.', ","))
            .collect();
        fsw.push_str(&cells.join(";"));
        fsw.push('\n');
    }
    let fsw_log = d.write("fsw.csv", fsw);
    let fsw_plan = plan_text.replace("unit = \"nT\"", "unit = \"nT\"\nnt_per_count = 0.25")
        + "\n[columns]\nt = \"TIME\"\nbx = \"MAG_X\"\nby = \"MAG_Y\"\nbz = \"MAG_Z\"\n\n[log]\ndecimal = \",\"\n";
    let fsw_plan = d.write("fsw.toml", fsw_plan);
    let got = calibrate_json(&d, &fsw_log, &fsw_plan, &[]);
    same_calibration(&got, &plain);
    assert_eq!(got["ignored_columns"], serde_json::json!(["RSSI"]));
    assert_eq!(plain["ignored_columns"], serde_json::json!([]));

    // The terminal summary says which columns were ignored.
    let r = d.run(&[
        "calibrate",
        fsw_log.to_str().unwrap(),
        "--plan",
        fsw_plan.to_str().unwrap(),
    ]);
    assert!(stdout(&r).contains("RSSI"), "{}", stdout(&r));
    // inspect shows the mapping it applied.
    let r = d.run(&[
        "inspect",
        fsw_log.to_str().unwrap(),
        "--plan",
        fsw_plan.to_str().unwrap(),
    ]);
    assert_code(&r, 0);
    assert!(
        stdout(&r).contains("bx ← MAG_X [LSB] (× 0.25)"),
        "{}",
        stdout(&r)
    );
}

/// Two magnetometers in one log: no choice is refused listing both; each choice reads
/// its own columns and gives the answer of its plain log.
#[test]
fn two_sensors_in_one_log_need_a_choice_and_each_gives_its_plain_answer() {
    let d = TestDir::new();
    let site = "[site]\nlat_deg = 46.2\nlon_deg = 7.3\nalt_m = 510\ndate = \"2026-03-10\"\n";
    let plain_plan = d.write(
        "plain.toml",
        format!("[magnetometer]\nunit = \"nT\"\n{site}"),
    );
    let plain = calibrate_json(
        &d,
        &d.write("tumble.csv", sample("tumble.csv")),
        &plain_plan,
        &[],
    );

    // Sensor A in nT; sensor B in raw counts of 0.25 nT: the same field.
    let mut log = String::from("t,A_X,A_Y,A_Z,B_X,B_Y,B_Z\n");
    for r in rows(&sample("tumble.csv")) {
        let b: Vec<String> = r[1..4].iter().map(|c| times_four(c)).collect();
        log.push_str(&format!(
            "{},{},{},{},{}\n",
            r[0],
            r[1],
            r[2],
            r[3],
            b.join(",")
        ));
    }
    let log = d.write("two.csv", log);
    let plan = d.write(
        "two.toml",
        format!(
            "[[magnetometer]]\nname = \"A\"\ncolumns = [\"A_X\", \"A_Y\", \"A_Z\"]\nunit = \"nT\"\nserial = \"A-001\"\n\n\
             [[magnetometer]]\nname = \"B\"\ncolumns = [\"B_X\", \"B_Y\", \"B_Z\"]\nunit = \"counts\"\nnt_per_count = [0.25, 0.25, 0.25]\n\n{site}"
        ),
    );
    let r = d.run(&[
        "calibrate",
        log.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
    ]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["A, B", "--sensor"]);
    for (name, other) in [("A", "B"), ("B", "A")] {
        let got = calibrate_json(&d, &log, &plan, &["--sensor", name]);
        same_calibration(&got, &plain);
        let ignored: Vec<String> = ["X", "Y", "Z"]
            .iter()
            .map(|a| format!("{other}_{a}"))
            .collect();
        assert_eq!(got["ignored_columns"], serde_json::json!(ignored));
    }
    let r = d.run(&[
        "calibrate",
        log.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
        "--sensor",
        "C",
    ]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["\"C\"", "A, B"]);
}

/// Rod pulses as flight software logs them: commands only when they change, the rod
/// commands under its own names, and a 1 s unix clock on a 50 Hz log.
#[test]
fn held_commands_and_a_coarse_unix_clock_give_the_plain_polarity() {
    let d = TestDir::new();
    let plan_text = sample("plan.toml");
    let plan = d.write("plan.toml", &plan_text);
    let plain_log = d.write("rods.csv", sample("rod-pulses.csv"));
    let r = d.run(&[
        "polarity",
        plain_log.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
        "--json",
    ]);
    let plain = json_stdout(&r);

    let mut text = String::from("t [unix],bx [nT],by [nT],bz [nT],MTQ1_CMD,MTQ2_CMD,MTQ3_CMD\n");
    let mut last: Vec<String> = Vec::new();
    for r in rows(&sample("rod-pulses.csv")) {
        let second: u64 = r[0].split('.').next().unwrap().parse().unwrap();
        let mut cells = vec![(1_764_842_400 + second).to_string()];
        cells.extend(r[1..4].iter().cloned());
        for (k, c) in r[4..7].iter().enumerate() {
            let same = last.get(k) == Some(c);
            cells.push(if same { String::new() } else { c.clone() });
        }
        last = r[4..7].to_vec();
        text.push_str(&cells.join(","));
        text.push('\n');
    }
    let log = d.write("fsw-rods.csv", text);
    let fsw_plan = d.write(
        "fsw.toml",
        plan_text
            + "\n[columns]\ncmd_x = \"MTQ1_CMD\"\ncmd_y = \"MTQ2_CMD\"\ncmd_z = \"MTQ3_CMD\"\n\n[log]\nhold_commands = true\n",
    );
    let r = d.run(&[
        "polarity",
        log.to_str().unwrap(),
        "--plan",
        fsw_plan.to_str().unwrap(),
        "--json",
    ]);
    let got = json_stdout(&r);
    assert_eq!(got["verdict"], plain["verdict"]);
    let warnings = got["warnings"].to_string();
    assert!(warnings.contains("repeat the timestamp"), "{warnings}");
    for (a, b) in got["rods"]
        .as_array()
        .unwrap()
        .iter()
        .zip(plain["rods"].as_array().unwrap())
    {
        assert_eq!(a["verdict"], b["verdict"]);
        for k in 0..3 {
            let (x, y) = (
                a["coupling_nt_per_command"][k].as_f64().unwrap(),
                b["coupling_nt_per_command"][k].as_f64().unwrap(),
            );
            let sigma = b["coupling_sigma_nt_per_command"][k].as_f64().unwrap();
            assert!((x - y).abs() < 0.01 * sigma, "{x} vs {y} (σ {sigma})");
        }
    }
}

#[test]
fn decimal_comma_flag_and_parenthesised_units_read_the_log() {
    let d = TestDir::new();
    let log = d.write(
        "dc.csv",
        "t (s)\tbx (uT)\tby (uT)\tbz (uT)\n0\t1,5\t2\t3\n0,1\t1,5\t2\t3\n",
    );
    let r = d.run(&["inspect", log.to_str().unwrap(), "--json"]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["dc.csv:2", "decimal comma", "--decimal-comma"]);
    let r = d.run(&[
        "inspect",
        log.to_str().unwrap(),
        "--decimal-comma",
        "--json",
    ]);
    assert_code(&r, 0);
    let v = json_stdout(&r);
    assert_eq!(v["rows"], 2);
    assert_eq!(
        v["field_magnitude_nt"][0].as_f64().unwrap().round(),
        (1500f64.powi(2) + 2000f64.powi(2) + 3000f64.powi(2))
            .sqrt()
            .round()
    );
}

#[test]
fn text_in_other_encodings_is_refused_naming_the_encoding() {
    let d = TestDir::new();
    let latin1 = d.write(
        "l1.csv",
        b"t,bx,by,bz,temp [\xB0C]\n0,1,2,3,20\n".as_slice(),
    );
    let r = d.run(&["inspect", latin1.to_str().unwrap()]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["l1.csv:1", "Latin-1"]);
    let mut utf16 = vec![0xFF, 0xFE];
    for u in "t,bx,by,bz\n0,1,2,3\n".encode_utf16() {
        utf16.extend(u.to_le_bytes());
    }
    let p = d.write("u16.csv", utf16);
    let r = d.run(&["inspect", p.to_str().unwrap()]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["u16.csv:1", "UTF-16 little-endian"]);
}

#[test]
fn inspect_without_usable_field_columns_lists_the_log_and_exits_2() {
    let d = TestDir::new();
    let p = d.write("nob.csv", "t,MAG_X,MAG_Y,MAG_Z\n0,1,2,3\n");
    let r = d.run(&["inspect", p.to_str().unwrap()]);
    assert_code(&r, 2);
    assert!(
        stdout(&r).contains("ignored      : MAG_X, MAG_Y, MAG_Z"),
        "{}",
        stdout(&r)
    );
    assert_stderr_has(&r, &["no usable field columns", "[columns]"]);
    // A mapping to a column the log does not have is refused by name.
    let plan = d.write(
        "p.toml",
        "[columns]\nbx = \"MAG_X\"\nby = \"MAG_Y\"\nbz = \"MAG_W\"\n",
    );
    let r = d.run(&[
        "inspect",
        p.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
    ]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["\"MAG_W\"", "no such column"]);
    // An unknown quantity in [columns] is refused by key.
    let plan = d.write("q.toml", "[columns]\nbw = \"MAG_X\"\n");
    let r = d.run(&[
        "inspect",
        p.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
    ]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["columns.bw"]);
}
