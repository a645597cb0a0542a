//! The ledger's SQLite schema, its version and the forward migrations between versions.
//!
//! The version lives in the database header (`PRAGMA user_version`); the header's
//! `application_id` marks the file as a magproof ledger. Each migration takes the schema
//! from version `n` to `n + 1`; a ledger of any older version is brought up to
//! [`CURRENT_VERSION`] in one write transaction when it is opened. A ledger written by a
//! newer magproof is refused, never rewritten.

use std::path::Path;

use rusqlite::{Connection, ErrorCode, TransactionBehavior};

use super::LedgerError;
use crate::log::Shown;

/// `application_id` written in every ledger's header: the bytes "MGPF".
pub const APPLICATION_ID: i32 = 0x4D47_5046;

/// Schema version this magproof reads and writes.
pub const CURRENT_VERSION: i64 = MIGRATIONS.len() as i64;

/// Migration `i` takes the schema from version `i` to `i + 1`.
///
/// Never edit a migration once released: add a new one.
pub(crate) const MIGRATIONS: [&str; 4] = [
    // v1: runs and the files each was computed from.
    "CREATE TABLE runs (
         id          INTEGER PRIMARY KEY,
         serial      TEXT NOT NULL,
         build       TEXT NOT NULL,
         kind        TEXT NOT NULL CHECK (kind IN ('calibrate', 'polarity', 'dipole')),
         recorded_at TEXT NOT NULL,
         input_key   TEXT NOT NULL,
         pass        INTEGER CHECK (pass IN (0, 1)),
         result      TEXT NOT NULL
     );
     CREATE TABLE inputs (
         run_id   INTEGER NOT NULL REFERENCES runs (id) ON DELETE CASCADE,
         position INTEGER NOT NULL,
         role     TEXT NOT NULL CHECK (role IN ('log', 'plan')),
         path     TEXT NOT NULL,
         sha256   TEXT NOT NULL CHECK (length(sha256) = 64),
         PRIMARY KEY (run_id, position)
     );",
    // v2: the magproof version that wrote each run (NULL for runs written by v1), and
    // indexes for the dedupe lookup and for history per serial.
    "ALTER TABLE runs ADD COLUMN tool_version TEXT;
     CREATE INDEX runs_by_identity ON runs (serial, build, kind, input_key);
     CREATE INDEX runs_by_serial ON runs (serial, id);",
    // v3: the kind is text checked in Rust (the registry of checks), not a CHECK list;
    // each run's quantities are stored beside it (back-filled from the JSON of older
    // runs by `backfill_quantities`). SQLite cannot drop a CHECK in place: the table is
    // rebuilt (foreign keys are off while this runs, see `prepare`).
    "CREATE TABLE runs_v3 (
         id           INTEGER PRIMARY KEY,
         serial       TEXT NOT NULL,
         build        TEXT NOT NULL,
         kind         TEXT NOT NULL,
         recorded_at  TEXT NOT NULL,
         input_key    TEXT NOT NULL,
         pass         INTEGER CHECK (pass IN (0, 1)),
         result       TEXT NOT NULL,
         tool_version TEXT
     );
     INSERT INTO runs_v3 (id, serial, build, kind, recorded_at, input_key, pass, result,
                          tool_version)
         SELECT id, serial, build, kind, recorded_at, input_key, pass, result, tool_version
         FROM runs;
     DROP TABLE runs;
     ALTER TABLE runs_v3 RENAME TO runs;
     CREATE INDEX runs_by_identity ON runs (serial, build, kind, input_key);
     CREATE INDEX runs_by_serial ON runs (serial, id);
     CREATE TABLE quantities (
         run_id INTEGER NOT NULL REFERENCES runs (id) ON DELETE CASCADE,
         name   TEXT NOT NULL,
         unit   TEXT NOT NULL,
         value  REAL,
         sigma  REAL,
         word   TEXT,
         PRIMARY KEY (run_id, name)
     );",
    // v4: the magnetometer each run read, by its name in the plan (NULL for runs before
    // several magnetometers, and for a plan's one unnamed magnetometer). The quantities
    // of a run with a named sensor carry the name (`hard_iron_x_nt@MAG-A`), so history
    // compares a sensor's calibrations with the same sensor's only.
    "ALTER TABLE runs ADD COLUMN sensor TEXT;",
];

/// Version whose migration adds the `quantities` table.
const QUANTITIES_VERSION: usize = 3;

/// Fill `quantities` for runs recorded before it existed, from their JSON results.
fn backfill_quantities(tx: &rusqlite::Transaction) -> rusqlite::Result<()> {
    let runs: Vec<(i64, String, String, Option<bool>)> = tx
        .prepare("SELECT id, kind, result, pass FROM runs ORDER BY id")?
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))?
        .collect::<Result<_, _>>()?;
    for (id, kind, result, pass) in runs {
        let json: serde_json::Value = serde_json::from_str(&result).unwrap_or_default();
        let pass = pass.map(|p| super::Quantity::pass(&kind, p));
        for q in super::legacy_quantities(&kind, &json)
            .iter()
            .chain(pass.as_ref())
        {
            super::quantity::insert(tx, id, q)?;
        }
    }
    Ok(())
}

