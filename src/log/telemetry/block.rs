//! The orbit log's body, in blocks of whole lines parsed in parallel: each block's rows
//! go straight into its slice of every column.

use std::path::Path;

use super::header::{Col, Kind};
use super::time::parse_time_iso;
use crate::log::error::{LogError, Shown};
use crate::log::row_lines::RowLines;

/// Where a row's cells go.
pub(super) struct Targets<'a> {
    /// Per header column, this block's rows of it (empty for an ignored column).
    pub(super) cols: Vec<&'a mut [f64]>,
}

/// Whether a line is a data row (not blank, not a `#` comment).
pub(super) fn is_row(line: &[u8]) -> bool {
    let t = line.trim_ascii();
    !(t.is_empty() || t[0] == b'#')
}

/// Split `body` into about `parts` blocks ending at line ends.
pub(super) fn blocks(body: &[u8], parts: usize) -> Vec<(usize, usize)> {
    let mut out = Vec::new();
    let mut a = 0;
    let step = body.len() / parts.max(1) + 1;
    while a < body.len() {
        let mut b = (a + step).min(body.len());
        if b < body.len() {
            b = memchr::memchr(b'\n', &body[b..]).map_or(body.len(), |k| b + k + 1);
        }
        out.push((a, b));
        a = b;
    }
    out
}

/// Parse the rows of `block`, whose first line is line `first_line`, into `t`: values in
/// internal units, time never backwards, every row `ncol` cells. Returns the rows' lines.
pub(super) fn parse_block(
    block: &[u8],
    first_line: u64,
    cols: &[Col],
    t: &mut Targets,
    path: &Path,
    ncol: usize,
) -> Result<RowLines, LogError> {
    let mut lines = RowLines::new();
    let mut row = 0;
    let mut prev_t = f64::NEG_INFINITY;
    for (k, line) in block.split(|&c| c == b'\n').enumerate() {
        if !is_row(line) {
            continue;
        }
        let line_no = first_line + k as u64;
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        let mut n = 0;
        for (j, cell) in line.split(|&c| c == b',').enumerate() {
            n += 1;
            if j >= ncol {
                continue;
            }
            let col = &cols[j];
            let cell = cell.trim_ascii();
            let bad = |problem: &str| LogError::Cell {
                path: Shown(path.to_path_buf()),
                line: line_no,
                column: col.raw.clone(),
                problem: problem.to_string(),
                found: String::from_utf8_lossy(cell).into_owned(),
            };
            let v = match col.kind {
                Kind::Ignored => continue,
                Kind::TimeIso => parse_time_iso(cell).ok_or_else(|| {
                    bad("expected an ISO-8601 UTC timestamp such as 2026-07-19T06:10:00Z")
                })?,
                _ => fast_float2::parse::<f64, _>(cell).map_err(|_| bad("expected a number"))?,
            };
            if !v.is_finite() {
                return Err(bad("expected a finite number"));
            }
            let v = match col.kind {
                Kind::Field(_, s) | Kind::Ecef(_, s) | Kind::Geo(_, s) => v * s,
                _ => v,
            };
            if matches!(col.kind, Kind::TimeIso | Kind::TimeUnix) {
                if v < prev_t {
                    return Err(LogError::TimeBackwards {
                        path: Shown(path.to_path_buf()),
                        line: line_no,
                        column: col.raw.clone(),
                        found: v,
                        previous: prev_t,
                    });
                }
                prev_t = v;
            }
            t.cols[j][row] = v;
        }
        if n != ncol {
            return Err(LogError::RowLength {
                path: Shown(path.to_path_buf()),
                line: line_no,
                expected: ncol,
                found: n,
            });
        }
        lines.push(line_no);
        row += 1;
    }
    Ok(lines)
}
