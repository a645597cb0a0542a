//! The ledger under real operating-system processes: two writers at once, and a writer
//! killed (SIGKILL) in the middle of its work.
//!
//! The writer processes are this same test binary, started again through
//! `std::env::current_exe()` to run only [`child_writer`] with `LEDGER_CHILD` set; run
//! directly (no `LEDGER_CHILD`), that entry point does nothing.

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use magproof::check::CheckKind;
use magproof::ledger::{InputFile, InputRole, Ledger, NewRun, Recorded, RunFilter, RunId};
use serde_json::json;

const CHILD: &str = "LEDGER_CHILD";
const DB: &str = "LEDGER_CHILD_DB";
const TAG: &str = "LEDGER_CHILD_TAG";
const GO: &str = "LEDGER_CHILD_GO";
const SETS: usize = 25;

/// A closeout-like record set: three runs (one per kind) with hashes unique to `tag`/`i`.
fn record_set(tag: &str, i: usize, payload: &str) -> Vec<NewRun> {
    ["calibrate", "polarity", "dipole"]
        .into_iter()
        .filter_map(CheckKind::parse)
        .map(|kind| {
            let seed = format!("{tag}/{i}/{}", kind.as_str());
            let sha = format!("{:0>64}", hex_of(&seed));
            NewRun {
                serial: format!("SN-{tag}"),
                build: format!("B{i}"),
                kind,
                inputs: vec![InputFile {
                    role: InputRole::Log,
                    path: format!("{seed}.csv").into(),
                    sha256: sha,
                }],
                quantities: vec![],
                result: json!({"pass": true, "note": payload}),
                options: json!({}),
                sensor: None,
            }
        })
        .collect()
}

/// Lower-case hex of a string's bytes, cut to 64 digits (a stand-in digest).
fn hex_of(s: &str) -> String {
    let h: String = s.bytes().map(|b| format!("{b:02x}")).collect();
    h.chars().rev().take(64).collect()
}

/// Entry point of a writer process; a no-op unless `LEDGER_CHILD` is set.
#[test]
fn child_writer() {
    let Ok(mode) = std::env::var(CHILD) else {
        return;
    };
    let db = PathBuf::from(std::env::var(DB).unwrap());
    let tag = std::env::var(TAG).unwrap();
    match mode.as_str() {
        // Wait for the go file so both writers start together, then write SETS sets,
        // each in its own open/record/close, as separate closeouts would.
        "burst" => {
            let go = PathBuf::from(std::env::var(GO).unwrap());
            while !go.exists() {
                std::thread::sleep(Duration::from_millis(2));
            }
            for i in 0..SETS {
                let mut ledger = Ledger::open(&db).unwrap();
                let ids = ledger.record_runs(&record_set(&tag, i, "")).unwrap();
                assert!(ids.iter().all(|r| matches!(r, Recorded::New(_))));
            }
        }
        // Write large sets forever, saying which ids each commit made durable.
        "endless" => {
            let payload = "x".repeat(256 * 1024);
            let mut ledger = Ledger::open(&db).unwrap();
            for i in 0.. {
                let ids = ledger.record_runs(&record_set(&tag, i, &payload)).unwrap();
                let ids: Vec<String> = ids.iter().map(|r| r.id().0.to_string()).collect();
                println!("committed {}", ids.join(" "));
            }
        }
        other => panic!("unknown child mode {other}"),
    }
}

fn spawn(mode: &str, db: &Path, tag: &str, go: &Path) -> Child {
    Command::new(std::env::current_exe().unwrap())
        .args(["--exact", "child_writer", "--nocapture", "--test-threads=1"])
        .env(CHILD, mode)
        .env(DB, db)
        .env(TAG, tag)
        .env(GO, go)
        .stdout(Stdio::piped())
        .stderr(Stdio::inherit())
        .spawn()
        .unwrap()
}

#[test]
fn two_processes_writing_at_once_both_succeed() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("shared.db");
    let go = dir.path().join("go");
    // Both start on a file that does not exist yet: creation races too.
    let a = spawn("burst", &db, "A", &go);
    let b = spawn("burst", &db, "B", &go);
    std::fs::write(&go, b"").unwrap();
    for (name, child) in [("A", a), ("B", b)] {
        let out = child.wait_with_output().unwrap();
        assert!(
            out.status.success(),
            "writer {name} failed: {:?}",
            out.status
        );
    }
    let ledger = Ledger::open_existing(&db).unwrap();
    ledger.check_integrity().unwrap();
    for tag in ["A", "B"] {
        let filter = RunFilter {
            serial: Some(format!("SN-{tag}")),
            kind: None,
        };
        assert_eq!(
            ledger.runs(&filter).unwrap().len(),
            SETS * 3,
            "writer {tag}"
        );
    }
}

