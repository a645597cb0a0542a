//! Helpers for the integration tests: a temporary folder per test, writing fixtures,
//! running the binary and reading its outcome.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Output;

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

    /// Write a file (text or bytes) inside the folder, creating its parent folders, and
    /// return its path.
    pub fn write(&self, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
        let p = self.join(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).expect("create test folder");
        }
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

    /// Run `magproof ARGS…` in this folder to completion.
    pub fn run(&self, args: &[&str]) -> Output {
        self.magproof().args(args).output().expect("run magproof")
    }
}

/// Standard output of a finished command, as text.
pub fn stdout(out: &Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// Standard error of a finished command, as text.
pub fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Parse stdout as exactly one JSON object.
pub fn json_stdout(out: &Output) -> serde_json::Value {
    let text = stdout(out);
    let v: serde_json::Value = serde_json::from_str(text.trim()).unwrap_or_else(|e| {
        panic!(
            "stdout is not one JSON object ({e}):\n{text}\nstderr:\n{}",
            stderr(out)
        )
    });
    assert!(v.is_object(), "stdout JSON is not an object: {v}");
    v
}

/// Assert an exit code, showing both streams when it differs.
pub fn assert_code(out: &Output, code: i32) {
    assert_eq!(
        out.status.code(),
        Some(code),
        "unexpected exit code\n--- stdout\n{}\n--- stderr\n{}",
        stdout(out),
        stderr(out)
    );
}

/// Assert that stderr holds every one of `parts`.
pub fn assert_stderr_has(out: &Output, parts: &[&str]) {
    let err = stderr(out);
    for p in parts {
        assert!(err.contains(p), "stderr lacks {p:?}\n--- stderr\n{err}");
    }
}

/// A file under tests/data.
pub fn data(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("data")
        .join(name)
}

// ---- headless browser -------------------------------------------------------------

/// The Chromium binary, if installed (`.ci/run` installs Debian's `chromium`).
pub fn chromium() -> Option<PathBuf> {
    ["chromium", "chromium-browser", "google-chrome"]
        .iter()
        .find_map(|name| {
            std::env::var_os("PATH").and_then(|paths| {
                std::env::split_paths(&paths)
                    .map(|p| p.join(name))
                    .find(|p| p.is_file())
            })
        })
}

/// Render `html` in headless Chromium and save a PNG screenshot at `png`. Returns false
/// (and prints why) when Chromium is not installed and we are not in CI; in CI a missing
/// browser is a failure.
pub fn screenshot(html: &Path, png: &Path, size: (u32, u32)) -> bool {
    let Some(bin) = chromium() else {
        assert!(
            std::env::var_os("CI").is_none(),
            "Chromium is required in CI (.ci/run installs it)"
        );
        eprintln!("skipping the browser check: chromium is not installed");
        return false;
    };
    let profile = tempfile::tempdir().expect("profile dir");
    let out = std::process::Command::new(bin)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-first-run",
            "--hide-scrollbars",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg(format!("--window-size={},{}", size.0, size.1))
        .arg(format!("--screenshot={}", png.display()))
        .arg(format!("file://{}", html.display()))
        .output()
        .expect("run chromium");
    assert!(
        png.is_file(),
        "chromium made no screenshot: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    true
}

/// Fraction of pixels in a PNG that are not (near) white, and the number of distinct
/// colours seen (coarsely quantised): a blank page gives ~0 and 1.
pub fn png_ink(png: &Path) -> (f64, usize) {
    let decoder = png::Decoder::new(std::io::BufReader::new(
        std::fs::File::open(png).expect("open png"),
    ));
    let mut reader = decoder.read_info().expect("png header");
    let mut buf = vec![0; reader.output_buffer_size().expect("png size")];
    let info = reader.next_frame(&mut buf).expect("png frame");
    let channels = info.color_type.samples();
    let pixels = &buf[..info.buffer_size()];
    let mut inked = 0usize;
    let mut total = 0usize;
    let mut colours = std::collections::HashSet::new();
    for px in pixels.chunks_exact(channels) {
        let (r, g, b) = if channels >= 3 {
            (px[0], px[1], px[2])
        } else {
            (px[0], px[0], px[0])
        };
        total += 1;
        if r < 235 || g < 235 || b < 235 {
            inked += 1;
        }
        colours.insert((r >> 5, g >> 5, b >> 5));
    }
    (inked as f64 / total.max(1) as f64, colours.len())
}
