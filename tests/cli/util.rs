//! Helpers for the binary tests: a temp dir per test, the binary, stored test data.

#![allow(dead_code)]

use std::path::{Path, PathBuf};

/// The `magproof` binary as an assert_cmd command.
pub fn magproof() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("magproof").expect("binary built")
}

/// A fresh temporary folder, removed when dropped.
pub fn temp_dir() -> tempfile::TempDir {
    tempfile::tempdir().expect("temp dir")
}

/// A file under tests/data.
pub fn data(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("data")
        .join(name)
}

/// Write `text` to `dir/name` and return the path.
pub fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).expect("write test file");
    p
}

/// Parse stdout as exactly one JSON object.
pub fn json_of(out: &std::process::Output) -> serde_json::Value {
    let s = String::from_utf8_lossy(&out.stdout);
    serde_json::from_str(&s).unwrap_or_else(|e| panic!("stdout is not one JSON object: {e}\n{s}"))
}
