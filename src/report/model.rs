//! What a report holds, independent of its format: a run with its inputs and one section
//! per check, each with a verdict, key figures, tables, figures and warnings.
//!
//! Check-specific code builds [`Section`]s from result structs; the writers (terminal,
//! HTML, JSON) only lay them out.

use serde::Serialize;

pub use crate::check::Verdict;

/// Tone of a table cell, for colour (the text always says it in words too).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Tone {
    /// Plain.
    #[default]
    Plain,
    /// Good news.
    Good,
    /// Needs attention.
    Warn,
    /// Bad news.
    Bad,
}

/// A table cell.
#[derive(Debug, Clone, Default)]
pub struct Cell {
    /// The text, with units.
    pub text: String,
    /// Its tone.
    pub tone: Tone,
}

impl Cell {
    /// A plain cell.
    pub fn plain(text: impl Into<String>) -> Self {
        Cell {
            text: text.into(),
            tone: Tone::Plain,
        }
    }

    /// A cell with a tone.
    pub fn toned(text: impl Into<String>, tone: Tone) -> Self {
        Cell {
            text: text.into(),
            tone,
        }
    }
}

/// A table.
#[derive(Debug, Clone, Default)]
pub struct Table {
    /// Caption above the table.
    pub caption: String,
    /// Column headings, with units.
    pub header: Vec<String>,
    /// Rows of cells.
    pub rows: Vec<Vec<Cell>>,
}

/// A figure: an SVG document and its caption.
#[derive(Debug, Clone)]
pub struct Figure {
    /// File name when written on its own, e.g. `calibration-xy.svg`.
    pub file_name: String,
    /// Caption under the figure.
    pub caption: String,
    /// The SVG document.
    pub svg: String,
}

/// One check's part of a report.
#[derive(Debug, Clone)]
pub struct Section {
    /// `calibrate`, `polarity`, `dipole` or `history`.
    pub kind: String,
    /// Heading.
    pub title: String,
    /// Verdict.
    pub verdict: Verdict,
    /// Key figures as (label, value with unit and uncertainty).
    pub figures_of_merit: Vec<(String, String)>,
    /// Tables.
    pub tables: Vec<Table>,
    /// Plots.
    pub figures: Vec<Figure>,
    /// Warnings, each saying cause and remedy.
    pub warnings: Vec<String>,
    /// Notes on method and limits (e.g. "a tumble cannot see misalignment").
    pub notes: Vec<String>,
    /// The result as JSON (the check's documented keys).
    pub result: serde_json::Value,
}

/// An input file and its SHA-256.
#[derive(Debug, Clone, Serialize)]
pub struct InputFile {
    /// Path as given.
    pub path: String,
    /// Lower-case hex SHA-256.
    pub sha256: String,
}

/// A whole report.
#[derive(Debug, Clone)]
pub struct RunReport {
    /// Page title.
    pub title: String,
    /// Serial number and build, when the plan has an `[article]`.
    pub article: Option<(String, String)>,
    /// When the report was made, UTC, ISO-8601.
    pub generated_at: String,
    /// magproof version.
    pub tool_version: String,
    /// Input files with hashes.
    pub inputs: Vec<InputFile>,
    /// Sections in order.
    pub sections: Vec<Section>,
    /// The whole result as JSON (`result.json`, `--json`).
    pub result: serde_json::Value,
}

impl RunReport {
    /// Overall verdict: the worst of the sections'.
    pub fn verdict(&self) -> Verdict {
        Verdict::combine(self.sections.iter().map(|s| s.verdict))
    }
}

/// Current UTC time as ISO-8601 with seconds, e.g. `2026-12-02T09:14:03Z`.
pub fn now_utc_iso() -> String {
    let now = time::OffsetDateTime::now_utc();
    let fmt = time::macros::format_description!("[year]-[month]-[day]T[hour]:[minute]:[second]Z");
    now.format(&fmt)
        .unwrap_or_else(|_| now.unix_timestamp().to_string())
}

/// The cautions shown in every report footer and in the README.
pub const CAUTIONS: [&str; 5] = [
    "Cage coils carry amps and heat up: watch coil current and temperature limits.",
    "Strong fields upset pacemakers and pull tools: keep people with implants and loose ferromagnetic items away from energised coils.",
    "Pulse flight torque rods only within their rated current and duty cycle.",
    "Follow the facility's procedures and the responsible engineer's sign-off.",
    "magproof informs a decision; it does not replace the project's verification authority.",
];

/// `text` with the minus sign dropped from every number that reads as zero (`-0.0000`,
/// `-0.00e-5` → `0.0000`, `0.00e-5`): a value rounded to zero has no sign to show.
/// A minus after a letter or digit (a name like `x-0`) is kept.
pub fn drop_negative_zero(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len());
    for (i, &c) in chars.iter().enumerate() {
        if c == '-' && negative_zero_at(&chars, i) {
            continue;
        }
        out.push(c);
    }
    out
}

/// Whether `chars[i]` (a `-`) starts a number whose digits are all zero.
fn negative_zero_at(chars: &[char], i: usize) -> bool {
    if i > 0 && (chars[i - 1].is_alphanumeric() || chars[i - 1] == '.') {
        return false;
    }
    let mut j = i + 1;
    let mut digits = 0;
    while j < chars.len() && (chars[j] == '0' || chars[j] == '.') {
        digits += usize::from(chars[j] == '0');
        j += 1;
    }
    digits > 0 && !(j < chars.len() && chars[j].is_ascii_digit())
}

#[cfg(test)]
mod tests {
    use super::drop_negative_zero as d;

    #[test]
    fn a_number_rounded_to_zero_loses_its_sign_and_nothing_else_does() {
        assert_eq!(d("-0.0000 nT"), "0.0000 nT");
        assert_eq!(d("(-0.00 ± 0.01)e-3"), "(0.00 ± 0.01)e-3");
        assert_eq!(d("-0.0001 nT, -0, -0."), "-0.0001 nT, 0, 0.");
        assert_eq!(d("x-0 and -10.0 and 1e-0"), "x-0 and -10.0 and 1e-0");
        assert_eq!(d("Δ -0.000 A·m²"), "Δ 0.000 A·m²");
    }
}
