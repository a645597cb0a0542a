//! Header of a sweep log: delimiter detection, column names and units (resolved in
//! `names.rs`, with the plan's mapping from `layout.rs`, into the kinds of
//! `column_kind.rs`).

use std::path::Path;

use super::column_kind::{ColumnKind, TimeUnit};
use super::error::{LogError, Shown};
use super::layout::LogLayout;
use super::names::{resolve, scale_for};
use super::units::FieldUnit;

/// One column of the header.
#[derive(Debug, Clone)]
pub struct Column {
    /// As written in the header (trimmed).
    pub raw: String,
    /// What it holds.
    pub kind: ColumnKind,
    /// Factor from the file's unit to the internal unit (nT, rad, m, A, rad/s; 1
    /// otherwise).
    pub scale: f64,
}

/// The parsed header line.
#[derive(Debug, Clone)]
pub struct Header {
    /// Field delimiter: `,`, `;` or tab.
    pub delimiter: u8,
    /// Columns in file order.
    pub columns: Vec<Column>,
    /// Columns no check uses, as written.
    pub ignored: Vec<String>,
    /// Numbers are written with a decimal comma.
    pub decimal_comma: bool,
    /// An empty command cell repeats the value above it.
    pub hold_commands: bool,
}

impl Header {
    /// The time column's unit, when there is one.
    pub fn time_unit(&self) -> Option<TimeUnit> {
        self.columns.iter().find_map(|c| match c.kind {
            ColumnKind::Time(u) => Some(u),
            _ => None,
        })
    }
}

/// Parse the header line. `default_unit` applies to field columns that carry no unit;
/// `layout` maps the log's own names and says how its numbers are written.
pub fn parse_header(
    text: &str,
    path: &Path,
    line: u64,
    default_unit: FieldUnit,
    layout: &LogLayout,
) -> Result<Header, LogError> {
    let delimiter = detect_delimiter(text);
    let header_err = |column: &str, problem: String| LogError::Header {
        path: Shown(path.to_path_buf()),
        line,
        column: column.to_string(),
        problem,
    };
    if layout.decimal_comma && delimiter == b',' {
        return Err(header_err(
            text.split(',').next().unwrap_or("").trim(),
            "numbers with a decimal comma need a \";\" or tab delimiter, and this header \
             is delimited by \",\""
                .into(),
        ));
    }
    let mut ranges = Vec::new();
    super::bytes::split_fields(text.as_bytes(), delimiter, &mut ranges);
    let mut columns: Vec<Column> = Vec::with_capacity(ranges.len());
    let mut ignored = Vec::new();
    for (a, b) in ranges {
        let raw = text[a..b].trim().trim_matches('"').trim().to_string();
        let err = |problem: String| header_err(&raw, problem);
        if raw.is_empty() {
            return Err(err("empty column name in the header".into()));
        }
        let resolved = resolve(&raw, layout).map_err(err)?;
        let (kind, scale) =
            scale_for(resolved.kind, resolved.unit, default_unit, layout).map_err(err)?;
        if kind != ColumnKind::Ignored {
            if let Some(first) = columns.iter().find(|c| c.kind == kind) {
                return Err(err(format!(
                    "duplicated column: \"{}\" already names the same quantity",
                    first.raw
                )));
            }
        } else {
            ignored.push(raw.clone());
        }
        columns.push(Column { raw, kind, scale });
    }
    check_mapping(&columns, layout, &header_err)?;
    check_triples(&columns, path, line)?;
    Ok(Header {
        delimiter,
        columns,
        ignored,
        decimal_comma: layout.decimal_comma,
        hold_commands: layout.hold_commands,
    })
}

/// Refuse a `[columns]` entry whose column the header does not have, by name.
fn check_mapping(
    columns: &[Column],
    layout: &LogLayout,
    err: &dyn Fn(&str, String) -> LogError,
) -> Result<(), LogError> {
    for (quantity, name) in &layout.columns {
        if !columns.iter().any(|c| c.kind.quantity() == *quantity) {
            let names: Vec<&str> = columns.iter().map(|c| c.raw.as_str()).collect();
            return Err(err(
                name,
                format!(
                    "the plan's [columns] maps {quantity} = \"{name}\", and the log has no \
                     such column (its columns: {})",
                    names.join(", ")
                ),
            ));
        }
    }
    Ok(())
}

/// Refuse a header with one or two of a triple (`bx by bz`, `hx hy hz`, `ix iy iz`,
/// `gx gy gz`, `px py pz`): they come as all three or none.
fn check_triples(columns: &[Column], path: &Path, line: u64) -> Result<(), LogError> {
    type Axis = fn(usize) -> ColumnKind;
    let groups: [(&str, Axis); 5] = [
        ("bx, by, bz", ColumnKind::Field),
        ("hx, hy, hz", ColumnKind::Applied),
        ("ix, iy, iz", ColumnKind::Current),
        ("gx, gy, gz", ColumnKind::Gyro),
        ("px, py, pz", ColumnKind::Probe),
    ];
    for (group, make) in groups {
        let present = (0..3)
            .filter(|&a| columns.iter().any(|c| c.kind == make(a)))
            .count();
        if present != 0 && present != 3 {
            return Err(LogError::Header {
                path: Shown(path.to_path_buf()),
                line,
                column: group.to_string(),
                problem: format!(
                    "only {present} of the three columns {group} are present; give all three"
                ),
            });
        }
    }
    Ok(())
}

/// The delimiter is whichever of `,` `;` tab occurs most often in the header.
fn detect_delimiter(text: &str) -> u8 {
    let count = |d: u8| text.bytes().filter(|&c| c == d).count();
    let (c, s, t) = (count(b','), count(b';'), count(b'\t'));
    if t > c && t >= s {
        b'\t'
    } else if s > c {
        b';'
    } else {
        b','
    }
}

/// Parse an ISO-8601 / RFC 3339 timestamp to seconds since the Unix epoch. A timestamp
/// without an offset is taken as UTC.
pub fn parse_iso8601(s: &str) -> Option<f64> {
    use time::format_description::well_known::Rfc3339;
    use time::macros::format_description;
    let s = s.trim();
    let odt = time::OffsetDateTime::parse(s, &Rfc3339).ok().or_else(|| {
        let fmt = format_description!(
            version = 2,
            "[year]-[month]-[day][first [T][ ]][hour]:[minute]:[second][optional [.[subsecond]]]"
        );
        time::PrimitiveDateTime::parse(s, &fmt)
            .ok()
            .map(|p| p.assume_utc())
    })?;
    Some(odt.unix_timestamp() as f64 + f64::from(odt.nanosecond()) * 1e-9)
}
