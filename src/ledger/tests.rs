//! Tests of the ledger: recording, dedupe, reading back, refusals.

use super::*;
use crate::check::calibrate::seam::KIND as CALIBRATE;
use crate::check::dipole::seam::KIND as DIPOLE;
use crate::check::polarity::seam::KIND as POLARITY;
use serde_json::json;

fn new_run(build: &str, kind: CheckKind, log_hash: char, result: serde_json::Value) -> NewRun {
    NewRun {
        serial: "KST-002".into(),
        build: build.into(),
        kind,
        inputs: vec![InputFile {
            role: InputRole::Log,
            path: format!("{}.csv", kind.as_str()).into(),
            sha256: log_hash.to_string().repeat(64),
        }],
        quantities: legacy_quantities(kind.as_str(), &result),
        result,
        options: serde_json::json!({}),
        sensor: None,
    }
}

#[test]
fn runs_come_back_as_recorded_with_time_version_and_verdict() {
    let dir = tempfile::tempdir().unwrap();
    let mut ledger = Ledger::open(&dir.path().join("l.db")).unwrap();
    let ids = ledger
        .record_runs(&[
            new_run(
                "B3",
                DIPOLE,
                'a',
                json!({"magnitude_am2": 0.003, "pass": true}),
            ),
            new_run("B3", POLARITY, 'b', json!({"rods": [], "pass": false})),
            new_run("B3", CALIBRATE, 'c', json!({"residual_rms_nt": 20.0})),
        ])
        .unwrap();
    assert!(ids.iter().all(|r| matches!(r, Recorded::New(_))));
    let runs = ledger.runs(&RunFilter::default()).unwrap();
    assert_eq!(runs.len(), 3);
    assert_eq!(runs[0].result["magnitude_am2"], json!(0.003));
    assert_eq!(
        runs.iter().map(|r| r.pass).collect::<Vec<_>>(),
        [Some(true), Some(false), None]
    );
    assert_eq!(runs[0].tool_version.as_deref(), Some(crate::VERSION));
    // One set, one timestamp, in the documented form.
    assert!(runs.iter().all(|r| r.recorded_at == runs[0].recorded_at));
    let fmt = time::format_description::well_known::Rfc3339;
    assert!(time::OffsetDateTime::parse(&runs[0].recorded_at, &fmt).is_ok());
    assert!(runs[0].recorded_at.ends_with('Z'));
    let only = RunFilter {
        kind: Some(POLARITY),
        ..RunFilter::default()
    };
    assert_eq!(ledger.runs(&only).unwrap().len(), 1);
    let other = RunFilter {
        serial: Some("KST-009".into()),
        ..RunFilter::default()
    };
    assert!(ledger.runs(&other).unwrap().is_empty());
}

#[test]
fn the_same_inputs_recorded_twice_are_one_run() {
    let dir = tempfile::tempdir().unwrap();
    let mut ledger = Ledger::open(&dir.path().join("l.db")).unwrap();
    let r = new_run("B3", DIPOLE, 'a', json!({"pass": true}));
    let first = ledger.record_runs(std::slice::from_ref(&r)).unwrap();
    let again = ledger.record_runs(&[r.clone(), r.clone()]).unwrap();
    assert_eq!(again, [Recorded::AlreadyThere(first[0].id()); 2]);
    // Same log under another build, or another log for the same build: new runs.
    let other_build = new_run("B4", DIPOLE, 'a', json!({"pass": true}));
    let other_log = new_run("B3", DIPOLE, 'f', json!({"pass": true}));
    let more = ledger.record_runs(&[other_build, other_log]).unwrap();
    assert!(more.iter().all(|x| matches!(x, Recorded::New(_))));
    assert_eq!(ledger.runs(&RunFilter::default()).unwrap().len(), 3);
}

#[test]
fn a_set_with_one_bad_run_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let mut ledger = Ledger::open(&dir.path().join("l.db")).unwrap();
    let good = new_run("B3", DIPOLE, 'a', json!({"pass": true}));
    let bad = new_run("B3", CALIBRATE, 'b', json!("not an object"));
    let e = ledger.record_runs(&[good, bad]).unwrap_err();
    assert!(matches!(e, LedgerError::InvalidRun(_)), "{e}");
    assert!(ledger.runs(&RunFilter::default()).unwrap().is_empty());
}

#[test]
fn reading_a_missing_ledger_does_not_create_it() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nowhere.db");
    let e = Ledger::open_existing(&path).unwrap_err();
    assert!(matches!(e, LedgerError::Missing { .. }));
    assert_eq!(e.exit_code(), 2);
    assert!(!path.exists());
}

#[test]
fn recording_a_check_needs_the_plans_article_and_hashes_log_and_plan() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("dipole.csv");
    std::fs::write(&log, "t,bx,by,bz\n0,1,2,3\n").unwrap();
    // The reader hashes the log as it reads it; here its bytes are hashed directly.
    let log_sha = crate::log::hash::sha256_bytes(b"t,bx,by,bz\n0,1,2,3\n");
    let bare = dir.path().join("bare.toml");
    std::fs::write(&bare, "[limits]\nresidual_dipole_max_am2 = 0.005\n").unwrap();
    let plan = crate::log::read_plan(&bare).unwrap();
    let db = dir.path().join("l.db");
    let e = record_check(
        &db,
        &plan,
        &crate::check::dummy::DummyResult::new(1.0),
        (&log, &log_sha),
        serde_json::json!({}),
    )
    .unwrap_err();
    assert!(matches!(e, LedgerError::NoArticle { .. }));
    assert!(e.to_string().contains("[article]"), "{e}");
    assert!(!db.exists(), "a refused record must not create the ledger");

    let with = dir.path().join("plan.toml");
    std::fs::write(&with, "[article]\nserial = \"KST-002\"\nbuild = \"B4\"\n").unwrap();
    let plan = crate::log::read_plan(&with).unwrap();
    let id = record_check(
        &db,
        &plan,
        &crate::check::dummy::DummyResult::new(1.0),
        (&log, &log_sha),
        serde_json::json!({}),
    )
    .unwrap();
    assert!(matches!(id, Recorded::New(_)));
    let again = record_check(
        &db,
        &plan,
        &crate::check::dummy::DummyResult::new(1.0),
        (&log, &log_sha),
        serde_json::json!({}),
    )
    .unwrap();
    assert_eq!(again, Recorded::AlreadyThere(id.id()));
    let runs = Ledger::open_existing(&db)
        .unwrap()
        .runs(&RunFilter::default())
        .unwrap();
    assert_eq!(
        (runs[0].serial.as_str(), runs[0].build.as_str()),
        ("KST-002", "B4")
    );
    let roles: Vec<InputRole> = runs[0].inputs.iter().map(|i| i.role).collect();
    assert_eq!(roles, [InputRole::Log, InputRole::Plan]);
}