/// How [`prepare`] treats a database with no schema at all.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum OnEmpty {
    /// Create the current schema (the file was just created for writing).
    Create,
    /// Refuse: a read must not turn an empty file into a ledger.
    Refuse,
}

/// What the header and the catalogue say about a database.
struct Header {
    application_id: i32,
    version: i64,
    objects: i64,
}

fn read_header(conn: &Connection, path: &Path) -> Result<Header, LedgerError> {
    let read = || -> rusqlite::Result<Header> {
        Ok(Header {
            application_id: conn.query_row("PRAGMA application_id", [], |r| r.get(0))?,
            version: conn.query_row("PRAGMA user_version", [], |r| r.get(0))?,
            objects: conn.query_row("SELECT count(*) FROM sqlite_master", [], |r| r.get(0))?,
        })
    };
    read().map_err(|e| classify(e, path))
}

/// Map a SQLite error to "not a ledger" when SQLite says the file is no database.
pub(crate) fn classify(e: rusqlite::Error, path: &Path) -> LedgerError {
    match e.sqlite_error_code() {
        Some(ErrorCode::NotADatabase) => LedgerError::NotALedger {
            path: Shown(path.to_path_buf()),
            reason: "the file is not an SQLite database".into(),
        },
        Some(ErrorCode::DatabaseCorrupt) => LedgerError::NotALedger {
            path: Shown(path.to_path_buf()),
            reason: "the SQLite file is damaged (database disk image is malformed)".into(),
        },
        _ => LedgerError::Database {
            path: Shown(path.to_path_buf()),
            source: e,
        },
    }
}

/// Check what the file holds and bring its schema to [`CURRENT_VERSION`].
///
/// A current ledger costs three reads and no lock. Otherwise the check is repeated
/// inside an immediate (write-locking) transaction, so two processes opening the same
/// old or new file at once migrate it exactly once.
pub(crate) fn prepare(
    conn: &mut Connection,
    path: &Path,
    on_empty: OnEmpty,
) -> Result<(), LedgerError> {
    let header = read_header(conn, path)?;
    if judge(&header, path, on_empty)? == Verdict::Current {
        return Ok(());
    }
    let db = |e| classify(e, path);
    // A table rebuild must not cascade into the tables that refer to it: foreign keys
    // are off for the migration (they cannot change inside a transaction) and back on
    // after it, whatever its outcome.
    conn.execute_batch("PRAGMA foreign_keys = OFF;")
        .map_err(db)?;
    let migrated = migrate(conn, path, on_empty);
    conn.execute_batch("PRAGMA foreign_keys = ON;")
        .map_err(db)?;
    migrated
}

fn migrate(conn: &mut Connection, path: &Path, on_empty: OnEmpty) -> Result<(), LedgerError> {
    let db = |e| classify(e, path);
    let tx = conn
        .transaction_with_behavior(TransactionBehavior::Immediate)
        .map_err(db)?;
    let header = read_header(&tx, path)?;
    if judge(&header, path, on_empty)? == Verdict::Current {
        return Ok(());
    }
    let from = usize::try_from(header.version).map_err(|_| LedgerError::NotALedger {
        path: Shown(path.to_path_buf()),
        reason: format!("negative schema version {}", header.version),
    })?;
    for sql in MIGRATIONS.iter().skip(from) {
        tx.execute_batch(sql).map_err(db)?;
    }
    if from > 0 && from < QUANTITIES_VERSION {
        backfill_quantities(&tx).map_err(db)?;
    }
    let broken: Option<i64> = tx
        .query_row("SELECT count(*) FROM pragma_foreign_key_check", [], |r| {
            r.get(0)
        })
        .map_err(db)?;
    if broken.unwrap_or(0) > 0 {
        return Err(LedgerError::NotALedger {
            path: Shown(path.to_path_buf()),
            reason: "the migration found rows whose run is missing (foreign key check)".into(),
        });
    }
    tx.execute_batch(&format!(
        "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = {CURRENT_VERSION};"
    ))
    .map_err(db)?;
    tx.commit().map_err(db)
}

#[derive(Debug, PartialEq, Eq)]
enum Verdict {
    Current,
    NeedsMigration,
}

