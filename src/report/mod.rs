//! Report writers: terminal summary, JSON, HTML with SVG plots, flight parameters.
//!
//! Every writer reads the same result structs the JSON comes from; no writer recomputes
//! a number. Files are written atomically ([`atomic`]). A report folder holds
//! `report.html` (self-contained), `result.json` and each plot as its own SVG.

pub mod atomic;
pub mod flight_params;
pub mod html;
pub mod model;
pub mod plot;
pub mod polarity_params;
pub mod sections;
pub mod terminal;
pub mod writer;

use std::path::{Path, PathBuf};

pub use model::{Cell, Figure, InputFile, RunReport, Section, Table, Tone, Verdict};
pub use writer::{
    FlightParamsWriter, HtmlWriter, JsonWriter, ParamsSource, ReportWriter, TerminalWriter, Written,
};

use crate::Error;

/// Write a report folder: `report.html`, `result.json` (the report's JSON, pretty) and
/// one SVG per figure. The folder appears whole or not at all; an existing folder is
/// replaced only with `force`. Returns the folder's path.
pub fn write_report_dir(dir: &Path, force: bool, report: &RunReport) -> Result<PathBuf, Error> {
    let result_json = &report.result;
    let staging = atomic::ReportStaging::new(dir, force)?;
    staging.add("report.html", html::render(report).as_bytes())?;
    let json = serde_json::to_string_pretty(result_json)
        .map_err(|e| Error::Internal(format!("result JSON: {e}")))?;
    staging.add("result.json", format!("{json}\n").as_bytes())?;
    for s in &report.sections {
        for f in &s.figures {
            staging.add(&f.file_name, f.svg.as_bytes())?;
        }
    }
    staging.commit()
}
