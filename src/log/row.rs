//! The general row parser of the sweep-log reader: one CSV row into numbers in internal
//! units (nT, s, m, rad), a mount label and a time, with a precise error for any bad
//! cell. Plain numeric rows usually take the fast path instead (`fast_row.rs`).

use std::path::Path;

use super::bytes::{shorten, split_fields, trim_cell};
use super::column_kind::{ColumnKind, TimeUnit};
use super::error::{LogError, Shown};
use super::header::Header;

/// Parsed cells of one row, before they are committed to the columns.
pub(super) struct RowParser {
    pub(super) numbers: Vec<f64>,
    /// The row's mount label, valid when `has_label` (a reused buffer: no per-row
    /// allocation).
    pub(super) mount_label: String,
    pub(super) has_label: bool,
    pub(super) time_s: Option<f64>,
    fields: Vec<(usize, usize)>,
    first_epoch_s: Option<f64>,
    /// The first ISO-8601 timestamp as written, once one was read.
    pub(super) first_iso: Option<String>,
    /// Whether time cells are ISO-8601 (`Some(true)`) or seconds; `None` before the first.
    pub(super) time_is_iso: Option<bool>,
    /// With held commands: the last value of each command column (`None` before one).
    held: Vec<Option<f64>>,
}

impl RowParser {
    /// A parser for rows of `header`'s columns.
    pub(super) fn new(header: &Header) -> Self {
        RowParser {
            numbers: vec![0.0; header.columns.len()],
            mount_label: String::new(),
            has_label: false,
            time_s: None,
            fields: Vec::with_capacity(header.columns.len()),
            first_epoch_s: None,
            first_iso: None,
            time_is_iso: None,
            held: vec![None; header.columns.len()],
        }
    }

    /// Parse one row (`text` without its line end) that is line `line` of `path`; a
    /// time before `last_time` (s) is refused.
    pub(super) fn parse(
        &mut self,
        text: &[u8],
        path: &Path,
        line: u64,
        header: &Header,
        last_time: Option<f64>,
    ) -> Result<(), LogError> {
        split_fields(text, header.delimiter, &mut self.fields);
        if self.fields.len() != header.columns.len() {
            return Err(LogError::RowLength {
                path: Shown(path.to_path_buf()),
                line,
                expected: header.columns.len(),
                found: self.fields.len(),
            });
        }
        self.has_label = false;
        self.time_s = None;
        for (k, col) in header.columns.iter().enumerate() {
            let (a, b) = self.fields[k];
            let cell = trim_cell(&text[a..b]);
            let cell_err = |problem: &str| LogError::Cell {
                path: Shown(path.to_path_buf()),
                line,
                column: col.raw.clone(),
                problem: problem.to_string(),
                found: shorten(cell),
            };
            match &col.kind {
                ColumnKind::Ignored => {}
                ColumnKind::Mount => self.read_mount_label(cell, &cell_err)?,
                ColumnKind::Time(unit) => {
                    let t = self.parse_time(cell, *unit, header.decimal_comma, &cell_err)?;
                    if let Some(prev) = last_time.filter(|&prev| t < prev) {
                        return Err(LogError::TimeBackwards {
                            path: Shown(path.to_path_buf()),
                            line,
                            column: col.raw.clone(),
                            found: t,
                            previous: prev,
                        });
                    }
                    self.time_s = Some(t);
                }
                ColumnKind::Command(_) if cell.is_empty() && header.hold_commands => {
                    self.numbers[k] = self.held[k].ok_or_else(|| {
                        cell_err(
                            "a command value: the cell is empty and no row above gave one to \
                             carry forward ([log] hold_commands)",
                        )
                    })?;
                }
                _ => {
                    let v = parse_number(cell, header.decimal_comma, &cell_err)?;
                    self.numbers[k] = v * col.scale;
                    if !self.numbers[k].is_finite() {
                        return Err(cell_err("the value overflows once converted"));
                    }
                }
            }
        }
        if header.hold_commands {
            self.hold_commands(header);
        }
        Ok(())
    }

