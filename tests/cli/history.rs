//! `magproof history` on ledgers written through the library: two builds read back,
//! flags, exports, a first-schema ledger, and refusals (missing file, foreign file).

use std::path::{Path, PathBuf};

use magproof::check::CheckKind;
use magproof::ledger::{Ledger, NewRun, Recorded};
use magproof::log::read_plan;
use serde::Deserialize;
use serde_json::{json, Value};

use crate::util::TestDir;

#[derive(Debug, Deserialize)]
struct HistoryJson {
    runs: Vec<RunJson>,
    changes: Vec<ChangeJson>,
}

#[derive(Debug, Deserialize)]
struct RunJson {
    serial: String,
    build: String,
    kind: String,
    recorded_at: String,
    pass: Option<bool>,
    result: Value,
}

#[derive(Debug, Deserialize)]
struct ChangeJson {
    serial: String,
    from_build: String,
    to_build: String,
    quantity: String,
    delta: Option<f64>,
    sigma: Option<f64>,
    flag: String,
}

fn calibrate(h: [f64; 3], s: [f64; 3], rms: f64, pass: bool) -> Value {
    json!({"method": "tumble", "hard_iron_nt": h, "hard_iron_sigma_nt": s,
           "soft_iron": [[1.02, 0.004, 0.0], [0.004, 0.98, 0.0], [0.0, 0.0, 1.0]],
           "residual_rms_nt": rms, "pass": pass})
}

fn polarity(y: &str) -> Value {
    json!({"rods": [{"name": "x", "verdict": "ok"}, {"name": "y", "verdict": y}],
           "lag_s": 0.02, "pass": y == "ok"})
}

fn dipole(m: [f64; 3], pass: bool) -> Value {
    let mag = (m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).sqrt();
    json!({"moment_body_am2": m, "moment_sigma_am2": [2e-4, 2e-4, 2e-4],
           "magnitude_am2": mag, "pass": pass})
}

/// Record one build's closeout (three steps, one transaction) the way `closeout` will:
/// plan with [article], one log per step, runs built from the plan.
fn record_build(t: &TestDir, db: &Path, build: &str, results: [Value; 3]) -> Vec<Recorded> {
    let plan_path = t.write(
        &format!("plan_{build}.toml"),
        format!("[article]\nserial = \"KST-002\"\nbuild = \"{build}\"\n"),
    );
    let plan = read_plan(&plan_path).unwrap();
    let kinds = ["calibrate", "polarity", "dipole"].map(|k| CheckKind::parse(k).unwrap());
    let runs: Vec<NewRun> = kinds
        .into_iter()
        .zip(results)
        .map(|(kind, result)| {
            let log = t.write(
                &format!("{}_{build}.csv", kind.as_str()),
                format!("# {build}\nt,bx,by,bz\n0,1,2,3\n"),
            );
            NewRun::from_plan(&plan, kind, &log, result).unwrap()
        })
        .collect();
    Ledger::open(db).unwrap().record_runs(&runs).unwrap()
}

fn two_builds(t: &TestDir) -> PathBuf {
    let db = t.join("magproof.db");
    record_build(
        t,
        &db,
        "B3",
        [
            calibrate([400.0, -120.0, 30.0], [6.0, 6.0, 8.0], 40.0, true),
            polarity("ok"),
            dipole([0.0020, -0.0010, 0.0005], true),
        ],
    );
    record_build(
        t,
        &db,
        "B4",
        [
            calibrate([460.0, -118.0, 30.0], [8.0, 6.0, 8.0], 41.0, true),
            polarity("reversed"),
            dipole([0.0062, -0.0010, 0.0005], false),
        ],
    );
    db
}

fn history_json(t: &TestDir, args: &[&str]) -> HistoryJson {
    let out = t
        .magproof()
        .arg("history")
        .arg("--json")
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("exactly one JSON object on stdout")
}

fn change<'a>(h: &'a HistoryJson, q: &str) -> &'a ChangeJson {
    h.changes.iter().find(|c| c.quantity == q).unwrap()
}

