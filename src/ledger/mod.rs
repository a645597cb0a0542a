//! The ledger: SQLite history of runs per serial number and build (`docs/ledger.md`).
//!
//! One file (`magproof.db` by default) holds every recorded run: serial, build, kind of
//! check, time (UTC), magproof version, SHA-256 of each input file, the JSON result, its
//! verdict and its quantities. [`history`] turns runs into the changes from one build to the next.
//!
//! Guarantees (see `docs/ledger.md`):
//! - every call of [`Ledger::record_runs`] is one transaction: all its runs or none;
//! - the file is in WAL mode with a 30 s busy timeout, so two processes writing at once
//!   both succeed (the second waits for the first's commit);
//! - `synchronous = FULL`: a committed run survives the process being killed (and power
//!   loss on a disk that honours flushes);
//! - the same inputs, analysed with the same options by the same magproof version,
//!   recorded twice for the same serial, build and kind are one run
//!   ([`Recorded::AlreadyThere`]);
//! - the schema carries a version and migrates forward on open; a newer one is refused.

mod compare;
mod error;
pub mod export;
mod files;
pub mod history;
mod quantity;
mod record;
mod schema;
pub mod tracks;
mod versions;

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use rusqlite::{params, Connection, ErrorCode, OpenFlags, OptionalExtension, TransactionBehavior};

use crate::check::{CheckKind, CheckResult};
use crate::log::{Plan, Shown};

pub use error::LedgerError;
use files::{refuse_stale_side_files, uri_path};
pub use files::{remove_with_side_files, side_files};
pub use history::{changes, group_by_build, BuildRuns, Change, ChangeRules, Flag, SerialRuns};
pub use quantity::{legacy_quantities, Quantity, QuantityValue};
pub use record::{InputFile, InputRole, NewRun, Recorded, Run, RunFilter, RunId};
pub use schema::{APPLICATION_ID, CURRENT_VERSION};
pub use versions::{record_check_noting_versions, OtherVersion};

/// How long a writer waits for another process's transaction before giving up.
pub const BUSY_TIMEOUT: Duration = Duration::from_secs(30);

/// Whether SQLite said another connection holds a lock (SQLITE_BUSY or SQLITE_LOCKED,
/// any extended code).
fn is_busy(e: &LedgerError) -> bool {
    let source = match e {
        LedgerError::Database { source, .. } | LedgerError::CannotOpen { source, .. } => source,
        _ => return false,
    };
    matches!(
        source.sqlite_error_code(),
        Some(ErrorCode::DatabaseBusy | ErrorCode::DatabaseLocked)
    )
}

/// Run `attempt` again, with growing pauses, while it fails because the file is busy,
/// until [`BUSY_TIMEOUT`] has passed; then the last error stands.
fn retry_busy<T>(mut attempt: impl FnMut() -> Result<T, LedgerError>) -> Result<T, LedgerError> {
    let start = Instant::now();
    // A per-process offset keeps two retrying processes from staying in step.
    let offset = Duration::from_micros(u64::from(std::process::id() % 13) * 150);
    let mut pause = Duration::from_millis(1);
    loop {
        match attempt() {
            Err(e) if is_busy(&e) && start.elapsed() < BUSY_TIMEOUT => {
                std::thread::sleep(pause + offset);
                pause = (pause * 2).min(Duration::from_millis(64));
            }
            other => return other,
        }
    }
}

/// An open ledger file.
#[derive(Debug)]
pub struct Ledger {
    conn: Connection,
    path: PathBuf,
}

impl Ledger {
    /// Open a ledger for writing, creating the file (not its folder) if absent.
    /// Migrates an older schema to [`CURRENT_VERSION`].
    pub fn open(path: &Path) -> Result<Ledger, LedgerError> {
        let flags = OpenFlags::SQLITE_OPEN_READ_WRITE
            | OpenFlags::SQLITE_OPEN_CREATE
            | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        if !path.exists() {
            refuse_stale_side_files(path)?;
            // Failing here is not final: opening below reports the cause by name.
            let _ = Self::create_whole(path, flags);
        }
        Self::open_with(path, flags, schema::OnEmpty::Create)
    }

