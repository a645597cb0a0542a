//! Helpers for the binary's integration tests: a temp folder per test and a command
//! runner.

#![allow(dead_code)]

use std::path::{Path, PathBuf};

use assert_cmd::Command;

/// A temporary folder deleted when dropped.
pub struct TestDir {
    dir: tempfile::TempDir,
}

impl TestDir {
    /// A fresh folder.
    pub fn new() -> Self {
        Self {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    /// Its path.
    pub fn path(&self) -> &Path {
        self.dir.path()
    }

    /// A path inside it.
    pub fn join(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Write a file inside it and return its path.
    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.join(name);
        std::fs::write(&p, text).expect("write test file");
        p
    }
}

/// The `magproof` binary, run in `dir`.
pub fn magproof(dir: &TestDir) -> Command {
    let mut cmd = Command::cargo_bin("magproof").expect("binary");
    cmd.current_dir(dir.path());
    cmd
}

/// Stdout of a finished command as text.
pub fn stdout(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// Stderr of a finished command as text.
pub fn stderr(out: &std::process::Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}
