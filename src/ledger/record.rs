//! What a ledger record holds: a run to write ([`NewRun`]), a run read back ([`Run`]),
//! the input files a run was computed from ([`InputFile`], hashed with SHA-256) and the
//! filter used to read runs.

use std::fmt;
use std::io::Read;
use std::path::{Path, PathBuf};

use serde::Serialize;
use sha2::{Digest, Sha256};

use super::LedgerError;
use super::Quantity;
use crate::check::{CheckKind, CheckResult};
use crate::log::{Plan, Shown};

/// Identity of a run in one ledger (SQLite rowid). Larger ids were recorded later.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(transparent)]
pub struct RunId(pub i64);

impl fmt::Display for RunId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "#{}", self.0)
    }
}

/// What happened to one [`NewRun`] given to [`Ledger::record_runs`](super::Ledger::record_runs).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Recorded {
    /// Written as a new run with this id.
    New(RunId),
    /// Not written: a run with the same serial, build, kind and input hashes is already in
    /// the ledger under this id (the dedupe rule: same inputs are one run).
    AlreadyThere(RunId),
}

impl Recorded {
    /// The run's id, new or existing.
    pub fn id(self) -> RunId {
        match self {
            Recorded::New(id) | Recorded::AlreadyThere(id) => id,
        }
    }
}

/// What an input file was to the run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum InputRole {
    /// A sweep log (CSV).
    Log,
    /// The test plan (TOML).
    Plan,
}

impl InputRole {
    /// Name as stored in the ledger.
    pub fn as_str(self) -> &'static str {
        match self {
            InputRole::Log => "log",
            InputRole::Plan => "plan",
        }
    }

    pub(crate) fn parse(s: &str) -> Option<Self> {
        match s {
            "log" => Some(InputRole::Log),
            "plan" => Some(InputRole::Plan),
            _ => None,
        }
    }
}

/// One file a run was computed from, identified by the SHA-256 of its bytes.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct InputFile {
    /// Log or plan.
    pub role: InputRole,
    /// Path as given when recorded (informative only: not part of the dedupe key).
    pub path: PathBuf,
    /// SHA-256 of the file's bytes, 64 lower-case hex digits.
    pub sha256: String,
}

impl InputFile {
    /// An input whose bytes were hashed as they were read (the log by the reader, the
    /// plan from the text parsed).
    pub fn hashed(role: InputRole, path: &Path, sha256: &str) -> Self {
        InputFile {
            role,
            path: path.to_path_buf(),
            sha256: sha256.to_string(),
        }
    }

    /// Hash a file on disk (read in 64 KiB blocks, so a large log costs no memory).
    pub fn hash(role: InputRole, path: &Path) -> Result<Self, LedgerError> {
        let input = |source| LedgerError::Input {
            path: Shown(path.to_path_buf()),
            source,
        };
        let mut file = std::fs::File::open(path).map_err(input)?;
        let mut hasher = Sha256::new();
        let mut buf = vec![0u8; 64 * 1024];
        loop {
            let n = file.read(&mut buf).map_err(input)?;
            if n == 0 {
                break;
            }
            hasher.update(&buf[..n]);
        }
        Ok(InputFile {
            role,
            path: path.to_path_buf(),
            sha256: hex(&hasher.finalize()),
        })
    }
}

pub(crate) fn hex(bytes: &[u8]) -> String {
    use std::fmt::Write;
    let mut s = String::with_capacity(bytes.len() * 2);
    for b in bytes {
        let _ = write!(s, "{b:02x}");
    }
    s
}

/// A run to record: one check's result for one serial number and build.
#[derive(Debug, Clone)]
pub struct NewRun {
    /// Serial number of the article (plan `[article] serial`).
    pub serial: String,
    /// Build label (plan `[article] build`).
    pub build: String,
    /// Which check produced the result.
    pub kind: CheckKind,
    /// Files the result was computed from (at least one).
    pub inputs: Vec<InputFile>,
    /// The check's JSON result: an object; its `pass` (if a bool) is the verdict.
    pub result: serde_json::Value,
    /// The numbers and verdicts history compares (the result's own list; the ledger
    /// adds `<kind>_pass`).
    pub quantities: Vec<Quantity>,
    /// The analysis options that change the result (a JSON object; `{}` when there are
    /// none). Part of the dedupe key, with the tool version.
    pub options: serde_json::Value,
    /// The magnetometer the run read, by its name in the plan (`None`: the plan's one
    /// unnamed magnetometer, or a probe).
    pub sensor: Option<String>,
}