fn judge(h: &Header, path: &Path, on_empty: OnEmpty) -> Result<Verdict, LedgerError> {
    let not_ledger = |reason: String| LedgerError::NotALedger {
        path: Shown(path.to_path_buf()),
        reason,
    };
    if h.objects == 0 && h.version == 0 {
        return match on_empty {
            OnEmpty::Create => Ok(Verdict::NeedsMigration),
            OnEmpty::Refuse => Err(not_ledger(
                "the database is empty (nothing recorded)".into(),
            )),
        };
    }
    if h.application_id != APPLICATION_ID {
        return Err(not_ledger(format!(
            "an SQLite database of some other program (application_id {:#010x}, expected {:#010x})",
            h.application_id, APPLICATION_ID
        )));
    }
    if h.version > CURRENT_VERSION {
        return Err(LedgerError::NewerSchema {
            path: Shown(path.to_path_buf()),
            found: h.version,
            supported: CURRENT_VERSION,
        });
    }
    if h.version == CURRENT_VERSION {
        Ok(Verdict::Current)
    } else {
        Ok(Verdict::NeedsMigration)
    }
}

/// Refuse, without changing anything, a file that is not a current ledger: for a
/// connection that may only read (an older schema is upgraded only by a writer).
pub(crate) fn check_readable(conn: &Connection, path: &Path) -> Result<(), LedgerError> {
    let header = read_header(conn, path)?;
    match judge(&header, path, OnEmpty::Refuse)? {
        Verdict::Current => Ok(()),
        Verdict::NeedsMigration => Err(LedgerError::NotALedger {
            path: Shown(path.to_path_buf()),
            reason: format!(
                "its schema (version {}) is older than this magproof's ({CURRENT_VERSION}) \
                 and the file cannot be written to upgrade it; open it once with write access",
                header.version
            ),
        }),
    }
}

/// Schema version stored in an open database (for tests).
#[cfg(test)]
pub(crate) fn stored_version(conn: &Connection) -> rusqlite::Result<i64> {
    conn.query_row("PRAGMA user_version", [], |r| r.get(0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::{Ledger, RunFilter};

    /// A ledger exactly as the first schema wrote it, with one run in it.
    fn write_v1(path: &Path) {
        let conn = Connection::open(path).unwrap();
        conn.execute_batch(MIGRATIONS[0]).unwrap();
        conn.execute_batch(&format!(
            "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = 1;
             INSERT INTO runs (serial, build, kind, recorded_at, input_key, pass, result)
             VALUES ('KST-002', 'B3', 'dipole', '2026-11-20T09:00:00.000Z',
                     '{key}', 1, '{{\"magnitude_am2\": 0.004, \"pass\": true}}');
             INSERT INTO inputs VALUES (1, 0, 'log', 'dipole.csv', '{key}');",
            key = "ab".repeat(32)
        ))
        .unwrap();
    }

    #[test]
    fn a_first_schema_ledger_migrates_to_current_and_keeps_its_runs() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.db");
        write_v1(&path);
        let ledger = Ledger::open_existing(&path).unwrap();
        assert_eq!(
            stored_version(ledger.connection()).unwrap(),
            CURRENT_VERSION
        );
        let runs = ledger.runs(&RunFilter::default()).unwrap();
        assert_eq!(runs.len(), 1);
        assert_eq!(runs[0].build, "B3");
        assert_eq!(runs[0].tool_version, None);
        assert_eq!(runs[0].pass, Some(true));
        assert_eq!(runs[0].inputs.len(), 1);
    }

    #[test]
    fn a_ledger_from_a_newer_magproof_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("new.db");
        drop(Ledger::open(&path).unwrap());
        let conn = Connection::open(&path).unwrap();
        conn.execute_batch(&format!("PRAGMA user_version = {}", CURRENT_VERSION + 1))
            .unwrap();
        drop(conn);
        let e = Ledger::open(&path).unwrap_err();
        assert!(matches!(e, LedgerError::NewerSchema { .. }), "{e}");
        assert_eq!(e.exit_code(), 2);
    }

    #[test]
    fn a_text_file_or_a_foreign_database_is_not_a_ledger() {
        let dir = tempfile::tempdir().unwrap();
        let text = dir.path().join("notes.db");
        std::fs::write(&text, "serial,build\nKST-002,B3\n".repeat(200)).unwrap();
        let e = Ledger::open(&text).unwrap_err();
        assert!(matches!(e, LedgerError::NotALedger { .. }), "{e}");

        let other = dir.path().join("other.db");
        Connection::open(&other)
            .unwrap()
            .execute_batch("CREATE TABLE t (x INTEGER);")
            .unwrap();
        let e = Ledger::open(&other).unwrap_err();
        assert!(e.to_string().contains("some other program"), "{e}");
        assert_eq!(e.exit_code(), 2);
    }

    #[test]
    fn reading_an_empty_database_is_refused_but_writing_creates_the_schema() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("empty.db");
        std::fs::write(&path, b"").unwrap();
        assert!(matches!(
            Ledger::open_existing(&path),
            Err(LedgerError::NotALedger { .. })
        ));
        let ledger = Ledger::open(&path).unwrap();
        assert_eq!(
            stored_version(ledger.connection()).unwrap(),
            CURRENT_VERSION
        );
    }
}