    /// Build a new ledger (schema and WAL journaling) in a private file beside `path`
    /// and link it into place only if `path` is still absent. Two processes creating the
    /// same ledger at once then never meet a half-made file or a rollback-journal phase,
    /// where SQLite can answer "database is locked" without waiting.
    fn create_whole(path: &Path, flags: OpenFlags) -> Result<(), LedgerError> {
        let name = path.file_name().map(|n| n.to_string_lossy().into_owned());
        let tmp = path.with_file_name(format!(
            ".{}.{}.new",
            name.unwrap_or_else(|| "ledger".into()),
            std::process::id()
        ));
        // The private name is this process's; anything under it is a dead process's.
        let _ = remove_with_side_files(&tmp);
        let made = Self::open_once(&tmp, flags, schema::OnEmpty::Create).map(drop);
        let linked = made.and_then(|()| match std::fs::hard_link(&tmp, path) {
            Ok(()) => Ok(()),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Ok(()),
            Err(e) => Err(LedgerError::NotALedger {
                path: Shown(path.to_path_buf()),
                reason: format!("cannot link the new ledger into place: {e}"),
            }),
        });
        let _ = remove_with_side_files(&tmp);
        linked
    }

    /// Open an existing ledger for reading: fails with [`LedgerError::Missing`] rather
    /// than create a file, and with [`LedgerError::NotALedger`] on an empty database.
    /// An older schema is still migrated in place (a forward migration only adds).
    pub fn open_existing(path: &Path) -> Result<Ledger, LedgerError> {
        if !path.exists() {
            return Err(LedgerError::Missing {
                path: Shown(path.to_path_buf()),
            });
        }
        let flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        Self::open_with(path, flags, schema::OnEmpty::Refuse)
    }

    /// Open an existing ledger to read it, also when the file (or its folder) may only
    /// be read: as [`Ledger::open_existing`] when the file can be written, else through
    /// a read-only connection that changes nothing in the file or beside it. When both
    /// fail, the first error stands.
    pub fn open_for_reading(path: &Path) -> Result<Ledger, LedgerError> {
        match Self::open_existing(path) {
            Ok(l) => Ok(l),
            Err(first) if path.exists() => Self::open_read_only(path).map_err(|_| first),
            Err(first) => Err(first),
        }
    }

    /// Open a current ledger through a read-only connection. When SQLite cannot make
    /// the shared-memory index beside it (a folder the user may not write), the file is
    /// opened as immutable: read as it is on disk, committed runs only.
    pub fn open_read_only(path: &Path) -> Result<Ledger, LedgerError> {
        let flags = OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let attempt = |conn: Connection| -> Result<Ledger, LedgerError> {
            schema::check_readable(&conn, path)?;
            Ok(Ledger {
                conn,
                path: path.to_path_buf(),
            })
        };
        let cannot_open = |source| LedgerError::CannotOpen {
            path: Shown(path.to_path_buf()),
            source,
        };
        let plain = Connection::open_with_flags(path, flags).map_err(cannot_open);
        match plain.and_then(attempt) {
            Ok(l) => Ok(l),
            Err(first) => {
                let abs = path.canonicalize().map_err(|_| first)?;
                let uri = format!("file:{}?immutable=1", uri_path(&abs));
                let conn = Connection::open_with_flags(uri, flags | OpenFlags::SQLITE_OPEN_URI)
                    .map_err(cannot_open)?;
                attempt(conn)
            }
        }
    }

    fn open_with(
        path: &Path,
        flags: OpenFlags,
        on_empty: schema::OnEmpty,
    ) -> Result<Ledger, LedgerError> {
        // SQLite does not call its busy handler in every case: taking the write lock
        // for the journal-mode switch or the schema creation while another process is
        // creating, closing (checkpoint) or upgrading a lock on the same new file can
        // fail with SQLITE_BUSY at once. Each attempt starts on a fresh connection.
        retry_busy(|| Self::open_once(path, flags, on_empty))
    }