#[test]
fn a_writer_killed_mid_write_loses_nothing_it_had_committed() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("crash.db");
    let mut child = spawn("endless", &db, "K", &dir.path().join("unused"));
    let stdout = child.stdout.take().unwrap();
    let mut committed: Vec<i64> = Vec::new();
    let mut commits = 0;
    for line in BufReader::new(stdout).lines() {
        let line = line.unwrap();
        if let Some(ids) = line.strip_prefix("committed ") {
            committed.extend(ids.split(' ').map(|s| s.parse::<i64>().unwrap()));
            commits += 1;
            if commits == 6 {
                // SIGKILL on Unix: no destructor, no rollback, no flush runs.
                child.kill().unwrap();
                break;
            }
        }
    }
    child.wait().unwrap();
    let ledger = Ledger::open_existing(&db).unwrap();
    ledger.check_integrity().unwrap();
    let runs = ledger.runs(&RunFilter::default()).unwrap();
    let present: Vec<RunId> = runs.iter().map(|r| r.id).collect();
    for id in &committed {
        assert!(present.contains(&RunId(*id)), "committed run {id} is lost");
    }
    // Each record set is one transaction: never a part of one.
    assert_eq!(
        runs.len() % 3,
        0,
        "{} runs: a record set was cut",
        runs.len()
    );
    assert!(runs.len() >= committed.len());
    assert!(runs
        .iter()
        .all(|r| r.result["note"].as_str().map(str::len) == Some(256 * 1024)));
}

/// Start the endless writer on `db`, let it commit a few record sets, SIGKILL it and
/// return with its side files left beside `db` (as after a crash).
fn crash_writer_on(db: &Path) {
    let mut child = spawn("endless", db, "K", &db.with_extension("unused"));
    let stdout = child.stdout.take().unwrap();
    let mut commits = 0;
    for line in BufReader::new(stdout).lines() {
        if line.unwrap().starts_with("committed ") {
            commits += 1;
            if commits == 3 {
                child.kill().unwrap();
                break;
            }
        }
    }
    child.wait().unwrap();
    let wal = PathBuf::from(format!("{}-wal", db.display()));
    assert!(
        std::fs::metadata(&wal)
            .map(|m| m.len() > 0)
            .unwrap_or(false),
        "the killed writer left no write-ahead log"
    );
}

/// The magproof binary, run in `dir`.
fn magproof(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_magproof"))
        .current_dir(dir)
        .env_remove("MAGPROOF_LEDGER")
        .args(args)
        .output()
        .unwrap()
}

/// Common practice: SQLite replays a `-wal` file it finds beside a database it opens, so
/// a new ledger must never be created beside a stale one.
#[test]
fn a_new_ledger_is_not_created_over_a_crashed_ledgers_side_files() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("magproof.db");
    crash_writer_on(&db);
    std::fs::remove_file(&db).unwrap();
    let wal = PathBuf::from(format!("{}-wal", db.display()));
    let wal_bytes = std::fs::read(&wal).unwrap();
    let samples = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-logs/tmr-0207-b2");
    let plan = samples.join("plan.toml");
    let out = magproof(
        dir.path(),
        &[
            "closeout",
            plan.to_str().unwrap(),
            "--ledger",
            "magproof.db",
        ],
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("magproof.db-wal"), "{err}");
    assert!(!db.exists(), "a ledger was created");
    assert_eq!(
        std::fs::read(&wal).unwrap(),
        wal_bytes,
        "the side file changed"
    );
}

/// Common practice, as above: removing an SQLite database means removing its side files.
#[test]
fn demo_force_starts_its_ledger_afresh_with_no_stale_side_files() {
    let dir = tempfile::tempdir().unwrap();
    let out = magproof(dir.path(), &["demo", "--out", "d"]);
    assert_eq!(out.status.code(), Some(0));
    let db = dir.path().join("d/ledger.db");
    // A writer killed on the demo's ledger leaves its side files behind.
    crash_writer_on(&db);
    let out = magproof(dir.path(), &["demo", "--out", "d", "--force"]);
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    let ledger = Ledger::open_existing(&db).unwrap();
    ledger.check_integrity().unwrap();
    let runs = ledger.runs(&RunFilter::default()).unwrap();
    assert_eq!(
        runs.len(),
        24,
        "B1's first alignment run and its sign chain, three builds of five steps and a \
         sign chain, the on-orbit pass, three rods on the bench"
    );
    let vehicle = runs.iter().filter(|r| r.serial == "TMR-0207").count();
    assert_eq!(
        vehicle, 21,
        "B1's first alignment run and its sign chain, three builds of five steps and a \
         sign chain, then the on-orbit pass"
    );
    assert!(runs
        .iter()
        .filter(|r| r.serial != "TMR-0207")
        .all(|r| r.serial.starts_with("TMR-TR-") && r.build == "R-2602"));
}
