//! Reliability battery, dedupe by version: the magproof version is part of a run's
//! dedupe key, so a run recorded by another version (written here into the ledger with
//! SQL, under the key that version would have made) does not swallow a re-run by this
//! one; the re-run is recorded and the output says why (docs/reliability.md, "Battery").
//! Common practice: each case drives the binary and reads the ledger back.

use sha2::{Digest, Sha256};

use crate::battery_outputs::sample;
use crate::util::{assert_code, stderr, stdout, TestDir};

const OLD: &str = "0.0.9";
const THIS: &str = env!("CARGO_PKG_VERSION");

/// A run's dedupe key as docs/ledger.md states it: SHA-256 over the sorted (role, hash)
/// pairs of its inputs, the options as compact JSON with sorted keys, and the version.
fn key(inputs: &[(String, String)], options: &serde_json::Value, version: &str) -> String {
    let mut pairs = inputs.to_vec();
    pairs.sort();
    let mut h = Sha256::new();
    for (role, sha) in pairs {
        h.update(format!("{role}\0{sha}\n"));
    }
    h.update(format!("options\0{options}\nversion\0{version}"));
    h.finalize().iter().map(|b| format!("{b:02x}")).collect()
}

/// Make every run of the ledger look recorded by magproof [`OLD`]: its version and its
/// key as that version would have made it. Checks first that the key recipe gives the
/// stored key for this version (so the rewrite is exactly what an old version wrote).
fn rewrite_as_old(db: &std::path::Path, options: &serde_json::Value) -> usize {
    let conn = rusqlite::Connection::open(db).unwrap();
    let runs: Vec<(i64, String)> = conn
        .prepare("SELECT id, input_key FROM runs")
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    for (id, stored) in &runs {
        let inputs: Vec<(String, String)> = conn
            .prepare("SELECT role, sha256 FROM inputs WHERE run_id = ?1")
            .unwrap()
            .query_map([id], |r| Ok((r.get(0)?, r.get(1)?)))
            .unwrap()
            .collect::<Result<_, _>>()
            .unwrap();
        assert_eq!(
            &key(&inputs, options, THIS),
            stored,
            "the key recipe, run {id}"
        );
        conn.execute(
            "UPDATE runs SET tool_version = ?1, input_key = ?2 WHERE id = ?3",
            rusqlite::params![OLD, key(&inputs, options, OLD), id],
        )
        .unwrap();
    }
    runs.len()
}

fn count_runs(db: &std::path::Path) -> i64 {
    let conn = rusqlite::Connection::open(db).unwrap();
    conn.query_row("SELECT count(*) FROM runs", [], |r| r.get(0))
        .unwrap()
}

#[test]
fn a_closeout_rerun_by_a_new_version_is_recorded_and_says_so() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let db = d.join("l.db");
    let close = || d.run(&["closeout", plan, "--ledger", "l.db"]);
    assert!(close().status.code().unwrap() <= 1);
    let again = close();
    assert!(
        stdout(&again).contains("not recorded again"),
        "{}",
        stdout(&again)
    );
    // Five steps (align, calibrate, polarity, dipole, loop) and the sign chain they open
    // (docs/sign-chain.md).
    assert_eq!(count_runs(&db), 6);

    // The same six runs, as magproof 0.0.9 recorded them.
    let options = serde_json::json!({ "skip_bad_rows": false });
    assert_eq!(rewrite_as_old(&db, &options), 6);

    let out = close();
    let text = stdout(&out);
    assert_eq!(count_runs(&db), 12, "{text}");
    for (step, old, new) in [(1, 1, 7), (2, 2, 8), (3, 3, 9), (4, 4, 10), (5, 5, 11)] {
        assert!(
            text.contains(&format!("recorded as run #{new}")),
            "step {step}: {text}"
        );
        assert!(
            text.contains(&format!("(same inputs as run #{old} by magproof {OLD}")),
            "step {step}: {text}"
        );
    }
    assert!(!text.contains("not recorded again"), "{text}");

    // And this version's runs dedupe as before.
    let out = close();
    assert!(
        stdout(&out).matches("not recorded again").count() == 6,
        "{}",
        stdout(&out)
    );
    assert!(!stdout(&out).contains(OLD), "{}", stdout(&out));
    assert_eq!(count_runs(&db), 12);
}

#[test]
fn a_single_check_rerun_by_a_new_version_is_recorded_and_says_so() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let db = d.join("l.db");
    let args = [
        "calibrate",
        "tumble.csv",
        "--plan",
        plan,
        "--record",
        "--ledger",
        "l.db",
    ];
    let out = d.run(&args);
    assert_code(&out, 0);
    assert!(
        stderr(&out).contains("recorded as run #1"),
        "{}",
        stderr(&out)
    );

    // calibrate's options as recorded: the input flags and its own (docs/ledger.md).
    let options = serde_json::json!({
        "decimal_comma": false, "range_nt": null, "reference_nt": null, "robust": "Tukey",
        "skip_bad_rows": false, "unit": null,
    });
    assert_eq!(rewrite_as_old(&db, &options), 1);

    let out = d.run(&args);
    assert_code(&out, 0);
    let err = stderr(&out);
    assert!(err.contains("recorded as run #2"), "{err}");
    assert!(
        err.contains(&format!(
            "run #1 holds the same inputs and options analysed by magproof {OLD}"
        )),
        "{err}"
    );
    assert_eq!(count_runs(&db), 2);
    let out = d.run(&args);
    assert!(
        stderr(&out).contains("already recorded as run #2"),
        "{}",
        stderr(&out)
    );
}
