//! Bad and unusual inputs to the log and plan readers (formats: `docs/formats.md`), driven
//! through `magproof inspect`. Each refusal must exit 2 and name the line and column.

use crate::util::{assert_code, assert_stderr_has, json_stdout, stderr, stdout, TestDir};

const GOOD: &str = "t,bx,by,bz\n0,1,2,3\n1,4,5,6\n";

fn inspect(dir: &TestDir, name: &str, text: &str) -> std::process::Output {
    let p = dir.write(name, text);
    dir.run(&["inspect", p.to_str().unwrap()])
}

#[test]
fn good_log_is_read() {
    let d = TestDir::new();
    let r = inspect(&d, "ok.csv", GOOD);
    assert_code(&r, 0);
    assert!(stdout(&r).contains("2 rows"), "{}", stdout(&r));
}

#[test]
fn empty_file_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "empty.csv", "");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["empty.csv", "no header"]);
}

#[test]
fn only_comments_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "c.csv", "# a comment\n\n   \n# another\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["c.csv", "no header"]);
}

#[test]
fn header_only_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "h.csv", "# log\nt,bx,by,bz\n# nothing else\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["h.csv:2", "not followed by any data row"]);
}

#[test]
fn incomplete_field_triple_names_the_columns() {
    let d = TestDir::new();
    let r = inspect(&d, "m.csv", "t,bx,by\n0,1,2\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["m.csv:1", "bx, by, bz"]);
}

#[test]
fn unknown_unit_names_line_and_column() {
    let d = TestDir::new();
    let r = inspect(&d, "u.csv", "# x\nt,bx [Oe],by,bz\n0,1,2,3\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["u.csv:2", "bx [Oe]", "unknown field unit"]);
}

#[test]
fn text_cell_at_line_7_column_by_is_named() {
    // A text cell at line 7, column `by`.
    let d = TestDir::new();
    let text = "# sweep\nt,bx,by,bz\n0,1,2,3\n\n# pause\n1,1,2,3\n2,1,abc,3\n3,1,2,3\n";
    let r = inspect(&d, "t.csv", text);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["t.csv:7", "column \"by\"", "\"abc\""]);
}

#[test]
fn nan_cell_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "n.csv", "t,bx,by,bz\n0,1,2,3\n1,NaN,2,3\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["n.csv:3", "column \"bx\"", "finite", "NaN"]);
}

#[test]
fn inf_cell_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "i.csv", "t,bx,by,bz\n0,1,2,3\n1,1,-inf,3\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["i.csv:3", "column \"by\"", "finite"]);
}

#[test]
fn short_row_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "s.csv", "t,bx,by,bz\n0,1,2,3\n1,1,2\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["s.csv:3", "3 fields", "header has 4"]);
}

#[test]
fn long_row_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "l.csv", "t,bx,by,bz\n0,1,2,3,4\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["l.csv:2", "5 fields"]);
}

#[test]
fn duplicated_column_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "d.csv", "t,bx,by,bz,BX [uT]\n0,1,2,3,4\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["d.csv:1", "BX [uT]", "duplicated"]);
}

#[test]
fn random_bytes_are_refused_without_panic() {
    let d = TestDir::new();
    // Deterministic pseudo-random bytes (xorshift), including NUL and invalid UTF-8.
    let mut x: u32 = 0x9E37_79B9;
    let bytes: Vec<u8> = (0..4096)
        .map(|_| {
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            (x & 0xFF) as u8
        })
        .collect();
    let p = d.write("r.bin", &bytes);
    let r = d.run(&["inspect", p.to_str().unwrap()]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["r.bin"]);
    assert!(!stderr(&r).contains("panicked"), "{}", stderr(&r));
}

#[test]
fn bom_and_crlf_are_accepted() {
    let d = TestDir::new();
    let p = d.write(
        "w.csv",
        b"\xEF\xBB\xBFt;bx [mG];by [mG];bz [mG]\r\n0;1;0;0\r\n1;0;2;0\r\n",
    );
    let r = d.run(&["inspect", p.to_str().unwrap(), "--json"]);
    assert_code(&r, 0);
    let v = json_stdout(&r);
    assert_eq!(v["rows"], 2);
    // 1 mG = 100 nT exactly (1 G = 1e-4 T, CGS definition).
    assert_eq!(v["field_magnitude_nt"][0].as_f64(), Some(100.0));
    assert_eq!(v["field_magnitude_nt"][2].as_f64(), Some(200.0));
}

#[test]
fn gauss_and_microtesla_convert_exactly() {
    let d = TestDir::new();
    let r = inspect(&d, "g.csv", "bx [G],by [G],bz [G]\n1,0,0\n");
    let p = d.join("g.csv");
    let r2 = d.run(&["inspect", p.to_str().unwrap(), "--json"]);
    assert_code(&r, 0);
    assert_eq!(
        json_stdout(&r2)["field_magnitude_nt"][0].as_f64(),
        Some(100_000.0)
    );
    let p = d.write("u.csv", "bx [µT]\tby [µT]\tbz [µT]\n1\t0\t0\n");
    let r3 = d.run(&["inspect", p.to_str().unwrap(), "--json"]);
    assert_code(&r3, 0);
    assert_eq!(
        json_stdout(&r3)["field_magnitude_nt"][0].as_f64(),
        Some(1000.0)
    );
}

