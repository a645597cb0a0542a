//! Atomic output: every file magproof writes appears whole or not at all.
//!
//! Files are written to a temporary file in the destination folder, flushed to disk and
//! renamed over the destination. A report folder is assembled in a temporary sibling
//! folder and renamed into place. Every report folder holds a marker file
//! ([`REPORT_MARKER`]); an existing folder is replaced only when replacing was asked for
//! and the folder is empty or holds that marker, so a folder magproof did not write (the
//! user's logs, plans or ledger) is never deleted. Outputs get the permissions the
//! process's umask allows, as any file the user creates.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::Error;

/// Name of the marker file magproof writes inside every report folder: a folder holding
/// it may be replaced whole.
pub const REPORT_MARKER: &str = ".magproof-report";

/// Write `bytes` to `path` atomically (temporary file in the same folder, fsync, rename).
/// With `force == false` an existing file is not replaced.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<(), Error> {
    if !force && path.exists() {
        return Err(Error::Usage(format!(
            "{} exists; replacing it must be asked for",
            path.display()
        )));
    }
    if path.is_dir() {
        return Err(Error::Usage(format!(
            "{} is a folder, not a file",
            path.display()
        )));
    }
    let dir = parent_dir(path);
    let mut tmp = tempfile::Builder::new()
        .prefix(".magproof-")
        .suffix(".tmp")
        .tempfile_in(&dir)
        .map_err(|e| Error::io(&dir, e))?;
    tmp.write_all(bytes).map_err(|e| Error::io(path, e))?;
    set_default_mode(tmp.path(), 0o666)?;
    tmp.as_file().sync_all().map_err(|e| Error::io(path, e))?;
    tmp.persist(path).map_err(|e| Error::io(path, e.error))?;
    Ok(())
}

/// Give `path` the mode `base` less the process's umask (temporary files are created
/// 0600 and folders 0700; a finished output gets what any new file of the user gets).
fn set_default_mode(path: &Path, base: u32) -> Result<(), Error> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        // SAFETY: umask only swaps the process's file-mode mask; it is set back at once.
        let mask = unsafe {
            let m = libc::umask(0o022);
            libc::umask(m);
            m
        };
        let mode = base & !(mask as u32);
        std::fs::set_permissions(path, std::fs::Permissions::from_mode(mode))
            .map_err(|e| Error::io(path, e))?;
    }
    #[cfg(not(unix))]
    let _ = (path, base);
    Ok(())
}