impl NewRun {
    /// A run for a check's result under a plan: serial and build from the plan's
    /// `[article]`, inputs the log (with `log_sha256`, the hash of the bytes the reader
    /// analysed) and the plan (with the hash of the text parsed), the result's JSON and
    /// quantities, and the analysis `options` that changed the result.
    ///
    /// Fails with [`LedgerError::NoArticle`] when the plan has no `[article]`.
    pub fn from_result(
        plan: &Plan,
        result: &dyn CheckResult,
        log: (&Path, &str),
        options: serde_json::Value,
    ) -> Result<Self, LedgerError> {
        let (serial, build) = match result.ledger_identity() {
            Some(id) => id,
            None => plan
                .article
                .as_ref()
                .map(|a| (a.serial.clone(), a.build.clone()))
                .ok_or_else(|| LedgerError::NoArticle {
                    plan: Shown(plan.path.clone()),
                })?,
        };
        let json = result
            .json()
            .map_err(|e| LedgerError::InvalidRun(format!("result is not JSON: {e}")))?;
        let sensor = plan.sensor_name().map(String::from);
        let mut quantities = result.quantities();
        let mut options = options;
        if let Some(name) = &sensor {
            // Like with like: a named sensor's quantities compare with its own only, and
            // the same log read for another sensor is another run.
            super::tracks::tag_quantities(&mut quantities, name);
            if let Some(o) = options.as_object_mut() {
                o.insert("sensor".into(), serde_json::json!(name));
            }
        }
        Ok(NewRun {
            serial,
            build,
            kind: result.kind(),
            inputs: vec![
                InputFile::hashed(InputRole::Log, log.0, log.1),
                InputFile::hashed(InputRole::Plan, &plan.path, &plan.sha256),
            ],
            result: json,
            quantities,
            options,
            sensor,
        })
    }

    /// A run from a result already in JSON (a result of one of the first kinds, as
    /// older ledgers and imports hold them): like [`NewRun::from_result`], with the
    /// quantities read from the JSON keys ([`super::legacy_quantities`]).
    pub fn from_plan(
        plan: &Plan,
        kind: CheckKind,
        log: &Path,
        result: serde_json::Value,
    ) -> Result<Self, LedgerError> {
        let article = plan
            .article
            .as_ref()
            .ok_or_else(|| LedgerError::NoArticle {
                plan: Shown(plan.path.clone()),
            })?;
        Ok(NewRun {
            serial: article.serial.clone(),
            build: article.build.clone(),
            kind,
            inputs: vec![
                InputFile::hash(InputRole::Log, log)?,
                InputFile::hash(InputRole::Plan, &plan.path)?,
            ],
            quantities: super::legacy_quantities(kind.as_str(), &result),
            result,
            options: serde_json::json!({}),
            sensor: None,
        })
    }

    /// The verdict carried by the result (`pass`), if any.
    pub fn pass(&self) -> Option<bool> {
        self.result.get("pass").and_then(serde_json::Value::as_bool)
    }

    /// Refuse what the ledger cannot file: empty identity, no inputs, a result that is
    /// not a JSON object, a hash that is not SHA-256 hex.
    pub(crate) fn validate(&self) -> Result<(), LedgerError> {
        let bad = |m: String| Err(LedgerError::InvalidRun(m));
        if self.serial.trim().is_empty() || self.build.trim().is_empty() {
            return bad(format!(
                "serial {:?} and build {:?} must not be empty",
                self.serial, self.build
            ));
        }
        if self.inputs.is_empty() {
            return bad(format!(
                "{} {} {}: no input files",
                self.serial,
                self.build,
                self.kind.as_str()
            ));
        }
        if !self.result.is_object() {
            return bad(format!(
                "{} {} {}: the result is not a JSON object",
                self.serial,
                self.build,
                self.kind.as_str()
            ));
        }
        for i in &self.inputs {
            let ok = i.sha256.len() == 64
                && i.sha256
                    .bytes()
                    .all(|b| b.is_ascii_hexdigit() && !b.is_ascii_uppercase());
            if !ok {
                return bad(format!(
                    "{}: {:?} is not a SHA-256 hex digest",
                    i.path.display(),
                    i.sha256
                ));
            }
        }
        Ok(())
    }

    /// Dedupe key: SHA-256 over the sorted (role, hash) pairs of the inputs, the
    /// analysis options (as canonical JSON: object keys sorted) and the tool version.
    /// Paths are left out, so a moved or renamed copy of the same files is the same run;
    /// a re-run with other options or by another version of magproof is a new run.
    pub(crate) fn input_key(&self) -> String {
        self.input_key_for(crate::VERSION)
    }