    fn open_once(
        path: &Path,
        flags: OpenFlags,
        on_empty: schema::OnEmpty,
    ) -> Result<Ledger, LedgerError> {
        let shown = || Shown(path.to_path_buf());
        let mut conn =
            Connection::open_with_flags(path, flags).map_err(|source| LedgerError::CannotOpen {
                path: shown(),
                source,
            })?;
        conn.busy_timeout(BUSY_TIMEOUT)
            .map_err(|e| schema::classify(e, path))?;
        // Refuse a foreign file before changing anything in it.
        schema::prepare(&mut conn, path, on_empty)?;
        let mode: String = conn
            .pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0))
            .map_err(|e| schema::classify(e, path))?;
        if !mode.eq_ignore_ascii_case("wal") {
            return Err(LedgerError::NotALedger {
                path: shown(),
                reason: format!("cannot switch the file to WAL journaling (got {mode})"),
            });
        }
        conn.execute_batch("PRAGMA synchronous = FULL; PRAGMA foreign_keys = ON;")
            .map_err(|e| schema::classify(e, path))?;
        Ok(Ledger {
            conn,
            path: path.to_path_buf(),
        })
    }

    /// The ledger's file.
    pub fn path(&self) -> &Path {
        &self.path
    }

    #[cfg(test)]
    pub(crate) fn connection(&self) -> &Connection {
        &self.conn
    }

    fn db(&self) -> impl Fn(rusqlite::Error) -> LedgerError + '_ {
        move |source| LedgerError::Database {
            path: Shown(self.path.clone()),
            source,
        }
    }

    /// Record a set of runs (e.g. every step of a closeout) in ONE transaction, all
    /// stamped with the same `recorded_at` (now, UTC) and [`crate::VERSION`].
    ///
    /// Dedupe: a run whose serial, build, kind, input hashes (SHA-256 of every input
    /// file, paths ignored), analysis options and tool version equal a run already in the ledger — or earlier in the same
    /// slice — is not written again; its entry in the answer is
    /// [`Recorded::AlreadyThere`] with the existing id (the first recording's result,
    /// time and version are kept). The answer has one entry per given run, in order.
    ///
    /// Every run is validated before anything is written; on any error nothing is.
    pub fn record_runs(&mut self, runs: &[NewRun]) -> Result<Vec<Recorded>, LedgerError> {
        for r in runs {
            r.validate()?;
        }
        let recorded_at = utc_now_iso8601();
        // A busy failure rolls the whole transaction back, so trying again is safe.
        retry_busy(|| self.record_once(runs, &recorded_at))
    }

    fn record_once(
        &mut self,
        runs: &[NewRun],
        recorded_at: &str,
    ) -> Result<Vec<Recorded>, LedgerError> {
        let path = self.path.clone();
        let db = |source| LedgerError::Database {
            path: Shown(path.clone()),
            source,
        };
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(db)?;
        let mut out = Vec::with_capacity(runs.len());
        for run in runs {
            let key = run.input_key();
            let existing: Option<i64> = tx
                .query_row(
                    "SELECT id FROM runs WHERE serial = ?1 AND build = ?2 AND kind = ?3
                     AND input_key = ?4 ORDER BY id LIMIT 1",
                    params![run.serial, run.build, run.kind.as_str(), key],
                    |r| r.get(0),
                )
                .optional()
                .map_err(db)?;
            if let Some(id) = existing {
                out.push(Recorded::AlreadyThere(RunId(id)));
                continue;
            }
            let result_text = serde_json::to_string(&run.result).map_err(|e| {
                LedgerError::InvalidRun(format!("result cannot be written as JSON: {e}"))
            })?;
            tx.execute(
                "INSERT INTO runs (serial, build, kind, recorded_at, input_key, pass, result,
                                   tool_version, sensor)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)",
                params![
                    run.serial,
                    run.build,
                    run.kind.as_str(),
                    recorded_at,
                    key,
                    run.pass(),
                    result_text,
                    crate::VERSION,
                    run.sensor
                ],
            )
            .map_err(db)?;
            let id = tx.last_insert_rowid();
            for (pos, input) in run.inputs.iter().enumerate() {
                tx.execute(
                    "INSERT INTO inputs (run_id, position, role, path, sha256)
                     VALUES (?1, ?2, ?3, ?4, ?5)",
                    params![
                        id,
                        pos as i64,
                        input.role.as_str(),
                        input.path.to_string_lossy(),
                        input.sha256
                    ],
                )
                .map_err(db)?;
            }
            let pass = run.pass().map(|p| Quantity::pass(run.kind.as_str(), p));
            for q in run.quantities.iter().chain(pass.as_ref()) {
                quantity::insert(&tx, id, q).map_err(db)?;
            }
            out.push(Recorded::New(RunId(id)));
        }
        tx.commit().map_err(db)?;
        Ok(out)
    }

    /// Runs matching the filter, in the order they were recorded (by id). Three queries
    /// whatever the number of runs (runs, their inputs, their quantities), so time and
    /// memory grow linearly with the runs read.
    pub fn runs(&self, filter: &RunFilter) -> Result<Vec<Run>, LedgerError> {
        let db = self.db();
        let (serial, kind) = (filter.serial.as_deref(), filter.kind.map(CheckKind::as_str));
        let bad = |id: i64, problem: String| LedgerError::BadRow {
            path: Shown(self.path.clone()),
            id,
            problem,
        };
        let mut stmt = self
            .conn
            .prepare(
                "SELECT id, serial, build, kind, recorded_at, tool_version, pass, result
                 FROM runs
                 WHERE (?1 IS NULL OR serial = ?1) AND (?2 IS NULL OR kind = ?2)
                 ORDER BY id",
            )
            .map_err(&db)?;
        let mut runs: Vec<Run> = Vec::new();
        let mut rows = stmt.query(params![serial, kind]).map_err(&db)?;
        while let Some(r) = rows.next().map_err(&db)? {
            let id: i64 = r.get(0).map_err(&db)?;
            let text: String = r.get(7).map_err(&db)?;
            let result = serde_json::from_str(&text)
                .map_err(|e| bad(id, format!("stored result is not JSON: {e}")))?;
            runs.push(Run {
                id: RunId(id),
                serial: r.get(1).map_err(&db)?,
                build: r.get(2).map_err(&db)?,
                kind: r.get(3).map_err(&db)?,
                recorded_at: r.get(4).map_err(&db)?,
                tool_version: r.get(5).map_err(&db)?,
                pass: r.get(6).map_err(&db)?,
                result,
                inputs: Vec::new(),
                quantities: Vec::new(),
            });
        }
        // Runs are sorted by id, and so are the inputs and quantities below: each is
        // placed by a binary search.
        let index = |runs: &[Run], id: i64| runs.binary_search_by_key(&RunId(id), |r| r.id).ok();
        let mut inputs = self
            .conn
            .prepare(
                "SELECT i.run_id, i.role, i.path, i.sha256
                 FROM inputs i JOIN runs r ON r.id = i.run_id
                 WHERE (?1 IS NULL OR r.serial = ?1) AND (?2 IS NULL OR r.kind = ?2)
                 ORDER BY i.run_id, i.position",
            )
            .map_err(&db)?;
        let mut rows = inputs.query(params![serial, kind]).map_err(&db)?;
        while let Some(r) = rows.next().map_err(&db)? {
            let id: i64 = r.get(0).map_err(&db)?;
            let role: String = r.get(1).map_err(&db)?;
            let role = InputRole::parse(&role)
                .ok_or_else(|| bad(id, format!("unknown input role {role:?}")))?;
            let path: String = r.get(2).map_err(&db)?;
            let input = InputFile {
                role,
                path: path.into(),
                sha256: r.get(3).map_err(&db)?,
            };
            if let Some(k) = index(&runs, id) {
                runs[k].inputs.push(input);
            }
        }
        for (id, q) in quantity::read_all(&self.conn, serial, kind).map_err(&db)? {
            if let Some(k) = index(&runs, id) {
                runs[k].quantities.push(q);
            }
        }
        Ok(runs)
    }

    /// The serial numbers in the ledger, in order of their first run (one query; no
    /// run is read).
    pub fn serials(&self) -> Result<Vec<String>, LedgerError> {
        let mut stmt = self
            .conn
            .prepare("SELECT serial FROM runs GROUP BY serial ORDER BY min(id)")
            .map_err(self.db())?;
        let rows = stmt
            .query_map([], |r| r.get(0))
            .map_err(self.db())?
            .collect::<Result<Vec<String>, _>>()
            .map_err(self.db())?;
        Ok(rows)
    }

    /// Run SQLite's own consistency check; `Ok(())` when it answers "ok".
    pub fn check_integrity(&self) -> Result<(), LedgerError> {
        let answer: String = self
            .conn
            .query_row("PRAGMA integrity_check", [], |r| r.get(0))
            .map_err(self.db())?;
        if answer == "ok" {
            Ok(())
        } else {
            Err(LedgerError::NotALedger {
                path: Shown(self.path.clone()),
                reason: format!("integrity check failed: {answer}"),
            })
        }
    }
}