#[test]
fn two_builds_read_back_with_their_changes_flagged() {
    let t = TestDir::new();
    two_builds(&t);
    let h = history_json(&t, &[]); // default ledger: magproof.db in the current folder
    assert_eq!(h.runs.len(), 6);
    let builds: Vec<&str> = h.runs.iter().map(|r| r.build.as_str()).collect();
    assert_eq!(builds, ["B3", "B3", "B3", "B4", "B4", "B4"]);
    assert!(h
        .runs
        .iter()
        .all(|r| r.serial == "KST-002" && r.recorded_at.ends_with('Z')));
    assert_eq!(h.runs[5].kind, "dipole");
    assert_eq!(h.runs[5].pass, Some(false));
    assert_eq!(h.runs[0].result["residual_rms_nt"], json!(40.0));

    // Hard iron x: Δ = 60 nT, σ = √(6² + 8²) = 10 nT → 6σ: significant.
    let hx = change(&h, "hard_iron_x_nt");
    assert_eq!((hx.from_build.as_str(), hx.to_build.as_str()), ("B3", "B4"));
    assert!((hx.delta.unwrap() - 60.0).abs() < 1e-9);
    assert!((hx.sigma.unwrap() - 10.0).abs() < 1e-9);
    assert_eq!(hx.flag, "significant");
    // Hard iron y: Δ = 2 nT within √(6² + 6²) ≈ 8.5 nT.
    assert_eq!(change(&h, "hard_iron_y_nt").flag, "within-noise");
    assert_eq!(change(&h, "soft_iron_max_element").flag, "no-sigma");
    assert_eq!(change(&h, "rod_y_verdict").flag, "verdict-changed");
    assert_eq!(change(&h, "rod_x_verdict").flag, "unchanged");
    assert_eq!(change(&h, "polarity_pass").flag, "limit-crossed");
    assert_eq!(change(&h, "dipole_pass").flag, "limit-crossed");
    let dx = change(&h, "dipole_x_am2");
    assert!((dx.delta.unwrap() - 0.0042).abs() < 1e-12);
    assert!((dx.sigma.unwrap() - 2e-4 * 2f64.sqrt()).abs() < 1e-12);
    assert!(h.changes.iter().all(|c| c.serial == "KST-002"));
}

#[test]
fn recording_the_same_inputs_again_is_not_a_new_run() {
    let t = TestDir::new();
    let db = two_builds(&t);
    let again = record_build(
        &t,
        &db,
        "B4",
        [
            calibrate([460.0, -118.0, 30.0], [8.0, 6.0, 8.0], 41.0, true),
            polarity("reversed"),
            dipole([0.0062, -0.0010, 0.0005], false),
        ],
    );
    assert!(again.iter().all(|r| matches!(r, Recorded::AlreadyThere(_))));
    assert_eq!(history_json(&t, &[]).runs.len(), 6);
}

#[test]
fn filters_and_the_environment_choose_what_is_read() {
    let t = TestDir::new();
    let db = two_builds(&t);
    let moved = t.join("elsewhere.db");
    std::fs::rename(&db, &moved).unwrap();
    let out = t
        .magproof()
        .args([
            "history", "--json", "--kind", "dipole", "--serial", "KST-002",
        ])
        .env("MAGPROOF_LEDGER", &moved)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let h: HistoryJson = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(h.runs.len(), 2);
    assert!(h.runs.iter().all(|r| r.kind == "dipole"));
    assert!(h.changes.iter().all(|c| c.quantity.starts_with("dipole_")));

    let none = history_json(
        &t,
        &["--ledger", moved.to_str().unwrap(), "--serial", "NOPE"],
    );
    assert!(none.runs.is_empty() && none.changes.is_empty());
}

#[test]
fn terminal_view_fits_80_columns_and_puts_units_on_numbers() {
    let t = TestDir::new();
    two_builds(&t);
    let out = t.magproof().arg("history").output().unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    for line in text.lines() {
        assert!(line.chars().count() <= 80, "too wide: {line:?}");
    }
    assert!(text.contains("hard iron x"), "{text}");
    assert!(text.contains("+60.0 ± 10.0 nT (6.0σ)"), "{text}");
    assert!(text.contains("ok → reversed"), "{text}");
    assert!(text.contains("A·m²"), "{text}");
    assert!(text.contains("limit-crossed !"), "{text}");
    assert!(text.contains("B3 → B4"), "{text}");
}

#[test]
fn csv_exports_go_to_stdout_or_atomically_to_a_file() {
    let t = TestDir::new();
    two_builds(&t);
    let out = t
        .magproof()
        .args(["history", "--export", "csv"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next(),
        Some("serial,build,kind,run_id,recorded_at,quantity,value,sigma,unit,pass")
    );
    assert!(text.contains(",hard_iron_x_nt,460,8,nT,true"), "{text}");
    assert!(text.contains(",rod_y_verdict,reversed,,,false"), "{text}");

    let file = t.join("changes.csv");
    let args = ["history", "--export", "changes-csv", "--out", "changes.csv"];
    t.magproof().args(args).assert().success().stdout("");
    let csv = std::fs::read_to_string(&file).unwrap();
    assert!(
        csv.starts_with("serial,from_build,to_build,kind,quantity,from,to,delta,sigma,unit,flag\n")
    );
    assert!(
        csv.contains("KST-002,B3,B4,calibrate,hard_iron_x_nt,400,460,60,10,nT,significant"),
        "{csv}"
    );
    // An existing file is kept unless --force.
    t.magproof().args(args).assert().code(2);
    t.magproof().args(args).arg("--force").assert().success();
}

#[test]
fn a_missing_ledger_is_refused_and_not_created() {
    let t = TestDir::new();
    let out = t.magproof().arg("history").output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("magproof.db") && err.contains("no ledger file"),
        "{err}"
    );
    assert!(!t.join("magproof.db").exists());
}

