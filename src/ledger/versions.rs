//! Runs of the same inputs by another magproof version. The tool version is part of the
//! dedupe key ([`NewRun`]'s key: inputs, options, version), so a re-run by a new version
//! is recorded as a new run; these helpers find the earlier version's run of the same
//! inputs and options, so that the output can say why the run was recorded anew.

use std::path::Path;

use rusqlite::{params, OptionalExtension};

use super::{Ledger, LedgerError, NewRun, Recorded, RunId};
use crate::check::CheckResult;
use crate::log::{Plan, Shown};

/// A run of the same serial, build, kind, inputs and options recorded by another
/// version of magproof.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OtherVersion {
    /// The earlier run.
    pub id: RunId,
    /// The magproof version that recorded it.
    pub version: String,
}

impl std::fmt::Display for OtherVersion {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "run {} holds the same inputs and options analysed by magproof {}; an analysis \
             by another version is a new run",
            self.id,
            crate::text::printable(&self.version)
        )
    }
}

impl Ledger {
    /// Runs of `run`'s serial, build, kind, inputs and options recorded by a magproof
    /// other than this one (runs of ledger schema 1, with no version, are not found:
    /// their key was made without one). Oldest first.
    pub fn same_inputs_by_other_versions(
        &self,
        run: &NewRun,
    ) -> Result<Vec<OtherVersion>, LedgerError> {
        let db = |source| LedgerError::Database {
            path: Shown(self.path.clone()),
            source,
        };
        let mut versions = self
            .conn
            .prepare(
                "SELECT DISTINCT tool_version FROM runs WHERE serial = ?1 AND build = ?2
                 AND kind = ?3 AND tool_version IS NOT NULL AND tool_version <> ?4",
            )
            .map_err(db)?;
        let versions: Vec<String> = versions
            .query_map(
                params![run.serial, run.build, run.kind.as_str(), crate::VERSION],
                |r| r.get(0),
            )
            .map_err(db)?
            .collect::<Result<_, _>>()
            .map_err(db)?;
        let mut out = Vec::new();
        for version in versions {
            let id: Option<i64> = self
                .conn
                .query_row(
                    "SELECT id FROM runs WHERE serial = ?1 AND build = ?2 AND kind = ?3
                     AND tool_version = ?4 AND input_key = ?5 ORDER BY id LIMIT 1",
                    params![
                        run.serial,
                        run.build,
                        run.kind.as_str(),
                        version,
                        run.input_key_for(&version)
                    ],
                    |r| r.get(0),
                )
                .optional()
                .map_err(db)?;
            if let Some(id) = id {
                out.push(OtherVersion {
                    id: RunId(id),
                    version,
                });
            }
        }
        out.sort_by_key(|o| o.id);
        Ok(out)
    }
}

/// [`super::record_check`], also answering the runs of the same inputs and options by
/// other versions when the run was recorded as new (empty otherwise).
pub fn record_check_noting_versions(
    ledger_path: &Path,
    plan: &Plan,
    result: &dyn CheckResult,
    log: (&Path, &str),
    options: serde_json::Value,
) -> Result<(Recorded, Vec<OtherVersion>), LedgerError> {
    let run = NewRun::from_result(plan, result, log, options)?;
    let mut ledger = Ledger::open(ledger_path)?;
    let recorded = ledger
        .record_runs(std::slice::from_ref(&run))?
        .first()
        .copied()
        .ok_or_else(|| LedgerError::InvalidRun("the ledger answered no id for the run".into()))?;
    let others = match recorded {
        Recorded::New(_) => ledger.same_inputs_by_other_versions(&run)?,
        Recorded::AlreadyThere(_) => Vec::new(),
    };
    Ok((recorded, others))
}