fn parent_dir(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Refuse, before anything is written, an output at `path` whose nearest existing
/// ancestor is not a folder (the output could never be created there).
pub fn check_parent(path: &Path) -> Result<(), Error> {
    let mut anc = path.parent();
    while let Some(a) = anc {
        let shown = if a.as_os_str().is_empty() {
            Path::new(".")
        } else {
            a
        };
        match std::fs::metadata(shown) {
            Ok(m) if m.is_dir() => return Ok(()),
            Ok(_) => {
                return Err(Error::Usage(format!(
                    "{}: {} is not a folder",
                    path.display(),
                    shown.display()
                )))
            }
            Err(_) => anc = a.parent(),
        }
    }
    Ok(())
}

/// Whether a report folder may be written at `dest`: refuses a `dest` that exists but is
/// not a folder, an existing folder unless `force`, and — even with `force` — a non-empty
/// folder without [`REPORT_MARKER`] (magproof did not write it), the working folder or
/// one of its ancestors. Each message names the folder.
pub fn check_report_dest(dest: &Path, force: bool) -> Result<(), Error> {
    check_parent(dest)?;
    let meta = match std::fs::symlink_metadata(dest) {
        Ok(m) => m,
        Err(_) => return Ok(()),
    };
    if !meta.is_dir() {
        return Err(Error::Usage(format!(
            "{} exists and is not a folder",
            dest.display()
        )));
    }
    if !force {
        return Err(Error::Usage(format!(
            "report folder {} exists; replacing it must be asked for",
            dest.display()
        )));
    }
    if let (Ok(d), Ok(cwd)) = (dest.canonicalize(), std::env::current_dir()) {
        if cwd.starts_with(&d) {
            return Err(Error::Usage(format!(
                "report folder {} is the working folder or holds it; it is not replaced: \
                 choose a new folder for the report",
                dest.display()
            )));
        }
    }
    let mut entries = std::fs::read_dir(dest).map_err(|e| Error::io(dest, e))?;
    let empty = entries.next().is_none();
    if empty || dest.join(REPORT_MARKER).is_file() {
        return Ok(());
    }
    Err(Error::Usage(format!(
        "report folder {} was not written by magproof (it holds files and no {REPORT_MARKER} \
         marker); it is not replaced: choose a new folder for the report",
        dest.display()
    )))
}

/// A report folder being assembled. Files go into a hidden temporary sibling of the
/// destination; [`ReportStaging::commit`] renames it into place.
#[derive(Debug)]
pub struct ReportStaging {
    dest: PathBuf,
    tmp: Option<tempfile::TempDir>,
}

impl ReportStaging {
    /// Start a report folder at `dest` (refusing what [`check_report_dest`] refuses),
    /// with its [`REPORT_MARKER`] already inside.
    pub fn new(dest: &Path, force: bool) -> Result<Self, Error> {
        check_report_dest(dest, force)?;
        let parent = parent_dir(dest);
        std::fs::create_dir_all(&parent).map_err(|e| Error::io(&parent, e))?;
        let tmp = tempfile::Builder::new()
            .prefix(".magproof-report-")
            .tempdir_in(&parent)
            .map_err(|e| Error::io(&parent, e))?;
        let staging = ReportStaging {
            dest: dest.to_path_buf(),
            tmp: Some(tmp),
        };
        let marker = format!(
            "This folder was written by magproof {}; magproof may replace it whole.\n",
            crate::VERSION
        );
        staging.add(REPORT_MARKER, marker.as_bytes())?;
        Ok(staging)
    }

    /// Add a file to the staged folder.
    pub fn add(&self, name: &str, bytes: &[u8]) -> Result<(), Error> {
        let dir = self
            .tmp
            .as_ref()
            .ok_or_else(|| Error::Internal("report staging used after commit".into()))?;
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).map_err(|e| Error::io(&p, e))?;
        set_default_mode(&p, 0o666)
    }

    /// Rename the staged folder into place, replacing an existing one (only reachable
    /// when [`check_report_dest`] allowed it). Returns the destination. On failure the
    /// staged folder is removed and an existing destination is left as it was.
    pub fn commit(mut self) -> Result<PathBuf, Error> {
        let tmp = self
            .tmp
            .take()
            .ok_or_else(|| Error::Internal("report staging committed twice".into()))?;
        set_default_mode(tmp.path(), 0o777)?;
        if !self.dest.exists() {
            let staged = tmp.keep();
            return match std::fs::rename(&staged, &self.dest) {
                Ok(()) => Ok(self.dest.clone()),
                Err(e) => {
                    let _ = std::fs::remove_dir_all(&staged);
                    Err(Error::io(&self.dest, e))
                }
            };
        }
        let parent = parent_dir(&self.dest);
        let old = tempfile::Builder::new()
            .prefix(".magproof-old-")
            .tempdir_in(&parent)
            .map_err(|e| Error::io(&parent, e))?;
        // Move the old folder aside, move the new one in, then delete the old one.
        let aside = old.path().join("previous");
        std::fs::rename(&self.dest, &aside).map_err(|e| Error::io(&self.dest, e))?;
        if let Err(e) = std::fs::rename(tmp.path(), &self.dest) {
            // Put the old folder back; the staged one and `old` go with their guards.
            let _ = std::fs::rename(&aside, &self.dest);
            return Err(Error::io(&self.dest, e));
        }
        let _ = tmp.keep();
        drop(old);
        Ok(self.dest.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn existing_file_needs_force() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("a.json");
        write_atomic(&p, b"1", false).unwrap();
        assert!(write_atomic(&p, b"2", false).is_err());
        write_atomic(&p, b"3", true).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"3");
        // No temporary files left behind.
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }

    #[test]
    fn report_folder_is_replaced_only_with_force() {
        let d = tempfile::tempdir().unwrap();
        let dest = d.path().join("rep");
        let s = ReportStaging::new(&dest, false).unwrap();
        s.add("x.txt", b"first").unwrap();
        s.commit().unwrap();
        assert!(ReportStaging::new(&dest, false).is_err());
        let s = ReportStaging::new(&dest, true).unwrap();
        s.add("y.txt", b"second").unwrap();
        s.commit().unwrap();
        assert!(!dest.join("x.txt").exists());
        assert_eq!(std::fs::read(dest.join("y.txt")).unwrap(), b"second");
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }

    #[test]
    fn abandoned_staging_leaves_nothing() {
        let d = tempfile::tempdir().unwrap();
        {
            let s = ReportStaging::new(&d.path().join("rep"), false).unwrap();
            s.add("x.txt", b"x").unwrap();
        }
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 0);
    }
}