    /// The dedupe key this run would have had if recorded by magproof `version`.
    pub(crate) fn input_key_for(&self, version: &str) -> String {
        let mut pairs: Vec<(InputRole, &str)> = self
            .inputs
            .iter()
            .map(|i| (i.role, i.sha256.as_str()))
            .collect();
        pairs.sort_unstable();
        let mut hasher = Sha256::new();
        for (role, sha) in pairs {
            hasher.update(role.as_str().as_bytes());
            hasher.update(b"\0");
            hasher.update(sha.as_bytes());
            hasher.update(b"\n");
        }
        hasher.update(b"options\0");
        hasher.update(self.options.to_string().as_bytes());
        hasher.update(b"\nversion\0");
        hasher.update(version.as_bytes());
        hex(&hasher.finalize())
    }
}

/// A run read back from the ledger.
#[derive(Debug, Clone, Serialize)]
pub struct Run {
    /// Ledger id; larger ids were recorded later.
    pub id: RunId,
    /// Serial number of the article.
    pub serial: String,
    /// Build label.
    pub build: String,
    /// Which check, by its stored name (a kind this version does not know is kept as
    /// text: its quantities still compare).
    pub kind: String,
    /// When it was recorded, UTC, ISO-8601 with milliseconds (`2026-11-20T09:14:03.250Z`).
    pub recorded_at: String,
    /// magproof version that wrote it; `None` for runs written by schema v1.
    pub tool_version: Option<String>,
    /// The verdict (`pass` of the result), if the result had one.
    pub pass: Option<bool>,
    /// The JSON result as recorded.
    pub result: serde_json::Value,
    /// The files it was computed from.
    pub inputs: Vec<InputFile>,
    /// The numbers and verdicts recorded with it, `<kind>_pass` included.
    pub quantities: Vec<Quantity>,
}

/// Which runs to read; `None` fields match everything.
#[derive(Debug, Clone, Default)]
pub struct RunFilter {
    /// Only this serial number (exact match).
    pub serial: Option<String>,
    /// Only this kind of check.
    pub kind: Option<CheckKind>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn file_hash_matches_the_published_sha256_test_vector() {
        // FIPS 180-2, appendix B.1: SHA-256("abc").
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("abc.txt");
        std::fs::write(&p, b"abc").unwrap();
        let f = InputFile::hash(InputRole::Log, &p).unwrap();
        assert_eq!(
            f.sha256,
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn input_key_ignores_paths_and_order_but_not_roles_or_bytes() {
        let f = |role, path: &str, c: char| InputFile {
            role,
            path: path.into(),
            sha256: c.to_string().repeat(64),
        };
        let run = |inputs| NewRun {
            serial: "S".into(),
            build: "B".into(),
            kind: crate::check::dipole::seam::KIND,
            inputs,
            result: serde_json::json!({}),
            quantities: vec![],
            options: serde_json::json!({}),
            sensor: None,
        };
        let a = run(vec![
            f(InputRole::Log, "a.csv", 'a'),
            f(InputRole::Plan, "p.toml", 'b'),
        ]);
        let b = run(vec![
            f(InputRole::Plan, "x/p.toml", 'b'),
            f(InputRole::Log, "y.csv", 'a'),
        ]);
        let c = run(vec![
            f(InputRole::Log, "a.csv", 'b'),
            f(InputRole::Plan, "p.toml", 'a'),
        ]);
        let d = run(vec![
            f(InputRole::Log, "a.csv", 'a'),
            f(InputRole::Plan, "p.toml", 'c'),
        ]);
        assert_eq!(a.input_key(), b.input_key());
        assert_ne!(a.input_key(), c.input_key());
        assert_ne!(a.input_key(), d.input_key());
        // Options that change the result are part of the key.
        let mut e = a.clone();
        e.options = serde_json::json!({"reference_nt": 48000.0});
        assert_ne!(a.input_key(), e.input_key());
    }

    #[test]
    fn a_run_without_inputs_or_with_a_non_object_result_is_refused() {
        let mut r = NewRun {
            serial: "S".into(),
            build: "B".into(),
            kind: crate::check::calibrate::seam::KIND,
            inputs: vec![],
            result: serde_json::json!({"pass": true}),
            quantities: vec![],
            options: serde_json::json!({}),
            sensor: None,
        };
        assert!(r.validate().is_err());
        r.inputs.push(InputFile {
            role: InputRole::Log,
            path: "l.csv".into(),
            sha256: "0".repeat(64),
        });
        assert!(r.validate().is_ok());
        r.result = serde_json::json!([1, 2]);
        assert!(r.validate().is_err());
    }
}
