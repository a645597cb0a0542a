//! Bad input and faults, through the binary: each case gets a clear message and exit 2,
//! or a correct result — never a panic, never NaN. The table [`CASES`] is the source of
//! docs/reliability.md; `docs_table_lists_every_case` checks the two agree.

use std::path::{Path, PathBuf};

use magproof::sim::dipole::{simulate_turntable, TurntableConfig};
use magproof::sim::polarity::{simulate_polarity, PolarityConfig};
use magproof::sim::{
    simulate_cage, simulate_tumble, write_cage_csv, write_tumble_csv, CageConfig, CageGrid,
    SimCoverage, TumbleConfig,
};

use crate::util::{stderr, stdout, TestDir};

/// (case id, exit code, a fragment of the message every run of that case must print).
const CASES: &[(&str, i32, &str)] = &[
    ("calibrate-few-samples", 2, "at least 30 samples"),
    ("calibrate-coplanar", 2, "coplanar"),
    ("calibrate-collinear", 2, "along one line"),
    ("calibrate-constant", 2, "constant"),
    ("calibrate-cage-rank-deficient", 2, "rank-deficient"),
    ("calibrate-huge-values", 2, "beyond any physical field"),
    ("calibrate-tiny-values", 2, "below 1e-3 nT"),
    ("calibrate-all-saturated", 2, "is saturated"),
    ("calibrate-clipped-axis", 0, "sensor x"),
    ("polarity-no-pulses", 2, "no pulses"),
    ("polarity-missing-cmd-column", 2, "cmd_z"),
    ("polarity-huge-values", 2, "beyond any physical field"),
    ("polarity-range", 0, "saturated"),
    ("dipole-no-background", 2, "no background segment"),
    ("dipole-huge-values", 2, "beyond any physical field"),
    ("dipole-range", 0, "saturated"),
];

fn case(id: &str) -> (i32, &'static str) {
    let c = CASES
        .iter()
        .find(|c| c.0 == id)
        .expect("case listed in CASES");
    (c.1, c.2)
}

/// Run `args` in `dir` and check the case's exit code and message; never a panic, and a
/// refusal prints nothing on stdout. Returns stdout.
fn expect(dir: &TestDir, id: &str, args: &[&str]) -> String {
    let out = dir.magproof().args(args).output().unwrap();
    let (code, fragment) = case(id);
    let (so, se) = (stdout(&out), stderr(&out));
    eprintln!("case {id}: exit {:?}: {}", out.status.code(), se.trim());
    assert!(!se.contains("panicked"), "{id}: panic\n{se}");
    assert_eq!(
        out.status.code(),
        Some(code),
        "{id}\nstdout {so}\nstderr {se}"
    );
    if code == 2 {
        assert!(so.is_empty(), "{id}: stdout on refusal: {so}");
        assert!(
            se.contains(fragment),
            "{id}: wanted \"{fragment}\" in\n{se}"
        );
    } else {
        assert!(
            so.contains(fragment) || se.contains(fragment),
            "{id}: wanted \"{fragment}\"\n{so}\n{se}"
        );
        assert!(!so.contains("NaN") && !so.contains("inf"), "{id}: {so}");
    }
    so
}

fn tumble(dir: &TestDir, name: &str, cfg: &TumbleConfig) -> String {
    let sim = simulate_tumble(cfg, 7).unwrap();
    let mut buf = Vec::new();
    write_tumble_csv(&sim, &mut buf).unwrap();
    dir.write(name, buf);
    name.into()
}

/// Rewrite the field columns `bx by bz` of a CSV text with `f(column index, value)`.
fn map_field(csv: &str, mut f: impl FnMut(usize, f64) -> f64) -> String {
    let mut out = String::new();
    let mut cols: Vec<usize> = Vec::new();
    for line in csv.lines() {
        if line.starts_with('#') || line.trim().is_empty() {
            out += line;
        } else if cols.is_empty() {
            let names: Vec<&str> = line.split(',').collect();
            for want in ["bx", "by", "bz"] {
                let i = names.iter().position(|n| n.trim().starts_with(want));
                cols.push(i.expect("field column"));
            }
            out += line;
        } else {
            let mut cells: Vec<String> = line.split(',').map(String::from).collect();
            for (k, &i) in cols.iter().enumerate() {
                let v: f64 = cells[i].trim().parse().unwrap();
                cells[i] = format!("{:?}", f(k, v));
            }
            out += &cells.join(",");
        }
        out.push('\n');
    }
    out
}

