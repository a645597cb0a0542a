//! Helpers for the binary-driving tests: a temporary folder per test and a way to run
//! `magproof` in it.

#![allow(dead_code)]

use std::path::{Path, PathBuf};

use assert_cmd::Command;

/// A temporary folder that lives as long as the test.
pub struct TestDir {
    dir: tempfile::TempDir,
}

impl TestDir {
    /// A fresh, empty folder.
    pub fn new() -> Self {
        TestDir {
            dir: tempfile::tempdir().expect("create a temporary folder"),
        }
    }

    /// The folder.
    pub fn path(&self) -> &Path {
        self.dir.path()
    }

    /// A path inside the folder.
    pub fn join(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Write a file inside the folder and return its path.
    pub fn write(&self, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
        let p = self.join(name);
        std::fs::write(&p, contents).expect("write test file");
        p
    }

    /// `magproof` with this folder as working directory and no MAGPROOF_LEDGER from the
    /// environment of the test run.
    pub fn magproof(&self) -> Command {
        let mut cmd = Command::cargo_bin("magproof").expect("the magproof binary");
        cmd.current_dir(self.path()).env_remove("MAGPROOF_LEDGER");
        cmd
    }
}
