//! Reliability battery, input faults: a stuck sensor axis, inputs that once panicked, and
//! plan strings that reach the terminal or a file (docs/reliability.md, "Battery").
//! Common practice: each case drives the binary and checks its exit code and message.

use crate::battery_outputs::sample;
use crate::util::{assert_code, stderr, stdout, TestDir};

/// `csv` with every data row's `column` replaced by `value` (comment lines kept).
fn with_column(csv: &str, column: &str, value: &str) -> String {
    let mut out = String::new();
    let mut index = None;
    for line in csv.lines() {
        if line.starts_with('#') || line.trim().is_empty() {
            out += line;
        } else if index.is_none() {
            index = line.split(',').position(|c| c.trim().starts_with(column));
            out += line;
        } else {
            let i = index.expect("the column is in the header");
            let cells: Vec<&str> = line
                .split(',')
                .enumerate()
                .map(|(k, c)| if k == i { value } else { c })
                .collect();
            out += &cells.join(",");
        }
        out.push('\n');
    }
    out
}

#[test]
fn a_stuck_axis_is_refused_in_dipole_and_polarity() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    for (log, args) in [
        ("turntable.csv", ["dipole", "--plan", plan, "stuck.csv"]),
        ("rod-pulses.csv", ["polarity", "--plan", plan, "stuck.csv"]),
    ] {
        let text = std::fs::read_to_string(d.join(log)).unwrap();
        d.write("stuck.csv", with_column(&text, "bz", "-41000.000"));
        let out = d.magproof().args(args).output().unwrap();
        assert_code(&out, 2);
        let err = stderr(&out);
        assert!(
            err.contains("stuck.csv") && err.contains("sensor z") && err.contains("stuck"),
            "{log}: {err}"
        );
        assert!(stdout(&out).is_empty(), "{log}: a verdict was printed");
    }
}

#[test]
fn inputs_that_once_panicked_are_refused_with_a_reason() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let out = d
        .magproof()
        .args(["polarity", "--plan", plan, "rod-pulses.csv", "--drift"])
        .arg("knots:1e-300")
        .output()
        .unwrap();
    assert_code(&out, 2);
    assert!(
        stderr(&out).contains("drift model needs"),
        "{}",
        stderr(&out)
    );
    // A file without line ends: refused at the line limit, not read until memory ends.
    if std::path::Path::new("/dev/zero").exists() {
        let out = d.run(&["inspect", "/dev/zero"]);
        assert_code(&out, 2);
        assert!(
            stderr(&out).contains("longer than 16 MiB"),
            "{}",
            stderr(&out)
        );
    }
}

#[test]
fn a_full_standard_output_is_an_error_not_a_panic() {
    let Ok(full) = std::fs::OpenOptions::new().write(true).open("/dev/full") else {
        eprintln!("skipping: no /dev/full here");
        return;
    };
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_magproof"))
        .current_dir(d.path())
        .env_remove("MAGPROOF_LEDGER")
        .args(["closeout", plan, "--ledger", "l.db"])
        .stdout(full)
        .output()
        .unwrap();
    assert_code(&out, 2);
    let err = stderr(&out);
    assert!(
        !err.contains("panicked") && err.contains("standard output"),
        "{err}"
    );
}

#[test]
fn control_characters_in_plan_and_log_text_are_refused() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let text = std::fs::read_to_string(d.join(plan)).unwrap();
    d.write(
        "bad-serial.toml",
        text.replace(
            "serial = \"TMR-0207\"",
            "serial = \"TMR\\u001b]0;owned\\u0007\"",
        ),
    );
    let out = d.run(&["closeout", "bad-serial.toml", "--ledger", "l.db"]);
    assert_code(&out, 2);
    let err = stderr(&out);
    assert!(
        err.contains("article.serial") && !err.contains('\u{1b}'),
        "{err:?}"
    );
    assert!(!d.join("l.db").exists());
    let log = std::fs::read_to_string(d.join("turntable.csv")).unwrap();
    d.write(
        "bad-mount.csv",
        log.replacen(",upright", ",up\u{7}right", 1),
    );
    let out = d.run(&["dipole", "--plan", plan, "bad-mount.csv"]);
    assert_code(&out, 2);
    let err = stderr(&out);
    assert!(
        err.contains("bad-mount.csv:") && err.contains("control"),
        "{err:?}"
    );
}

