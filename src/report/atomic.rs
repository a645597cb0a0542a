//! Atomic output: every file magproof writes appears whole or not at all.
//!
//! Files are written to a temporary file in the destination folder, flushed to disk and
//! renamed over the destination. A report folder is assembled in a temporary sibling
//! folder and renamed into place; an existing folder is replaced only with `--force`.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::Error;

/// Write `bytes` to `path` atomically (temporary file in the same folder, fsync, rename).
/// With `force == false` an existing file is not replaced.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<(), Error> {
    if !force && path.exists() {
        return Err(Error::Usage(format!(
            "{} exists; replacing it must be asked for",
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
    tmp.as_file().sync_all().map_err(|e| Error::io(path, e))?;
    tmp.persist(path).map_err(|e| Error::io(path, e.error))?;
    Ok(())
}

fn parent_dir(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// A report folder being assembled. Files go into a hidden temporary sibling of the
/// destination; [`ReportStaging::commit`] renames it into place.
#[derive(Debug)]
pub struct ReportStaging {
    dest: PathBuf,
    tmp: Option<tempfile::TempDir>,
    force: bool,
}

impl ReportStaging {
    /// Start a report folder at `dest`. Refuses an existing `dest` unless `force`, and a
    /// `dest` that exists but is not a folder in any case.
    pub fn new(dest: &Path, force: bool) -> Result<Self, Error> {
        if dest.exists() {
            if !dest.is_dir() {
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
        }
        let parent = parent_dir(dest);
        std::fs::create_dir_all(&parent).map_err(|e| Error::io(&parent, e))?;
        let tmp = tempfile::Builder::new()
            .prefix(".magproof-report-")
            .tempdir_in(&parent)
            .map_err(|e| Error::io(&parent, e))?;
        Ok(ReportStaging {
            dest: dest.to_path_buf(),
            tmp: Some(tmp),
            force,
        })
    }

    /// Add a file to the staged folder.
    pub fn add(&self, name: &str, bytes: &[u8]) -> Result<(), Error> {
        let dir = self
            .tmp
            .as_ref()
            .ok_or_else(|| Error::Internal("report staging used after commit".into()))?;
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).map_err(|e| Error::io(&p, e))
    }

    /// Rename the staged folder into place, replacing an existing one (only reachable
    /// with `force`). Returns the destination.
    pub fn commit(mut self) -> Result<PathBuf, Error> {
        let tmp = self
            .tmp
            .take()
            .ok_or_else(|| Error::Internal("report staging committed twice".into()))?;
        let staged = tmp.keep();
        if self.dest.exists() && self.force {
            let parent = parent_dir(&self.dest);
            let old = tempfile::Builder::new()
                .prefix(".magproof-old-")
                .tempdir_in(&parent)
                .map_err(|e| Error::io(&parent, e))?
                .keep();
            // Move the old folder aside, move the new one in, then delete the old one.
            let aside = old.join("previous");
            std::fs::rename(&self.dest, &aside).map_err(|e| Error::io(&self.dest, e))?;
            std::fs::rename(&staged, &self.dest).map_err(|e| Error::io(&self.dest, e))?;
            let _ = std::fs::remove_dir_all(&old);
        } else {
            std::fs::rename(&staged, &self.dest).map_err(|e| Error::io(&self.dest, e))?;
        }
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
