//! Report writers: terminal summary, JSON, HTML with SVG plots, flight parameters.
//!
//! Every writer reads the same result structs the JSON comes from; no writer recomputes
//! a number. Files are written atomically ([`atomic`]). A report folder holds
//! `report.html` (self-contained), `result.json` and each plot as its own SVG.

pub mod atomic;
pub mod flight;
pub mod html;
pub mod model;
pub mod plot;
pub mod sections;
pub mod terminal;
pub mod writer;

use std::path::{Path, PathBuf};

pub use flight::{FlightParams, FlightParamsWriter, FlightSources, ParamsPaths};
pub use model::{Cell, Figure, InputFile, RunReport, Section, Table, Tone, Verdict};
pub use writer::{HtmlWriter, JsonWriter, ReportWriter, TerminalWriter, Written};

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
    let mut used = std::collections::HashSet::new();
    for s in &report.sections {
        for f in &s.figures {
            let name = figure_file_name(&f.file_name, used.len());
            let name = if used.contains(&name) {
                figure_file_name(&format!("{}-{}", used.len(), f.file_name), used.len())
            } else {
                name
            };
            staging.add(&name, f.svg.as_bytes())?;
            used.insert(name);
        }
    }
    staging.commit()
}

/// Longest figure file name written, bytes (well under the 255 of common file systems).
const MAX_FIGURE_NAME: usize = 100;

/// A figure's file name as written: ASCII letters, digits, `-`, `_` and `.` kept, any
/// other character `_`, at most [`MAX_FIGURE_NAME`] bytes, ending `.svg`, never hidden.
/// A name shortened keeps its index `k` so it stays unique.
fn figure_file_name(name: &str, k: usize) -> String {
    let stem = name.strip_suffix(".svg").unwrap_or(name);
    let mut safe: String = stem
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.' {
                c
            } else {
                '_'
            }
        })
        .collect();
    if safe.starts_with('.') || safe.is_empty() {
        safe.insert(0, 'f');
    }
    if safe.len() + 4 > MAX_FIGURE_NAME {
        safe.truncate(MAX_FIGURE_NAME - 16);
        safe.push_str(&format!("-{k}"));
    }
    safe + ".svg"
}