fn file(dir: &TestDir, name: &str) -> String {
    std::fs::read_to_string(dir.join(name)).unwrap()
}

#[test]
fn calibrate_refuses_degenerate_tumbles_with_the_reason() {
    let d = TestDir::new();
    let few: String = std::iter::once("bx,by,bz\n".to_string())
        .chain((0..12).map(|i| format!("{},{},{}\n", 40000 + i, 100 - i, -5 * i)))
        .collect();
    d.write("few.csv", few);
    expect(&d, "calibrate-few-samples", &["calibrate", "few.csv"]);

    let plane = TumbleConfig {
        coverage: SimCoverage::Plane,
        soft_iron: nalgebra::Matrix3::identity(),
        ..TumbleConfig::default()
    };
    tumble(&d, "plane.csv", &plane);
    expect(
        &d,
        "calibrate-coplanar",
        &["calibrate", "--json", "plane.csv"],
    );

    // Readings along one direction, both ways, with 1 % magnitude noise.
    let mut line = String::from("bx,by,bz\n");
    for i in 0..200 {
        let s = if i % 2 == 0 { 1.0 } else { -1.0 } * 48_000.0 * (1.0 + 0.01 * (i as f64).sin());
        line += &format!("{},{},{}\n", 0.267 * s, 0.534 * s, 0.802 * s);
    }
    d.write("line.csv", line);
    expect(&d, "calibrate-collinear", &["calibrate", "line.csv"]);

    d.write(
        "constant.csv",
        format!("bx,by,bz\n{}", "41000,-2000,15000\n".repeat(50)),
    );
    expect(
        &d,
        "calibrate-constant",
        &["calibrate", "--json", "constant.csv"],
    );
}

#[test]
fn calibrate_refuses_a_rank_deficient_cage_grid() {
    let d = TestDir::new();
    let cfg = CageConfig {
        grid: CageGrid::PlaneXy {
            per_axis: 4,
            max_nt: 40_000.0,
        },
        ..CageConfig::default()
    };
    let mut buf = Vec::new();
    write_cage_csv(&simulate_cage(&cfg, 2).unwrap(), &mut buf).unwrap();
    d.write("flat.csv", buf);
    expect(
        &d,
        "calibrate-cage-rank-deficient",
        &["calibrate", "flat.csv"],
    );
}

#[test]
fn huge_and_tiny_values_are_refused_not_overflowed() {
    let d = TestDir::new();
    tumble(&d, "t.csv", &TumbleConfig::default());
    let text = file(&d, "t.csv");
    d.write("huge.csv", map_field(&text, |_, v| v * 1e296));
    expect(
        &d,
        "calibrate-huge-values",
        &["calibrate", "--json", "huge.csv"],
    );
    d.write("tiny.csv", map_field(&text, |_, v| v * 1e-304));
    expect(
        &d,
        "calibrate-tiny-values",
        &["calibrate", "--json", "tiny.csv"],
    );
}

