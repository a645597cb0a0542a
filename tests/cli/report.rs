//! `--report DIR` on calibrate, polarity and dipole: the folder's contents, result.json
//! equal to the `--json` object, escaping of plan strings, refusal to overwrite, and a
//! headless-Chromium rendering that is not blank.

use std::path::{Path, PathBuf};

use magproof::sim::dipole::{simulate_turntable, TurntableConfig};
use magproof::sim::polarity::{simulate_polarity, PolarityConfig};

use crate::util::{data, json_stdout, png_ink, screenshot, stderr, TestDir};

const CAL_PLAN: &str = "[article]\nserial = \"QX-7\"\nbuild = \"B2\"\n\n[limits]\ncalibration_residual_max_nt = 250.0\n";

fn svgs(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".svg"))
        .collect();
    v.sort();
    v
}

/// Run `args --report rep` and `args --json`; check the folder and return its path.
fn report_and_json(dir: &TestDir, args: &[&str], expect_svgs: &[&str]) -> PathBuf {
    let rep = dir.join("rep");
    let out = dir
        .magproof()
        .args(args)
        .arg("--report")
        .arg(&rep)
        .output()
        .unwrap();
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
    assert!(
        stderr(&out).contains("report written to"),
        "{}",
        stderr(&out)
    );
    let html = std::fs::read_to_string(rep.join("report.html")).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>"));
    assert!(html.contains("pacemakers") && html.contains("SHA-256"));
    let names = svgs(&rep);
    for n in expect_svgs {
        assert!(names.iter().any(|x| x == n), "missing {n} in {names:?}");
    }
    for n in &names {
        let svg = std::fs::read_to_string(rep.join(n)).unwrap();
        assert!(svg.contains("<svg") && svg.len() < 1_000_000, "{n}");
    }
    let saved: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(rep.join("result.json")).unwrap()).unwrap();
    let json = dir.magproof().args(args).arg("--json").output().unwrap();
    assert_eq!(saved, json_stdout(&json));
    rep
}

#[test]
fn calibrate_report_has_page_json_and_every_plot() {
    let dir = TestDir::new();
    let plan = dir.write("plan.toml", CAL_PLAN);
    let log = data("calib_tumble.csv");
    let (log, plan) = (log.to_str().unwrap(), plan.to_str().unwrap());
    let rep = report_and_json(
        &dir,
        &["calibrate", log, "--plan", plan],
        &[
            "calibration-raw-xy.svg",
            "calibration-xy.svg",
            "calibration-raw-yz.svg",
            "calibration-yz.svg",
            "calibration-raw-zx.svg",
            "calibration-zx.svg",
            "calibration-residual-histogram.svg",
            "calibration-residual-time.svg",
            "calibration-coverage.svg",
        ],
    );
    let html = std::fs::read_to_string(rep.join("report.html")).unwrap();
    assert!(html.contains("serial QX-7 · build B2"));
    assert!(html.contains("cannot see misalignment"));
    let png = dir.join("calibrate.png");
    if screenshot(&rep.join("report.html"), &png, (1280, 2400)) {
        let (ink, colours) = png_ink(&png);
        assert!(ink > 0.05, "page looks blank: ink {ink}");
        assert!(colours >= 8, "too few colours: {colours}");
    }
}

#[test]
fn polarity_report_escapes_plan_strings_and_refuses_to_overwrite() {
    let dir = TestDir::new();
    let sim = simulate_polarity(&PolarityConfig::default(), 5).unwrap();
    let [csv, plan, _] = sim.write(dir.path(), "pulses").unwrap();
    let text = std::fs::read_to_string(&plan).unwrap().replace(
        "serial = \"SIM-ROD-1\"",
        "serial = \"<script>alert('x')</script>\"",
    );
    assert!(text.contains("<script>"));
    std::fs::write(&plan, text).unwrap();
    let (csv, plan) = (csv.to_str().unwrap(), plan.to_str().unwrap());
    let rep = report_and_json(
        &dir,
        &["polarity", csv, "--plan", plan],
        &["polarity-rod-x.svg"],
    );
    let html = std::fs::read_to_string(rep.join("report.html")).unwrap();
    assert!(!html.contains("<script"), "unescaped plan string");
    assert!(html.contains("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;"));
    assert!(html.contains(">PASS</span>"));

    // Onto the existing folder without --force: exit 2, nothing touched.
    let before = std::fs::read(rep.join("report.html")).unwrap();
    std::fs::write(rep.join("mine.txt"), "keep").unwrap();
    let out = dir
        .magproof()
        .args(["polarity", csv, "--plan", plan, "--report"])
        .arg(&rep)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(stderr(&out).contains("--force"), "{}", stderr(&out));
    assert_eq!(std::fs::read(rep.join("report.html")).unwrap(), before);
    assert_eq!(
        std::fs::read_to_string(rep.join("mine.txt")).unwrap(),
        "keep"
    );
    // With --force it is replaced.
    let out = dir
        .magproof()
        .args(["polarity", csv, "--plan", plan, "--force", "--report"])
        .arg(&rep)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert!(!rep.join("mine.txt").exists());
}

#[test]
fn dipole_report_has_one_plot_per_mount() {
    let dir = TestDir::new();
    let sim = simulate_turntable(&TurntableConfig::default(), 105).unwrap();
    let files = sim.write_to(dir.path()).unwrap();
    let (log, plan) = (files.log.to_str().unwrap(), files.plan.to_str().unwrap());
    let rep = report_and_json(
        &dir,
        &["dipole", log, "--plan", plan],
        &["dipole-mount-1.svg"],
    );
    let html = std::fs::read_to_string(rep.join("report.html")).unwrap();
    assert!(html.contains("Residual magnetic dipole"));
    assert!(html.contains("A·m²"));
}