#[test]
fn history_shows_control_characters_of_an_old_ledger_escaped() {
    use magproof::ledger::{InputFile, InputRole, Ledger, NewRun};
    let d = TestDir::new();
    let mut ledger = Ledger::open(&d.join("l.db")).unwrap();
    let run = NewRun {
        serial: "SN\u{1b}]0;title\u{7}".into(),
        build: "B1\nforged line".into(),
        kind: magproof::check::CheckKind::parse("dipole").unwrap(),
        inputs: vec![InputFile {
            role: InputRole::Log,
            path: "l.csv".into(),
            sha256: "a".repeat(64),
        }],
        result: serde_json::json!({"pass": true}),
        quantities: vec![],
        options: serde_json::json!({}),
        sensor: None,
    };
    ledger.record_runs(&[run]).unwrap();
    drop(ledger);
    let out = d.run(&["history", "--ledger", "l.db"]);
    assert_code(&out, 0);
    let text = stdout(&out);
    assert!(
        !text.contains('\u{1b}') && !text.contains('\u{7}'),
        "{text:?}"
    );
    assert!(
        !text.lines().any(|l| l.starts_with("forged line")),
        "{text}"
    );
    assert!(text.contains("\\u{1b}"), "{text}");
}

#[test]
fn two_rods_with_one_c_name_are_refused_before_recording() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let text = std::fs::read_to_string(d.join(plan)).unwrap();
    d.write(
        plan,
        text.replace("name = \"x\"", "name = \"x-1\"")
            .replace("name = \"y\"", "name = \"x_1\""),
    );
    let log = std::fs::read_to_string(d.join("rod-pulses.csv")).unwrap();
    d.write(
        "rod-pulses.csv",
        log.replace(",cmd_x,cmd_y,", ",cmd_x-1,cmd_x_1,"),
    );
    let args = ["polarity", "--plan", plan, "rod-pulses.csv", "--record"];
    let out = d
        .magproof()
        .args(args)
        .args(["--ledger", "l.db", "--params-out", "rods.h"])
        .output()
        .unwrap();
    assert_code(&out, 2);
    let err = stderr(&out);
    assert!(err.contains("\"x-1\"") && err.contains("\"x_1\""), "{err}");
    assert!(!d.join("l.db").exists() && !d.join("rods.h").exists());
    // The JSON goes with the header: neither is written.
    assert!(!d.join("rods.json").exists());
}

#[test]
fn smaller_faults_get_the_right_diagnosis() {
    use std::os::unix::fs::PermissionsExt;
    use std::os::unix::process::CommandExt;
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let text = std::fs::read_to_string(d.join(plan)).unwrap();
    d.write(
        "far.toml",
        text.replacen(
            "position_m = [0, 0.035, 0.03]",
            "position_m = [1e300, 0, 0]",
            1,
        ),
    );
    let out = d.run(&["polarity", "--plan", "far.toml", "rod-pulses.csv"]);
    assert_code(&out, 2);
    assert!(
        stderr(&out).contains("positions are in metres"),
        "{}",
        stderr(&out)
    );
    let out = d.run(&["calibrate", "tumble.csv", "--reference-nt", "1e308"]);
    assert_code(&out, 2);
    assert!(stderr(&out).contains("at most"), "{}", stderr(&out));
    // Lines ended by a bare CR: said so, not "no header line".
    let log = std::fs::read_to_string(d.join("tumble.csv")).unwrap();
    d.write("cr.csv", log.replace('\n', "\r"));
    let out = d.run(&["calibrate", "cr.csv"]);
    assert_code(&out, 2);
    assert!(
        stderr(&out).contains("bare carriage return"),
        "{}",
        stderr(&out)
    );
    // A cause is printed once.
    let out = d.run(&["inspect", "no-such.csv"]);
    assert_code(&out, 2);
    let err = stderr(&out);
    assert_eq!(err.matches("No such file").count(), 1, "{err}");
    // history --out onto the ledger it reads.
    let out = d.run(&["closeout", plan, "--ledger", "l.db"]);
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
    let bytes = std::fs::read(d.join("l.db")).unwrap();
    let out = d.run(&[
        "history", "--ledger", "l.db", "--export", "csv", "--out", "l.db", "--force",
    ]);
    assert_code(&out, 2);
    assert_eq!(std::fs::read(d.join("l.db")).unwrap(), bytes);
    // Outputs get the umask's permissions, not 0600.
    let mut cmd = std::process::Command::new(env!("CARGO_BIN_EXE_magproof"));
    cmd.current_dir(d.path())
        .args(["polarity", "--plan", plan, "rod-pulses.csv"])
        .args(["--params-out", "p.json", "--report", "rep"]);
    // SAFETY: umask only sets the child's file-mode mask between fork and exec.
    unsafe {
        cmd.pre_exec(|| {
            libc::umask(0o022);
            Ok(())
        });
    }
    let out = cmd.output().unwrap();
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
    let mode = |p: &str| std::fs::metadata(d.join(p)).unwrap().permissions().mode() & 0o777;
    assert_eq!(mode("p.json"), 0o644);
    assert_eq!(mode("rep"), 0o755);
    assert_eq!(mode("rep/report.html"), 0o644);
}