#[test]
fn time_going_backwards_is_refused() {
    let d = TestDir::new();
    let r = inspect(&d, "b.csv", "t,bx,by,bz\n0,1,2,3\n2,1,2,3\n1,1,2,3\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["b.csv:4", "backwards"]);
}

#[test]
fn iso_timestamps_give_seconds() {
    let d = TestDir::new();
    let p = d.write(
        "iso.csv",
        "t,bx,by,bz\n2026-11-20T09:30:00Z,1,2,3\n2026-11-20T09:30:01.5Z,1,2,3\n",
    );
    let r = d.run(&["inspect", p.to_str().unwrap(), "--json"]);
    assert_code(&r, 0);
    assert_eq!(json_stdout(&r)["time_span_s"].as_f64(), Some(1.5));
}

#[test]
fn skip_bad_rows_counts_and_names_them() {
    let d = TestDir::new();
    let p = d.write("k.csv", "t,bx,by,bz\n0,1,2,3\n1,x,2,3\n2,1,2\n3,1,2,3\n");
    let r = d.run(&["inspect", p.to_str().unwrap(), "--skip-bad-rows", "--json"]);
    assert_code(&r, 0);
    let v = json_stdout(&r);
    assert_eq!(v["rows"], 2);
    assert_eq!(v["rows_skipped"], 2);
    assert_eq!(v["skipped"][0]["line"], 3);
    assert_eq!(v["skipped"][1]["line"], 4);
}

#[test]
fn unknown_columns_are_listed_once() {
    let d = TestDir::new();
    let p = d.write("x.csv", "t,bx,by,bz,rssi,Vbat [V]\n0,1,2,3,4,5\n");
    let r = d.run(&["inspect", p.to_str().unwrap(), "--json"]);
    assert_code(&r, 0);
    assert_eq!(
        json_stdout(&r)["ignored_columns"],
        serde_json::json!(["rssi", "Vbat [V]"])
    );
}

#[test]
fn missing_file_is_a_clear_error() {
    let d = TestDir::new();
    let r = d.run(&["inspect", "nope.csv"]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["nope.csv"]);
}

fn inspect_with_plan(d: &TestDir, plan: &str) -> std::process::Output {
    let log = d.write("ok.csv", GOOD);
    let p = d.write("plan.toml", plan);
    d.run(&[
        "inspect",
        log.to_str().unwrap(),
        "--plan",
        p.to_str().unwrap(),
    ])
}

#[test]
fn reflection_in_plan_is_refused_by_key() {
    let d = TestDir::new();
    let r = inspect_with_plan(
        &d,
        "[magnetometer]\nsensor_to_body = [\"+x\", \"+y\", \"-z\"]\n",
    );
    assert_code(&r, 2);
    assert_stderr_has(
        &r,
        &["plan.toml", "magnetometer.sensor_to_body", "determinant"],
    );
}

#[test]
fn plan_typo_is_refused_by_name_and_line() {
    let d = TestDir::new();
    let r = inspect_with_plan(
        &d,
        "[article]\nserial = \"QX-7\"\nbuild = \"B1\"\n\n[limits]\nresidual_dipole_max_amp2 = 0.01\n",
    );
    assert_code(&r, 2);
    assert_stderr_has(&r, &["plan.toml", "residual_dipole_max_amp2", "line 6"]);
}

#[test]
fn toml_syntax_error_names_its_line() {
    let d = TestDir::new();
    let r = inspect_with_plan(&d, "[article]\nserial = \"QX-7\"\nbuild = B1\n");
    assert_code(&r, 2);
    assert_stderr_has(&r, &["plan.toml", "line 3"]);
}

#[test]
fn plan_unit_applies_to_unitless_columns_and_flag_beats_it() {
    let d = TestDir::new();
    let log = d.write("p.csv", "bx,by,bz\n1,0,0\n");
    let plan = d.write("plan.toml", "[magnetometer]\nunit = \"uT\"\n");
    let args = [
        "inspect",
        log.to_str().unwrap(),
        "--plan",
        plan.to_str().unwrap(),
        "--json",
    ];
    let r = d.run(&args);
    assert_code(&r, 0);
    assert_eq!(
        json_stdout(&r)["field_magnitude_nt"][0].as_f64(),
        Some(1000.0)
    );
    let mut with_flag = args.to_vec();
    with_flag.extend(["--unit", "G"]);
    let r = d.run(&with_flag);
    assert_eq!(
        json_stdout(&r)["field_magnitude_nt"][0].as_f64(),
        Some(100_000.0)
    );
}
