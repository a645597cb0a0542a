//! The flight-parameter writer: the JSON file and the C header, side by side, each
//! written atomically, after the checks [`ReportWriter::prepare`] makes before anything
//! is recorded (the verdict, the destinations, names that collide in C).

use std::io::Write;
use std::path::{Path, PathBuf};

use super::{c_header, FlightParams};
use crate::check::Verdict;
use crate::report::writer::{check_destination, ReportWriter, Written};
use crate::report::RunReport;
use crate::Error;

/// Base name of the files `closeout --params-out DIR` writes.
pub const DIR_FILE_STEM: &str = "magproof-flight";

/// Where the two files go.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ParamsPaths {
    /// The JSON file.
    pub json: PathBuf,
    /// The C header.
    pub header: PathBuf,
}

impl ParamsPaths {
    /// From `FILE.json` or `FILE.h`: both `FILE.json` and `FILE.h`.
    pub fn beside(path: &Path) -> Result<Self, Error> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("json") | Some("h") => Ok(ParamsPaths {
                json: path.with_extension("json"),
                header: path.with_extension("h"),
            }),
            _ => Err(Error::Usage(format!(
                "{}: a parameter file must end in .json or .h (both are written, side by side)",
                path.display()
            ))),
        }
    }

    /// `DIR/magproof-flight.json` and `DIR/magproof-flight.h`.
    pub fn in_dir(dir: &Path) -> Self {
        ParamsPaths {
            json: dir.join(format!("{DIR_FILE_STEM}.json")),
            header: dir.join(format!("{DIR_FILE_STEM}.h")),
        }
    }
}

/// Writes [`FlightParams`] as JSON and as a C header.
#[derive(Debug, Clone)]
pub struct FlightParamsWriter {
    /// The parameters.
    pub params: FlightParams,
    /// Where.
    pub paths: ParamsPaths,
    /// Replace existing files, and write for a verdict other than pass.
    pub force: bool,
}

impl FlightParamsWriter {
    fn texts(&self) -> Result<(String, String), Error> {
        let json = serde_json::to_string_pretty(&self.params)
            .map_err(|e| Error::Internal(format!("flight parameters JSON: {e}")))?;
        Ok((json + "\n", c_header::render(&self.params)?))
    }
}

impl ReportWriter for FlightParamsWriter {
    fn name(&self) -> &str {
        "flight parameters"
    }
    fn prepare(&self) -> Result<(), Error> {
        let v = self.params.verdict;
        if v != Verdict::Pass && !self.force {
            return Err(Error::Usage(format!(
                "{}: flight parameters are written only for a passing verdict, and this \
                 one is {v}; replacing that rule must be asked for (the files then say the \
                 verdict)",
                self.paths.json.display()
            )));
        }
        self.texts()?;
        check_destination(&self.paths.json, self.force, "parameter file")?;
        check_destination(&self.paths.header, self.force, "parameter file")
    }
    fn write(&self, _run: &RunReport, _stdout: &mut dyn Write) -> Result<Written, Error> {
        let (json, header) = self.texts()?;
        if let Some(dir) = self
            .paths
            .json
            .parent()
            .filter(|d| !d.as_os_str().is_empty())
        {
            std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
        }
        crate::report::atomic::write_atomic(&self.paths.json, json.as_bytes(), self.force)?;
        crate::report::atomic::write_atomic(&self.paths.header, header.as_bytes(), self.force)?;
        Ok(Written::Paths(vec![
            self.paths.json.clone(),
            self.paths.header.clone(),
        ]))
    }
    fn reads_sections(&self) -> bool {
        false
    }
    fn reads_inputs(&self) -> bool {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn both_files_sit_side_by_side_and_other_names_are_refused() {
        let p = ParamsPaths::beside(Path::new("out/cal.H")).unwrap();
        assert_eq!(p.json, Path::new("out/cal.json"));
        assert_eq!(p.header, Path::new("out/cal.h"));
        assert!(ParamsPaths::beside(Path::new("cal.txt")).is_err());
        let d = ParamsPaths::in_dir(Path::new("fp"));
        assert_eq!(d.header, Path::new("fp/magproof-flight.h"));
    }
}