    /// Read a mount-label cell into `mount_label`; an empty cell or `none` is no label.
    #[inline]
    fn read_mount_label(
        &mut self,
        cell: &[u8],
        cell_err: &dyn Fn(&str) -> LogError,
    ) -> Result<(), LogError> {
        let s = std::str::from_utf8(cell)
            .map_err(|_| cell_err("expected a mount label in UTF-8 text"))?;
        let s = s.trim();
        if s.chars().any(char::is_control) {
            return Err(cell_err("a mount label without control characters"));
        }
        self.has_label = !(s.is_empty() || s.eq_ignore_ascii_case("none"));
        if self.has_label {
            self.mount_label.clear();
            self.mount_label.push_str(s);
        }
        Ok(())
    }

    /// Remember this row's command values, for the empty command cells of the rows
    /// below (`[log] hold_commands`).
    #[inline]
    fn hold_commands(&mut self, header: &Header) {
        for (k, col) in header.columns.iter().enumerate() {
            if matches!(col.kind, ColumnKind::Command(_)) {
                self.held[k] = Some(self.numbers[k]);
            }
        }
    }

    fn parse_time(
        &mut self,
        cell: &[u8],
        unit: TimeUnit,
        decimal_comma: bool,
        cell_err: &dyn Fn(&str) -> LogError,
    ) -> Result<f64, LogError> {
        let looks_iso = cell.len() >= 10 && cell[4] == b'-' && cell[7] == b'-';
        match (self.time_is_iso, looks_iso) {
            (Some(true), false) => {
                return Err(cell_err(
                    "expected an ISO-8601 timestamp like the rows before",
                ))
            }
            (Some(false), true) => return Err(cell_err("expected seconds like the rows before")),
            _ => {}
        }
        self.time_is_iso = Some(looks_iso);
        if !looks_iso {
            return Ok(parse_number(cell, decimal_comma, cell_err)? * unit.to_seconds());
        }
        let s =
            std::str::from_utf8(cell).map_err(|_| cell_err("expected an ISO-8601 timestamp"))?;
        let epoch_s = super::header::parse_iso8601(s).ok_or_else(|| {
            cell_err("expected an ISO-8601 timestamp such as 2026-11-20T09:30:00.25Z")
        })?;
        let first = *self.first_epoch_s.get_or_insert(epoch_s);
        if self.first_iso.is_none() {
            self.first_iso = Some(s.to_string());
        }
        Ok(epoch_s - first)
    }
}

fn parse_number(
    cell: &[u8],
    decimal_comma: bool,
    cell_err: &dyn Fn(&str) -> LogError,
) -> Result<f64, LogError> {
    if cell.is_empty() {
        return Err(cell_err("expected a number, the cell is empty"));
    }
    if decimal_comma {
        return parse_decimal_comma(cell, cell_err);
    }
    match fast_float2::parse::<f64, _>(cell) {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(cell_err("expected a finite number")),
        Err(_) if with_point(cell).is_some() => Err(cell_err(
            "expected a number; this one has a decimal comma: add [log] decimal = \",\" to \
             the plan or --decimal-comma",
        )),
        Err(_) => Err(cell_err("expected a number")),
    }
}

/// A number written with a decimal comma (`-1,25`, `3,5e-2`); a point in it is refused
/// (`1.234,5` would be a thousands separator, which is ambiguous).
fn parse_decimal_comma(cell: &[u8], cell_err: &dyn Fn(&str) -> LogError) -> Result<f64, LogError> {
    if cell.contains(&b'.') {
        return Err(cell_err(
            "expected a number with a decimal comma (the plan or --decimal-comma says so), \
             without points",
        ));
    }
    let Some(v) = with_point(cell) else {
        return Err(cell_err("expected a number with a decimal comma"));
    };
    if v.is_finite() {
        Ok(v)
    } else {
        Err(cell_err("expected a finite number"))
    }
}

/// The cell read with its one comma as a decimal point, when it then is a number.
fn with_point(cell: &[u8]) -> Option<f64> {
    if cell.len() > 64 || cell.iter().filter(|&&c| c == b',').count() > 1 {
        return None;
    }
    let mut buf = [0u8; 64];
    let buf = &mut buf[..cell.len()];
    for (d, &c) in buf.iter_mut().zip(cell) {
        *d = if c == b',' { b'.' } else { c };
    }
    fast_float2::parse::<f64, _>(&*buf).ok()
}
