//! The ledger's files on disk: SQLite's side files beside a database (`-wal`, `-shm`),
//! removing a database with them, refusing to create a ledger over stale ones, and the
//! `file:` URI of a path for read-only opening.

use std::path::{Path, PathBuf};

use super::LedgerError;
use crate::log::Shown;

/// An absolute path as the path of an SQLite `file:` URI (`%`, `?` and `#` escaped).
pub(super) fn uri_path(path: &Path) -> String {
    let mut out = String::new();
    for c in path.to_string_lossy().chars() {
        match c {
            '%' => out.push_str("%25"),
            '?' => out.push_str("%3f"),
            '#' => out.push_str("%23"),
            _ => out.push(c),
        }
    }
    out
}

/// SQLite's side files of a database at `path`: its write-ahead log and shared-memory
/// index.
pub fn side_files(path: &Path) -> [PathBuf; 2] {
    ["-wal", "-shm"].map(|suffix| {
        let mut p = path.as_os_str().to_os_string();
        p.push(suffix);
        PathBuf::from(p)
    })
}

/// Delete a database file and then its side files, whichever exist. When the database
/// itself cannot be deleted its side files are kept (they may hold committed runs).
pub fn remove_with_side_files(path: &Path) -> std::io::Result<()> {
    let gone = |r: std::io::Result<()>| match r {
        Err(e) if e.kind() != std::io::ErrorKind::NotFound => Err(e),
        _ => Ok(()),
    };
    gone(std::fs::remove_file(path))?;
    for p in side_files(path) {
        gone(std::fs::remove_file(p))?;
    }
    Ok(())
}

/// Refuse to create a ledger at `path` (absent) while side files of an earlier database
/// of that name are there: SQLite would replay a stale write-ahead log into the new file.
/// Side files seen while another process has just created the ledger are its own, not
/// stale: the ledger is looked for again after them.
pub(super) fn refuse_stale_side_files(path: &Path) -> Result<(), LedgerError> {
    let found: Vec<String> = side_files(path)
        .iter()
        .filter(|p| p.exists())
        .map(|p| p.display().to_string())
        .collect();
    if found.is_empty() || path.exists() {
        return Ok(());
    }
    Err(LedgerError::StaleSideFiles {
        path: Shown(path.to_path_buf()),
        files: found.join(" and "),
    })
}
