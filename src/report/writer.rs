//! The presentation pipeline: one small trait, one writer per format (terminal text,
//! JSON, an HTML report folder, flight parameters). Every writer reads the same
//! [`RunReport`]; none recomputes a number. Each writer first says whether it can write
//! ([`ReportWriter::prepare`]), so a command checks every output before it records
//! anything, then writes ([`ReportWriter::write`]).

use std::io::Write;
use std::path::{Path, PathBuf};

use super::{terminal, write_report_dir, RunReport};
use crate::Error;

/// Where a writer's output went, for the command to say.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Written {
    /// To standard output.
    Stdout,
    /// Into this file or folder.
    Path(PathBuf),
    /// Into these files.
    Paths(Vec<PathBuf>),
}

/// One output format.
pub trait ReportWriter {
    /// What it writes, for messages ("report folder", "flight parameters").
    fn name(&self) -> &str;
    /// Refuse now, before anything is recorded, what `write` would refuse later (an
    /// existing destination without `force`, a bad file name).
    fn prepare(&self) -> Result<(), Error> {
        Ok(())
    }
    /// Write the report.
    fn write(&self, run: &RunReport, stdout: &mut dyn Write) -> Result<Written, Error>;
    /// Whether `write` reads the report's sections (text, tables, figures). A command
    /// whose writers all say no may hand them a report without sections, so that a
    /// `--json` run does not draw plots nobody sees.
    fn reads_sections(&self) -> bool {
        true
    }
    /// Whether `write` reads the report's inputs (paths and SHA-256 of the files read).
    /// A command whose writers all say no may leave them out instead of hashing every
    /// log (a 38 MB log costs about 2·10⁹ instructions to hash).
    fn reads_inputs(&self) -> bool {
        true
    }
}

/// The terminal summary (80 columns; colour only on a terminal without `NO_COLOR`).
#[derive(Debug, Clone, Copy)]
pub struct TerminalWriter {
    /// Colour or not.
    pub style: terminal::Style,
}

impl ReportWriter for TerminalWriter {
    fn name(&self) -> &str {
        "terminal summary"
    }
    fn write(&self, run: &RunReport, stdout: &mut dyn Write) -> Result<Written, Error> {
        let text = terminal::render(run, &self.style);
        stdout
            .write_all(text.as_bytes())
            .map_err(|e| Error::io("standard output", e))?;
        Ok(Written::Stdout)
    }
    fn reads_inputs(&self) -> bool {
        false
    }
}

/// Exactly one JSON object (the result) on standard output.
#[derive(Debug, Clone, Copy, Default)]
pub struct JsonWriter;

impl ReportWriter for JsonWriter {
    fn name(&self) -> &str {
        "JSON"
    }
    fn write(&self, run: &RunReport, stdout: &mut dyn Write) -> Result<Written, Error> {
        let text = serde_json::to_string_pretty(&run.result)
            .map_err(|e| Error::Internal(format!("result JSON: {e}")))?;
        let text = crate::text::json_for_terminal(text);
        writeln!(stdout, "{text}").map_err(|e| Error::io("standard output", e))?;
        Ok(Written::Stdout)
    }
    fn reads_sections(&self) -> bool {
        false
    }
    fn reads_inputs(&self) -> bool {
        false
    }
}

/// A report folder: `report.html`, `result.json` and each plot as an SVG, written whole
/// or not at all.
#[derive(Debug, Clone)]
pub struct HtmlWriter {
    /// The folder.
    pub dir: PathBuf,
    /// Replace an existing folder.
    pub force: bool,
}

impl ReportWriter for HtmlWriter {
    fn name(&self) -> &str {
        "report"
    }
    fn prepare(&self) -> Result<(), Error> {
        super::atomic::check_report_dest(&self.dir, self.force)
    }
    fn write(&self, run: &RunReport, _stdout: &mut dyn Write) -> Result<Written, Error> {
        Ok(Written::Path(write_report_dir(&self.dir, self.force, run)?))
    }
}

/// Refuse an existing destination unless replacing it was asked for, a destination that
/// is a folder, and one whose nearest existing ancestor is not a folder.
pub fn check_destination(path: &Path, force: bool, what: &str) -> Result<(), Error> {
    if path.exists() && !force {
        return Err(Error::Usage(format!(
            "{what} {} exists; replacing it must be asked for",
            path.display()
        )));
    }
    if path.is_dir() {
        return Err(Error::Usage(format!(
            "{what} {} is a folder, not a file",
            path.display()
        )));
    }
    super::atomic::check_parent(path)
}

/// Check every writer, then write with each in turn; returns where each wrote.
pub fn write_all(
    writers: &[Box<dyn ReportWriter + '_>],
    run: &RunReport,
    stdout: &mut dyn Write,
) -> Result<Vec<(String, Written)>, Error> {
    let mut out = Vec::with_capacity(writers.len());
    for w in writers {
        out.push((w.name().to_string(), w.write(run, stdout)?));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_existing_folder_is_refused_before_anything_is_written() {
        let dir = tempfile::tempdir().unwrap();
        let w = HtmlWriter {
            dir: dir.path().to_path_buf(),
            force: false,
        };
        assert!(w.prepare().is_err());
        let forced = HtmlWriter {
            dir: dir.path().to_path_buf(),
            force: true,
        };
        // Empty: may be replaced.
        assert!(forced.prepare().is_ok());
        // Holding a file magproof did not write: never replaced, even with force.
        std::fs::write(dir.path().join("log.csv"), "t,bx\n").unwrap();
        let err = forced.prepare().unwrap_err().to_string();
        assert!(err.contains("not written by magproof"), "{err}");
        std::fs::write(dir.path().join(super::super::atomic::REPORT_MARKER), "").unwrap();
        assert!(forced.prepare().is_ok());
    }
}
