//! Reliability battery, hashing and dedupe: a log is recorded under the hash of the bytes
//! that were analysed (also when it comes through a pipe), and a re-run with options
//! that change the result is a new run (docs/reliability.md, "Battery"). The expected
//! hashes are SHA-256 of the files' bytes (`magproof::log::hash::sha256_bytes`, itself
//! checked against FIPS 180-2, appendix B.1).

use std::io::Write;
use std::path::Path;
use std::time::Duration;

use magproof::ledger::{InputRole, Ledger, RunFilter};
use magproof::log::hash::sha256_bytes;

use crate::battery_outputs::sample;
use crate::util::{assert_code, stderr, TestDir};

/// Make a FIFO at `path` and start a thread writing `bytes` into it.
fn fifo_feeding(path: &Path, bytes: Vec<u8>) -> std::thread::JoinHandle<()> {
    use std::os::unix::ffi::OsStrExt;
    let c = std::ffi::CString::new(path.as_os_str().as_bytes()).unwrap();
    // SAFETY: a valid NUL-terminated path; mkfifo only creates a file.
    assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0, "mkfifo");
    let p = path.to_path_buf();
    std::thread::spawn(move || {
        let mut f = std::fs::OpenOptions::new().write(true).open(p).unwrap();
        let _ = f.write_all(&bytes);
    })
}

/// The log hashes of every run in the ledger, in order.
fn log_hashes(db: &Path) -> Vec<String> {
    let ledger = Ledger::open_existing(db).unwrap();
    ledger
        .runs(&RunFilter::default())
        .unwrap()
        .iter()
        .map(|r| {
            r.inputs
                .iter()
                .find(|i| i.role == InputRole::Log)
                .unwrap()
                .sha256
                .clone()
        })
        .collect()
}

#[test]
fn a_log_through_a_pipe_is_recorded_under_the_hash_of_its_bytes() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let logs = [
        std::fs::read(d.join("rod-pulses.csv")).unwrap(),
        std::fs::read(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-logs/tmr-0207-b3/rod-pulses.csv"),
        )
        .unwrap(),
    ];
    assert_ne!(logs[0], logs[1]);
    for (k, bytes) in logs.iter().enumerate() {
        let fifo = d.join(&format!("pipe{k}"));
        let feeder = fifo_feeding(&fifo, bytes.clone());
        let out = d
            .magproof()
            .args(["polarity", "--plan", plan, "--record", "--ledger", "l.db"])
            .arg(&fifo)
            .timeout(Duration::from_secs(120))
            .output()
            .unwrap();
        feeder.join().unwrap();
        assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
        // A different log is a new run, never "already recorded".
        let want = format!("recorded as run #{}", k + 1);
        assert!(stderr(&out).contains(&want), "{}", stderr(&out));
    }
    let want: Vec<String> = logs.iter().map(|b| sha256_bytes(b)).collect();
    assert_eq!(log_hashes(&d.join("l.db")), want);
}

#[test]
fn a_rerun_with_other_options_is_recorded_and_the_same_one_is_not() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let run = |extra: &[&str]| {
        d.magproof()
            .args(["polarity", "--plan", plan, "rod-pulses.csv", "--record"])
            .args(["--ledger", "l.db"])
            .args(extra)
            .output()
            .unwrap()
    };
    let first = run(&[]);
    assert!(
        stderr(&first).contains("recorded as run #1"),
        "{}",
        stderr(&first)
    );
    let same = run(&[]);
    assert!(
        stderr(&same).contains("already recorded as run #1"),
        "{}",
        stderr(&same)
    );
    let other = run(&["--snr-min", "25"]);
    assert!(
        stderr(&other).contains("recorded as run #2"),
        "{}",
        stderr(&other)
    );
    let drift = run(&["--drift", "poly:2"]);
    assert!(
        stderr(&drift).contains("recorded as run #3"),
        "{}",
        stderr(&drift)
    );
    // The plan is hashed from the bytes parsed: an edited plan is a new run too.
    let text = std::fs::read_to_string(d.join(plan)).unwrap();
    d.write(plan, format!("{text}\n# re-measured\n"));
    let edited = run(&[]);
    assert!(
        stderr(&edited).contains("recorded as run #4"),
        "{}",
        stderr(&edited)
    );
    assert_code(&edited, first.status.code().unwrap());
}