#[test]
fn saturation_is_flagged_counted_and_refused_when_total() {
    let d = TestDir::new();
    tumble(&d, "t.csv", &TumbleConfig::default());
    let text = file(&d, "t.csv");
    // Clip sensor x at +30 000 nT: the rail heuristic must find it without --range.
    d.write(
        "clipped.csv",
        map_field(&text, |k, v| if k == 0 { v.min(30_000.0) } else { v }),
    );
    let so = expect(
        &d,
        "calibrate-clipped-axis",
        &[
            "calibrate",
            "--json",
            "--reference-nt",
            "48000",
            "clipped.csv",
        ],
    );
    let j: serde_json::Value = serde_json::from_str(&so).unwrap();
    let sat = j["samples_saturated"].as_u64().unwrap();
    assert!(sat > 20, "{sat}");
    assert!(j["samples_rejected"].as_u64().unwrap() >= sat);
    let w = j["warnings"].to_string();
    assert!(w.contains("sensor x") && w.contains("30000"), "{w}");
    // The fit without the clipped rows still finds the field magnitude.
    assert!(j["residual_rms_nt"].as_f64().unwrap() < 200.0, "{j}");

    expect(
        &d,
        "calibrate-all-saturated",
        &["calibrate", "--range", "1", "t.csv"],
    );
    let out = d
        .magproof()
        .args(["calibrate", "--range", "-5", "t.csv"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}

fn polarity_files(d: &TestDir) -> (PathBuf, PathBuf) {
    let sim = simulate_polarity(&PolarityConfig::default(), 5).unwrap();
    let [csv, plan, _] = sim.write(d.path(), "pulses").unwrap();
    (csv, plan)
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

#[test]
fn polarity_bad_logs_are_refused_and_range_is_honoured() {
    let d = TestDir::new();
    let (csv, plan) = polarity_files(&d);
    d.write(
        "quiet.csv",
        "t,bx,by,bz,cmd_x,cmd_y,cmd_z\n0,1,2,3,0,0,0\n0.1,1,2,3,0,0,0\n0.2,1,2,3,0,0,0\n",
    );
    expect(
        &d,
        "polarity-no-pulses",
        &["polarity", "--plan", s(&plan), "quiet.csv"],
    );
    d.write(
        "nocmd.csv",
        "t,bx,by,bz,cmd_x,cmd_y\n0,1,2,3,0,0\n0.1,1,2,3,1,0\n0.2,1,2,3,0,0\n",
    );
    expect(
        &d,
        "polarity-missing-cmd-column",
        &["polarity", "--plan", s(&plan), "nocmd.csv"],
    );
    let text = std::fs::read_to_string(&csv).unwrap();
    d.write("huge.csv", map_field(&text, |_, v| v * 1e300));
    expect(
        &d,
        "polarity-huge-values",
        &["polarity", "--plan", s(&plan), "huge.csv"],
    );
    let range = range_below_top(&text);
    let so = expect(
        &d,
        "polarity-range",
        &[
            "polarity",
            "--json",
            "--range",
            &range,
            "--plan",
            s(&plan),
            s(&csv),
        ],
    );
    let j: serde_json::Value = serde_json::from_str(&so).unwrap();
    assert!(j["samples_saturated"].as_u64().unwrap() > 0, "{j}");
}

/// A range between the two largest |readings|: only the top reading's row is flagged.
fn range_below_top(csv: &str) -> String {
    let mut all = Vec::new();
    map_field(csv, |_, v| {
        all.push(v.abs());
        v
    });
    all.sort_by(|a, b| b.total_cmp(a));
    let second = all.iter().find(|v| **v < all[0]).expect("two values");
    format!("{}", 0.5 * (all[0] + second))
}

#[test]
fn dipole_bad_logs_are_refused_and_range_is_honoured() {
    let d = TestDir::new();
    let sim = simulate_turntable(&TurntableConfig::default(), 104).unwrap();
    let files = sim.write_to(d.path()).unwrap();
    let plan = s(&files.plan).to_string();
    let nobg: Vec<&str> = sim
        .log_csv
        .lines()
        .filter(|l| !l.ends_with(",none"))
        .collect();
    d.write("nobg.csv", nobg.join("\n"));
    expect(
        &d,
        "dipole-no-background",
        &["dipole", "nobg.csv", "--plan", &plan],
    );
    d.write("huge.csv", map_field(&sim.log_csv, |_, v| v * 1e300));
    expect(
        &d,
        "dipole-huge-values",
        &["dipole", "huge.csv", "--plan", &plan],
    );
    let range = range_below_top(&sim.log_csv);
    let so = expect(
        &d,
        "dipole-range",
        &[
            "dipole",
            s(&files.log),
            "--plan",
            &plan,
            "--json",
            "--range",
            &range,
        ],
    );
    let j: serde_json::Value = serde_json::from_str(&so).unwrap();
    assert!(j["samples_saturated"].as_u64().unwrap() > 0, "{j}");
}

#[test]
fn docs_table_lists_every_case() {
    let doc =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/reliability.md"))
            .expect("docs/reliability.md");
    for (id, code, fragment) in CASES {
        let row = doc
            .lines()
            .find(|l| l.starts_with(&format!("| `{id}` |")))
            .unwrap_or_else(|| panic!("docs/reliability.md has no row for `{id}`"));
        assert!(
            row.contains(&format!("| {code} |")),
            "{id}: exit {code}\n{row}"
        );
        assert!(row.contains(fragment), "{id}: \"{fragment}\"\n{row}");
    }
}

/// Bytes and modification time of a file.
fn snapshot(p: &Path) -> (Vec<u8>, std::time::SystemTime) {
    (
        std::fs::read(p).unwrap(),
        std::fs::metadata(p).unwrap().modified().unwrap(),
    )
}

#[test]
fn every_command_leaves_its_inputs_untouched() {
    let d = TestDir::new();
    let (pcsv, pplan) = polarity_files(&d);
    let sim = simulate_turntable(&TurntableConfig::default(), 104).unwrap();
    let dfiles = sim.write_to(d.path()).unwrap();
    tumble(&d, "t.csv", &TumbleConfig::default());
    let tlog = d.join("t.csv");
    let inputs = [&pcsv, &pplan, &dfiles.log, &dfiles.plan, &tlog];
    let before: Vec<_> = inputs.iter().map(|p| snapshot(p)).collect();
    let runs: Vec<Vec<&str>> = vec![
        vec!["inspect", "--plan", s(&pplan), s(&pcsv)],
        vec!["inspect", "--plan", s(&dfiles.plan), s(&dfiles.log)],
        vec!["calibrate", "--params-out", "cal.json", s(&tlog)],
        vec!["calibrate", "--plan", s(&pplan), s(&pcsv)],
        vec![
            "polarity",
            "--params-out",
            "pol.h",
            "--plan",
            s(&pplan),
            s(&pcsv),
        ],
        vec![
            "dipole",
            "--json",
            "--plan",
            s(&dfiles.plan),
            s(&dfiles.log),
        ],
    ];
    for args in &runs {
        let out = d.magproof().args(args).output().unwrap();
        assert!(!stderr(&out).contains("panicked"), "{args:?}");
        assert!(
            matches!(out.status.code(), Some(0..=2)),
            "{args:?}: {}",
            stderr(&out)
        );
    }
    for (p, b) in inputs.iter().zip(&before) {
        assert!(snapshot(p) == *b, "{} changed", p.display());
    }
}

#[test]
fn existing_outputs_are_not_replaced_without_force() {
    let d = TestDir::new();
    tumble(&d, "t.csv", &TumbleConfig::default());
    let (pcsv, pplan) = polarity_files(&d);
    for (file, args) in [
        (
            "cal.json",
            vec!["calibrate", "--params-out", "cal.json", "t.csv"],
        ),
        (
            "pol.json",
            vec![
                "polarity",
                "--params-out",
                "pol.json",
                "--plan",
                s(&pplan),
                s(&pcsv),
            ],
        ),
    ] {
        d.write(file, "keep me\n");
        let out = d.magproof().args(&args).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{args:?}: {}", stderr(&out));
        assert!(stderr(&out).contains("--force"), "{}", stderr(&out));
        assert_eq!(file_text(&d, file), "keep me\n");
        let out = d.magproof().args(&args).arg("--force").output().unwrap();
        assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
        assert!(file_text(&d, file).starts_with('{'), "{file} not replaced");
        // No temporary file is left beside it.
        let stray: Vec<_> = std::fs::read_dir(d.path())
            .unwrap()
            .filter_map(|e| e.ok())
            .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
            .collect();
        assert!(stray.is_empty(), "{stray:?}");
    }
    // History export: the same rule.
    drop(magproof::ledger::Ledger::open(&d.join("l.db")).unwrap());
    d.write("h.csv", "keep me\n");
    let export = [
        "history", "--ledger", "l.db", "--export", "csv", "--out", "h.csv",
    ];
    let out = d.magproof().args(export).output().unwrap();
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(stderr(&out).contains("--force"), "{}", stderr(&out));
    assert_eq!(file_text(&d, "h.csv"), "keep me\n");
    let out = d.magproof().args(export).arg("--force").output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert_ne!(file_text(&d, "h.csv"), "keep me\n");
}

fn file_text(d: &TestDir, name: &str) -> String {
    std::fs::read_to_string(d.join(name)).unwrap()
}
