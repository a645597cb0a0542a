//! Helpers for the integration tests: a temporary folder per test, writing fixtures,
//! running the binary and reading its outcome.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Output;

use assert_cmd::Command;

/// A temporary folder that lives as long as the test.
pub struct Dir {
    tmp: tempfile::TempDir,
}

impl Dir {
    /// A fresh, empty folder.
    pub fn new() -> Self {
        Dir {
            tmp: tempfile::tempdir().expect("create a temporary folder"),
        }
    }

    /// Path of the folder.
    pub fn path(&self) -> &Path {
        self.tmp.path()
    }

    /// Path of a file in the folder.
    pub fn join(&self, name: &str) -> PathBuf {
        self.tmp.path().join(name)
    }

    /// Write a text file and return its path.
    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        self.write_bytes(name, text.as_bytes())
    }

    /// Write a file of bytes and return its path.
    pub fn write_bytes(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.join(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).expect("create fixture folder");
        }
        std::fs::write(&p, bytes).expect("write fixture");
        p
    }

    /// A command for the binary, run in this folder, with a ledger path inside it.
    pub fn cmd(&self) -> Command {
        let mut c = Command::cargo_bin("magproof").expect("binary built");
        c.current_dir(self.path());
        c.env("MAGPROOF_LEDGER", self.join("ledger.db"));
        c.env("NO_COLOR", "1");
        c
    }
}

/// What a run of the binary gave.
pub struct Run {
    /// Exit code (-1 if killed by a signal).
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

impl Run {
    /// Parse stdout as exactly one JSON object.
    pub fn json(&self) -> serde_json::Value {
        let v: serde_json::Value = serde_json::from_str(self.stdout.trim()).unwrap_or_else(|e| {
            panic!(
                "stdout is not one JSON object ({e}):\n{}\nstderr:\n{}",
                self.stdout, self.stderr
            )
        });
        assert!(v.is_object(), "stdout JSON is not an object: {v}");
        v
    }
}

/// Run a command to completion.
pub fn run(mut cmd: Command) -> Run {
    let out: Output = cmd.output().expect("run magproof");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Run `magproof ARGS…` in `dir`.
pub fn magproof(dir: &Dir, args: &[&str]) -> Run {
    let mut c = dir.cmd();
    c.args(args);
    run(c)
}

/// Assert an exit code, showing both streams when it differs.
pub fn assert_code(run: &Run, code: i32) {
    assert_eq!(
        run.code, code,
        "unexpected exit code\n--- stdout\n{}\n--- stderr\n{}",
        run.stdout, run.stderr
    );
}

/// Assert that stderr holds every one of `parts`.
pub fn assert_stderr_has(run: &Run, parts: &[&str]) {
    for p in parts {
        assert!(
            run.stderr.contains(p),
            "stderr lacks {p:?}\n--- stderr\n{}",
            run.stderr
        );
    }
}

// ---- helpers in the style some theme modules use ---------------------------------
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
