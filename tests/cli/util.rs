//! Helpers for the binary tests: a temporary folder per test and a runner.

#![allow(dead_code)]

use std::path::{Path, PathBuf};

use assert_cmd::Command;

/// A fresh temporary folder, removed when dropped.
pub struct TestDir {
    dir: tempfile::TempDir,
}

impl TestDir {
    /// Create one.
    pub fn new() -> Self {
        Self {
            dir: tempfile::tempdir().expect("create temp dir"),
        }
    }

    /// Its path.
    pub fn path(&self) -> &Path {
        self.dir.path()
    }

    /// Write `text` into `name` inside it and return the full path.
    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.dir.path().join(name);
        std::fs::write(&p, text).expect("write test file");
        p
    }

    /// `magproof` run in this folder, with an isolated ledger.
    pub fn magproof(&self) -> Command {
        let mut c = Command::cargo_bin("magproof").expect("binary built");
        c.current_dir(self.path())
            .env("MAGPROOF_LEDGER", self.path().join("ledger.db"));
        c
    }
}

/// Parse stdout as exactly one JSON value.
pub fn json_stdout(out: &std::process::Output) -> serde_json::Value {
    let text = String::from_utf8_lossy(&out.stdout);
    serde_json::from_str(&text)
        .unwrap_or_else(|e| panic!("stdout is not one JSON object: {e}\n{text}"))
}