/// Common practice: a reader needs no write access. The ledger and its folder are made
/// read-only, and when the tests run as root (who may write anything) `history` runs as
/// the unprivileged user 65534, so the read-only path is the one taken.
#[test]
fn history_reads_a_ledger_the_user_may_only_read() {
    use std::os::unix::fs::PermissionsExt;
    use std::os::unix::process::CommandExt;
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let out = d.run(&["closeout", plan, "--ledger", "l.db"]);
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", stderr(&out));
    let db = d.join("l.db");
    let bytes = std::fs::read(&db).unwrap();
    let before = crate::battery_outputs::names(d.path());
    let mode =
        |p: &Path, m: u32| std::fs::set_permissions(p, std::fs::Permissions::from_mode(m)).unwrap();
    mode(&db, 0o444);
    mode(d.path(), 0o555);
    let mut cmd = std::process::Command::new(env!("CARGO_BIN_EXE_magproof"));
    cmd.current_dir(d.path())
        .env_remove("MAGPROOF_LEDGER")
        .args(["history", "--ledger", "l.db"]);
    // SAFETY: the child only drops its privileges between fork and exec.
    if unsafe { libc::geteuid() } == 0 {
        unsafe {
            cmd.pre_exec(|| {
                if libc::setgid(65534) != 0 || libc::setuid(65534) != 0 {
                    return Err(std::io::Error::last_os_error());
                }
                Ok(())
            });
        }
    }
    let out = cmd.output().unwrap();
    mode(d.path(), 0o755);
    assert_code(&out, 0);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("TMR-0207") && text.contains("B2"), "{text}");
    assert_eq!(std::fs::read(&db).unwrap(), bytes, "the ledger changed");
    assert_eq!(crate::battery_outputs::names(d.path()), before);
}

/// Whether process `pid` has `file_name` open (any of its descriptors links to it).
fn has_open(pid: u32, file_name: &str) -> bool {
    let Ok(fds) = std::fs::read_dir(format!("/proc/{pid}/fd")) else {
        return false;
    };
    fds.filter_map(Result::ok).any(|fd| {
        std::fs::read_link(fd.path()).is_ok_and(|p| p.file_name().is_some_and(|n| n == file_name))
    })
}

#[test]
fn a_log_that_grows_after_it_was_read_is_recorded_under_the_bytes_analysed() {
    let d = TestDir::new();
    let plan = sample(&d, "b2");
    let log = d.join("rod-pulses.csv");
    let analysed = std::fs::read(&log).unwrap();
    // The ledger exists, and this test holds its write lock: the run cannot be recorded
    // until the log has grown.
    drop(Ledger::open(&d.join("l.db")).unwrap());
    let mut lock = rusqlite::Connection::open(d.join("l.db")).unwrap();
    let tx = lock
        .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)
        .unwrap();
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("magproof"))
        .current_dir(d.path())
        .env_remove("MAGPROOF_LEDGER")
        .args(["polarity", "--plan", plan, "rod-pulses.csv", "--record"])
        .args(["--ledger", "l.db"])
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    // The ledger is opened only after the log was read and analysed.
    let start = std::time::Instant::now();
    while !has_open(child.id(), "l.db") {
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "magproof never opened the ledger"
        );
        assert!(child.try_wait().unwrap().is_none(), "magproof ended early");
        std::thread::sleep(Duration::from_millis(5));
    }
    // Now the log grows (a writer still logging), then the ledger is let go.
    let mut f = std::fs::OpenOptions::new().append(true).open(&log).unwrap();
    let last = String::from_utf8_lossy(&analysed)
        .lines()
        .last()
        .unwrap()
        .to_string();
    for _ in 0..100 {
        writeln!(f, "{last}").unwrap();
    }
    f.sync_all().unwrap();
    tx.rollback().unwrap();
    drop(lock);
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(matches!(out.status.code(), Some(0 | 1)), "{err}");
    assert!(err.contains("recorded as run #1"), "{err}");
    let grown = std::fs::read(&log).unwrap();
    assert!(grown.len() > analysed.len());
    // Recorded under the bytes analysed, not the file as it is now.
    assert_eq!(log_hashes(&d.join("l.db")), vec![sha256_bytes(&analysed)]);
    assert_ne!(sha256_bytes(&analysed), sha256_bytes(&grown));
}
