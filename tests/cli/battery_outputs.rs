//! Reliability battery, destructive flags and recording order: `--force` never deletes a
//! folder magproof did not write, and every output is checked before anything is
//! recorded (docs/reliability.md, "Battery"). Common practice: each case drives the
//! binary on the committed sample logs and checks files on disk afterwards.

use std::path::Path;

use crate::util::{assert_code, stderr, TestDir};

/// Copy the sample logs and plan of one demo build into the test folder, return the
/// plan's file name.
pub fn sample(d: &TestDir, build: &str) -> &'static str {
    let src = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-logs")
        .join(format!("tmr-0207-{build}"));
    for name in [
        "plan.toml",
        "rod-pulses.csv",
        "tumble.csv",
        "turntable.csv",
        "loop.csv",
    ] {
        d.write(name, std::fs::read(src.join(name)).unwrap());
    }
    // The plan's align step reads the build's turntable run in align/ (B1: the repeat).
    for name in ["align/align.csv", "align/align-retest.csv"] {
        if let Ok(bytes) = std::fs::read(src.join(name)) {
            d.write(name, bytes);
        }
    }
    "plan.toml"
}

/// Every file name directly in `dir`, sorted.
pub fn names(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn report_force_never_replaces_a_folder_magproof_did_not_write() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let before = names(d.path());
    let polarity = ["polarity", "--plan", plan, "rod-pulses.csv"];
    // The working folder itself, holding the user's logs and plan.
    let out = d
        .magproof()
        .args(polarity)
        .args(["--report", ".", "--force", "--record", "--ledger", "l.db"])
        .output()
        .unwrap();
    assert_code(&out, 2);
    assert!(stderr(&out).contains("report folder ."), "{}", stderr(&out));
    assert_eq!(names(d.path()), before, "the user's folder changed");
    // A folder of the user's, not the working one.
    d.write("mine/notes.txt", "keep me\n");
    let out = d
        .magproof()
        .args(polarity)
        .args([
            "--report", "mine", "--force", "--record", "--ledger", "l.db",
        ])
        .output()
        .unwrap();
    assert_code(&out, 2);
    let err = stderr(&out);
    assert!(
        err.contains("mine") && err.contains("not written by magproof"),
        "{err}"
    );
    assert!(!err.contains("add --force"), "--force was given: {err}");
    assert_eq!(
        std::fs::read_to_string(d.join("mine/notes.txt")).unwrap(),
        "keep me\n"
    );
    assert!(!d.join("l.db").exists(), "recorded before refusing");
    // An empty folder, then a report folder magproof wrote, may be replaced.
    std::fs::create_dir(d.join("rep")).unwrap();
    for _ in 0..2 {
        let out = d
            .magproof()
            .args(polarity)
            .args(["--report", "rep", "--force"])
            .output()
            .unwrap();
        assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
        assert!(d.join("rep/report.html").is_file());
        assert!(d.join("rep/.magproof-report").is_file());
    }
    // No staging or set-aside folder is left beside it.
    let stray: Vec<_> = names(d.path())
        .into_iter()
        .filter(|n| n.starts_with(".magproof"))
        .collect();
    assert!(stray.is_empty(), "{stray:?}");
}

#[test]
fn an_output_that_cannot_be_written_is_refused_before_recording() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    d.write("afile", "not a folder\n");
    let polarity = ["polarity", "--plan", plan, "rod-pulses.csv", "--record"];
    for extra in [
        ["--report", "afile/sub/rep"],
        ["--params-out", "afile/sub/p.json"],
        ["--report", "afile"],
    ] {
        let out = d
            .magproof()
            .args(polarity)
            .args(["--ledger", "l.db"])
            .args(extra)
            .output()
            .unwrap();
        assert_code(&out, 2);
        assert!(
            stderr(&out).contains("afile"),
            "{extra:?}: {}",
            stderr(&out)
        );
        assert!(
            !d.join("l.db").exists(),
            "{extra:?}: recorded before refusing"
        );
    }
    assert_eq!(
        std::fs::read_to_string(d.join("afile")).unwrap(),
        "not a folder\n"
    );
}

#[test]
fn a_long_rod_name_still_gives_a_report_and_one_record() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let long = "r".repeat(300);
    let text = std::fs::read_to_string(d.join(plan)).unwrap();
    d.write(
        plan,
        text.replace("name = \"x\"", &format!("name = \"{long}\"")),
    );
    let log = std::fs::read_to_string(d.join("rod-pulses.csv")).unwrap();
    d.write(
        "rod-pulses.csv",
        log.replace(",cmd_x,", &format!(",cmd_{long},")),
    );
    let out = d
        .magproof()
        .args(["polarity", "--plan", plan, "rod-pulses.csv", "--record"])
        .args(["--ledger", "l.db", "--report", "rep"])
        .output()
        .unwrap();
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
    let svgs: Vec<String> = names(&d.join("rep"))
        .into_iter()
        .filter(|n| n.ends_with(".svg"))
        .collect();
    assert!(!svgs.is_empty());
    assert!(svgs.iter().all(|n| n.len() <= 100), "{svgs:?}");
    assert!(
        stderr(&out).contains("recorded as run #1"),
        "{}",
        stderr(&out)
    );
}