#[test]
fn a_file_that_is_not_a_ledger_is_refused() {
    let t = TestDir::new();
    t.write(
        "notes.db",
        "this is a text file, not a database\n".repeat(100),
    );
    let out = t
        .magproof()
        .args(["history", "--ledger", "notes.db"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a magproof ledger"));
}

#[test]
fn a_first_schema_ledger_is_migrated_and_read() {
    let t = TestDir::new();
    let db = t.join("v1.db");
    let sql = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/ledger_v1.sql"),
    )
    .unwrap();
    rusqlite::Connection::open(&db)
        .unwrap()
        .execute_batch(&sql)
        .unwrap();
    let h = history_json(&t, &["--ledger", "v1.db"]);
    assert_eq!(h.runs.len(), 2);
    // Δx = 60 nT, σ = √(6² + 8²) = 10 nT.
    let hx = change(&h, "hard_iron_x_nt");
    assert!((hx.delta.unwrap() - 60.0).abs() < 1e-9 && (hx.sigma.unwrap() - 10.0).abs() < 1e-9);
    assert_eq!(hx.flag, "significant");
    let version: i64 = rusqlite::Connection::open(&db)
        .unwrap()
        .query_row("PRAGMA user_version", [], |r| r.get(0))
        .unwrap();
    assert_eq!(version, magproof::ledger::CURRENT_VERSION);
    // A new run can be added to the migrated file and carries the tool version.
    let h2 = {
        let plan = t.write("p.toml", "[article]\nserial = \"ORB-7\"\nbuild = \"B3\"\n");
        let log = t.write("l.csv", "t,bx,by,bz\n0,1,2,3\n");
        let plan = read_plan(&plan).unwrap();
        let run = NewRun::from_plan(
            &plan,
            CheckKind::parse("calibrate").unwrap(),
            &log,
            calibrate([470.0, -118.0, 30.0], [8.0, 6.0, 8.0], 44.0, true),
        )
        .unwrap();
        Ledger::open(&db).unwrap().record_runs(&[run]).unwrap();
        history_json(&t, &["--ledger", "v1.db"])
    };
    assert_eq!(h2.runs.len(), 3);
    assert_eq!(change(&h2, "hard_iron_x_nt").flag, "significant");
}

#[test]
fn json_and_csv_cannot_share_stdout() {
    let t = TestDir::new();
    two_builds(&t);
    t.magproof()
        .args(["history", "--json", "--export", "csv"])
        .assert()
        .code(2);
}

/// `tests/data/ledger_v2_demo.sqlite` is the ledger the demo wrote with the binary released
/// before the kind became text checked in Rust (schema version 2, nine runs, `CHECK
/// (kind IN …)` in its `runs` table); `ledger_v2_demo_history.json` is that binary's
/// `history --json` of it. Made once with `magproof demo --out D` and `magproof history
/// --ledger D/ledger.db --json` at commit d1c4fb9.
#[test]
fn a_ledger_written_by_the_previous_release_migrates_and_keeps_its_history() {
    let t = TestDir::new();
    let data = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data");
    let db = t.join("old.db");
    std::fs::copy(data.join("ledger_v2_demo.sqlite"), &db).unwrap();
    let before: HistoryJson = serde_json::from_str(
        &std::fs::read_to_string(data.join("ledger_v2_demo_history.json")).unwrap(),
    )
    .unwrap();
    let after = history_json(&t, &["--ledger", "old.db"]);
    assert_eq!(after.runs.len(), before.runs.len());
    assert_eq!(after.changes.len(), before.changes.len());
    for (a, b) in after.changes.iter().zip(&before.changes) {
        assert_eq!(
            (&a.quantity, &a.from_build, &a.to_build, &a.flag),
            (&b.quantity, &b.from_build, &b.to_build, &b.flag)
        );
        for (x, y) in [(a.delta, b.delta), (a.sigma, b.sigma)] {
            match (x, y) {
                (Some(x), Some(y)) => assert!((x - y).abs() <= 1e-12 * y.abs().max(1.0)),
                (x, y) => assert_eq!(x, y, "{}", a.quantity),
            }
        }
    }
    let conn = rusqlite::Connection::open(&db).unwrap();
    let version: i64 = conn
        .query_row("PRAGMA user_version", [], |r| r.get(0))
        .unwrap();
    assert_eq!(version, magproof::ledger::CURRENT_VERSION);
    let sql: String = conn
        .query_row(
            "SELECT sql FROM sqlite_master WHERE type = 'table' AND name = 'runs'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert!(!sql.contains("CHECK (kind"), "{sql}");
    let integrity: String = conn
        .query_row("PRAGMA integrity_check", [], |r| r.get(0))
        .unwrap();
    assert_eq!(integrity, "ok");
    let inputs: i64 = conn
        .query_row("SELECT count(*) FROM inputs", [], |r| r.get(0))
        .unwrap();
    assert_eq!(inputs, 18, "every run keeps its log and plan");
}
