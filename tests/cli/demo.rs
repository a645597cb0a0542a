//! `magproof demo`: the bundled scenario runs from an empty folder and tells its story —
//! B1's y rod reversed, B2 passing, B3's dipole jump flagged by history — and exits 0.

use super::util::{assert_code, assert_stderr_has, json_stdout, stdout, TestDir};
use serde_json::Value;

fn json_file(path: &std::path::Path) -> Value {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn step<'a>(closeout: &'a Value, kind: &str) -> &'a Value {
    closeout["steps"]
        .as_array()
        .expect("steps")
        .iter()
        .find(|s| s["kind"] == kind)
        .unwrap_or_else(|| panic!("no {kind} step in {closeout}"))
}

#[test]
fn demo_tells_the_three_build_story_and_exits_0() {
    let d = TestDir::new();
    let run = d.run(&["demo"]);
    assert_code(&run, 0);
    // Default output: one new magproof-demo-<time> folder in the current one.
    let made: Vec<_> = std::fs::read_dir(d.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with("magproof-demo-"))
        .collect();
    assert_eq!(made.len(), 1, "expected one demo folder, found {made:?}");
    let out = d.join(&made[0]);
    let reports = out.join("reports");

    // B1: the polarity step fails on rod y, reversed; the others pass.
    let b1 = json_file(&reports.join("tmr-0207-b1/closeout.json"));
    assert_eq!(b1["pass"], false);
    let pol = step(&b1, "polarity");
    assert_eq!(pol["pass"], false);
    let rods = pol["result"]["rods"].as_array().expect("rods");
    let verdicts: Vec<(&str, &str)> = rods
        .iter()
        .map(|r| (r["name"].as_str().unwrap(), r["verdict"].as_str().unwrap()))
        .collect();
    assert_eq!(verdicts, [("x", "ok"), ("y", "reversed"), ("z", "ok")]);
    assert_eq!(step(&b1, "calibrate")["pass"], true);
    assert_eq!(step(&b1, "dipole")["pass"], true);

    // B2: everything passes.
    let b2 = json_file(&reports.join("tmr-0207-b2/closeout.json"));
    assert_eq!(b2["pass"], true);

    // Each build has its HTML report (with result.json equal to closeout.json), and the
    // history has one too.
    for b in ["tmr-0207-b1", "tmr-0207-b2", "tmr-0207-b3", "history"] {
        assert!(
            reports.join(b).join("report.html").is_file(),
            "{b}: no report.html"
        );
    }
    assert_eq!(json_file(&reports.join("tmr-0207-b1/result.json")), b1);

    // B3: the dipole jump is flagged significant by history, against B2.
    let hist = d.run(&[
        "history",
        "--ledger",
        out.join("ledger.db").to_str().unwrap(),
        "--json",
    ]);
    assert_code(&hist, 0);
    let changes = json_stdout(&hist)["changes"]
        .as_array()
        .expect("changes")
        .clone();
    let flag = |q: &str, from: &str, to: &str| -> String {
        changes
            .iter()
            .find(|c| c["quantity"] == q && c["from_build"] == from && c["to_build"] == to)
            .unwrap_or_else(|| panic!("no change {q} {from}→{to}"))["flag"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert_eq!(flag("dipole_magnitude_am2", "B2", "B3"), "significant");
    assert_eq!(flag("dipole_magnitude_am2", "B1", "B2"), "within-noise");

    // Flight parameters for the passing builds only, where the demo says.
    let fp = out.join("flight-params");
    assert!(!fp.join("tmr-0207-b1").exists());
    for b in ["tmr-0207-b2", "tmr-0207-b3"] {
        let j = json_file(&fp.join(b).join("magproof-flight.json"));
        assert_eq!(j["verdict_passed"], true, "{b}");
        assert!(fp.join(b).join("magproof-flight.h").is_file(), "{b}");
    }
    // On orbit after B3: the solar-current bias and the planted hard-iron change
    // (35, 310, −20) nT against B3's ground calibration, recovered and flagged.
    let orbit = json_file(&reports.join("tmr-0207-orbit/result.json"));
    assert_eq!(orbit["verdict"], "pass");
    let g = &orbit["ground"];
    assert_eq!(g["build"], "B3");
    assert_eq!(g["flag"], true);
    for (a, planted) in [35.0, 310.0, -20.0].iter().enumerate() {
        let d = g["hard_iron_delta_nt"][a].as_f64().unwrap();
        let s = g["sigma_nt"][a].as_f64().unwrap();
        assert!(
            (d - planted).abs() < 3.0 * s + 5.0,
            "axis {a}: {d} ± {s} against {planted}"
        );
    }
    let k = &orbit["regressors"][0];
    assert_eq!(k["name"], "i_solar");
    for (a, truth) in [-160.0, 240.0, 95.0].iter().enumerate() {
        let v = k["bias_nt_per_unit"][a].as_f64().unwrap();
        assert!(
            (v - truth).abs() < 3.0 * k["sigma"][a].as_f64().unwrap(),
            "{v} vs {truth}"
        );
    }

    // What the user sees: the summary, the flagged change and where things are.
    for part in [
        "TMR-0207 B1: FAIL",
        "y reversed",
        "TMR-0207 B2: PASS",
        "TMR-0207 B3: PASS",
        "TMR-0207 orbit: PASS",
        "vs ground B3",
        "significant !",
        "closeout report",
        "ledger.db",
        "flight parameters       none for tmr-0207-b1: its verdict did not pass",
        "flight-params/tmr-0207-b3/magproof-flight.h",
    ] {
        assert!(
            stdout(&run).contains(part),
            "stdout lacks {part:?}:\n{}",
            stdout(&run)
        );
    }
}

#[test]
fn demo_refuses_an_occupied_folder_without_force() {
    let d = TestDir::new();
    d.write("busy/keep.txt", "mine");
    let run = d.run(&["demo", "--out", "busy"]);
    assert_code(&run, 2);
    assert_stderr_has(&run, &["not empty", "--force"]);
    assert_eq!(
        std::fs::read_to_string(d.join("busy/keep.txt")).unwrap(),
        "mine"
    );
}

#[test]
fn demo_benches_the_rod_batch_and_fails_the_rod_with_high_remanence() {
    let d = TestDir::new();
    let run = d.run(&["demo", "--out", "demo"]);
    assert_code(&run, 0);
    let reports = d.join("demo/reports/rods");
    for (rod, pass) in [("tmr-tr-x", true), ("tmr-tr-y", false), ("tmr-tr-z", true)] {
        let c = json_file(&reports.join(rod).join("closeout.json"));
        assert_eq!(c["pass"], pass, "{rod}");
        let r = step(&c, "rod");
        assert_eq!(r["result"]["polarity"], "ok", "{rod}");
        let failed: Vec<&str> = r["result"]["gates"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|g| g["ok"] == false)
            .map(|g| g["name"].as_str().unwrap())
            .collect();
        let want: &[&str] = if pass { &[] } else { &["remanence_max"] };
        assert_eq!(failed, want, "{rod}");
    }
    let text = stdout(&run);
    assert!(text.contains("TMR-TR-Y R-2602: FAIL"), "{text}");
}

#[test]
fn demo_align_names_b1s_reversed_magnetometer_axis_and_recovers_the_planted_misalignment() {
    let d = TestDir::new();
    let run = d.run(&["demo", "--out", "demo"]);
    assert_code(&run, 0);
    let reports = d.join("demo/reports");
    // Planted in the scenario (src/sim/scenario_align.rs): the magnetometer turned by
    // (0.4, −0.3, 0.6)° and the gyro by (0.2, 0.3, −0.25)° (rotation vectors, body
    // frame), the same in every build; in B1 sensor x (along body +y) is reversed.
    let mag_truth = [0.4, -0.3, 0.6];
    let gyro_truth = [0.2, 0.3, -0.25];
    // B1's first run has its own closeout (reports/tmr-0207-b1-align); every build's
    // closeout lists its align step first (B1's is the repeat after the harness fix).
    for (folder, pass) in [
        ("tmr-0207-b1-align", false),
        ("tmr-0207-b1", true),
        ("tmr-0207-b2", true),
        ("tmr-0207-b3", true),
    ] {
        let b = folder;
        let c = json_file(&reports.join(format!("{folder}/closeout.json")));
        let r = &step(&c, "align")["result"];
        assert_eq!(r["verdict"], if pass { "pass" } else { "fail" }, "{b}");
        let words = |axes: &Value| -> Vec<String> {
            axes.as_array()
                .expect("axes")
                .iter()
                .map(|a| a["verdict"].as_str().unwrap().to_string())
                .collect()
        };
        let mag_want = if pass {
            ["ok", "ok", "ok"]
        } else {
            ["ok", "flipped", "ok"]
        };
        assert_eq!(words(&r["axes"]), mag_want, "{b}");
        assert_eq!(
            r["handedness"],
            if pass { "right" } else { "mirrored" },
            "{b}"
        );
        assert_eq!(words(&r["gyro"]["axes"]), ["ok", "ok", "ok"], "{b}");
        // A reversed axis is named, never counted as a large misalignment: the
        // remaining rotation is the planted one, within 3σ on each component.
        for (key, truth) in [
            (
                &r["misalignment_deg"],
                &r["misalignment_sigma_deg"],
                mag_truth,
            ),
            (
                &r["gyro"]["misalignment_deg"],
                &r["gyro"]["misalignment_sigma_deg"],
                gyro_truth,
            ),
        ]
        .map(|(v, s, t)| ((v, s), t))
        {
            for i in 0..3 {
                let v = key.0[i].as_f64().unwrap();
                let s = key.1[i].as_f64().unwrap();
                assert!(
                    (v - truth[i]).abs() < 3.0 * s,
                    "{b} axis {i}: {v} ± {s} vs {truth:?}"
                );
            }
        }
    }
    // With the align step in the build plans, B2's and B3's sign chains are complete;
    // B1's is broken on body y, where the reversed rod and the reversed law cancel.
    for (folder, complete) in [
        ("tmr-0207-b1", false),
        ("tmr-0207-b2", true),
        ("tmr-0207-b3", true),
    ] {
        let c = json_file(&reports.join(format!("{folder}/closeout.json")));
        assert_eq!(c["sign_chain_complete"], complete, "{folder}: {c}");
    }
    let text = stdout(&run);
    assert!(
        text.contains("B1 align      FAIL  axes x ok, y flipped, z ok"),
        "{text}"
    );
    // B1's report: the residual per heading, the field per mount, the axes pictures and
    // the gyro's scale, with the flipped axis drawn where it was found.
    let b1 = reports.join("tmr-0207-b1-align");
    for f in [
        "residual",
        "field_z_up",
        "field_x_up",
        "field_y_up",
        "axes",
        "gyro_axes",
        "gyro_scale",
    ] {
        let svg = b1.join(format!("step1-align_{f}.svg"));
        assert!(svg.is_file(), "{}", svg.display());
    }
    let axes_svg = std::fs::read_to_string(b1.join("step1-align_axes.svg")).unwrap();
    assert!(axes_svg.contains("magnetometer +x → body −y"), "{axes_svg}");
    // The ledger's history carries the alignment: B1's flipped axis changes to ok in
    // B2, and the gyro's scale does not move beyond its noise.
    let hist = d.run(&[
        "history",
        "--ledger",
        "demo/ledger.db",
        "--kind",
        "align",
        "--json",
    ]);
    assert_code(&hist, 0);
    let changes = json_stdout(&hist)["changes"]
        .as_array()
        .expect("changes")
        .clone();
    let change = |q: &str| {
        changes
            .iter()
            .find(|c| c["quantity"] == q && c["from_build"] == "B1" && c["to_build"] == "B2")
            .unwrap_or_else(|| panic!("no change {q} B1→B2"))
            .clone()
    };
    // B1's latest alignment run is the repeat after the harness fix, so history compares
    // ok with ok; the first run's flipped axis stays in the ledger as B1's earlier run.
    assert_eq!(change("align_axis_y")["flag"], "unchanged");
    let runs = json_stdout(&hist)["runs"].as_array().expect("runs").clone();
    let b1_align: Vec<&Value> = runs
        .iter()
        .filter(|r| r["build"] == "B1" && r["kind"] == "align")
        .collect();
    assert_eq!(b1_align.len(), 2, "{runs:?}");
    assert!(b1_align.iter().any(|r| r["pass"] == false), "{b1_align:?}");
    assert_eq!(change("gyro_scale_y")["flag"], "within-noise");
}