/// Record one check's result for `--record`: open (or create) the ledger at
/// `ledger_path`, file the run under the plan's `[article]` serial and build with the log
/// and the plan as inputs, in one transaction. `log` is the log's path and the hash of
/// the bytes analysed; `options` the analysis options that changed the result.
///
/// Fails with [`LedgerError::NoArticle`] (before touching the ledger) when the plan has
/// no `[article]`.
pub fn record_check(
    ledger_path: &Path,
    plan: &Plan,
    result: &dyn CheckResult,
    log: (&Path, &str),
    options: serde_json::Value,
) -> Result<Recorded, LedgerError> {
    let run = NewRun::from_result(plan, result, log, options)?;
    let mut ledger = Ledger::open(ledger_path)?;
    let recorded = ledger.record_runs(std::slice::from_ref(&run))?;
    recorded
        .first()
        .copied()
        .ok_or_else(|| LedgerError::InvalidRun("the ledger answered no id for the run".into()))
}

/// Now, UTC, as `YYYY-MM-DDTHH:MM:SS.mmmZ`.
fn utc_now_iso8601() -> String {
    let now = time::OffsetDateTime::now_utc();
    let fmt = time::macros::format_description!(
        "[year]-[month]-[day]T[hour]:[minute]:[second].[subsecond digits:3]Z"
    );
    now.format(&fmt)
        .unwrap_or_else(|_| now.unix_timestamp().to_string())
}

#[cfg(test)]
mod tests;
