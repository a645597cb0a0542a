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
