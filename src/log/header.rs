//! Header of a sweep log: delimiter detection, column names, units in brackets.

use std::path::Path;

use super::error::{LogError, Shown};
use super::units::FieldUnit;

/// Unit of a time column given as numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeUnit {
    /// seconds
    Seconds,
    /// milliseconds
    Milliseconds,
}

impl TimeUnit {
    /// Seconds per unit.
    pub fn to_seconds(self) -> f64 {
        match self {
            TimeUnit::Seconds => 1.0,
            TimeUnit::Milliseconds => 1e-3,
        }
    }
}

/// What a column holds.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnKind {
    /// `t`: seconds, or ISO-8601 timestamps.
    Time(TimeUnit),
    /// `bx`, `by`, `bz` (axis 0, 1, 2): measured field, sensor frame.
    Field(usize),
    /// `hx`, `hy`, `hz`: applied reference field, cage frame.
    Applied(usize),
    /// `temp`: °C.
    Temperature,
    /// `cmd_<rod>`: a torque-rod command.
    Command(String),
    /// `angle`: turntable angle.
    Angle,
    /// `mount`: mounting label.
    Mount,
    /// `px`, `py`, `pz`: probe position, table frame.
    Probe(usize),
    /// Anything else: listed once as ignored.
    Ignored,
}

impl ColumnKind {
    /// True for columns stored as numbers.
    pub fn is_numeric(&self) -> bool {
        !matches!(
            self,
            ColumnKind::Time(_) | ColumnKind::Mount | ColumnKind::Ignored
        )
    }
}

/// One column of the header.
#[derive(Debug, Clone)]
pub struct Column {
    /// As written in the header (trimmed).
    pub raw: String,
    /// What it holds.
    pub kind: ColumnKind,
    /// Factor from the file's unit to the internal unit (nT, rad, m; 1 otherwise).
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
}

/// Parse the header line. `default_unit` applies to field columns that carry no unit.
pub fn parse_header(
    text: &str,
    path: &Path,
    line: u64,
    default_unit: FieldUnit,
) -> Result<Header, LogError> {
    let delimiter = detect_delimiter(text);
    let mut ranges = Vec::new();
    super::bytes::split_fields(text.as_bytes(), delimiter, &mut ranges);
    let mut columns: Vec<Column> = Vec::with_capacity(ranges.len());
    let mut ignored = Vec::new();
    for (a, b) in ranges {
        let raw = text[a..b].trim().trim_matches('"').trim().to_string();
        let err = |problem: String| LogError::Header {
            path: Shown(path.to_path_buf()),
            line,
            column: raw.clone(),
            problem,
        };
        if raw.is_empty() {
            return Err(err("empty column name in the header".into()));
        }
        let (name, unit) = split_unit(&raw).map_err(err)?;
        let lname = name.to_lowercase();
        let (kind, scale) = classify(&lname, unit, default_unit).map_err(err)?;
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
    check_triples(&columns, path, line)?;
    Ok(Header {
        delimiter,
        columns,
        ignored,
    })
}

/// Refuse a header with one or two of a triple (`bx by bz`, `hx hy hz`, `px py pz`):
/// they come as all three or none.
fn check_triples(columns: &[Column], path: &Path, line: u64) -> Result<(), LogError> {
    for (group, kinds) in [
        (
            "bx, by, bz",
            [
                ColumnKind::Field(0),
                ColumnKind::Field(1),
                ColumnKind::Field(2),
            ],
        ),
        (
            "hx, hy, hz",
            [
                ColumnKind::Applied(0),
                ColumnKind::Applied(1),
                ColumnKind::Applied(2),
            ],
        ),
        (
            "px, py, pz",
            [
                ColumnKind::Probe(0),
                ColumnKind::Probe(1),
                ColumnKind::Probe(2),
            ],
        ),
    ] {
        let present = kinds
            .iter()
            .filter(|k| columns.iter().any(|c| &c.kind == *k))
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

/// Split `bx [uT]` into (`bx`, Some(`uT`)).
fn split_unit(raw: &str) -> Result<(&str, Option<&str>), String> {
    match raw.find('[') {
        None => {
            if raw.contains(']') {
                return Err("a \"]\" without its \"[\"".into());
            }
            Ok((raw, None))
        }
        Some(open) => {
            let rest = &raw[open + 1..];
            let close = rest
                .find(']')
                .ok_or_else(|| "the unit's \"[\" is not closed by \"]\"".to_string())?;
            if !rest[close + 1..].trim().is_empty() {
                return Err("text after the unit's \"]\"".into());
            }
            Ok((raw[..open].trim(), Some(rest[..close].trim())))
        }
    }
}

fn classify(
    name: &str,
    unit: Option<&str>,
    default_unit: FieldUnit,
) -> Result<(ColumnKind, f64), String> {
    let field_scale = |unit: Option<&str>| -> Result<f64, String> {
        match unit {
            None => Ok(default_unit.to_nt_factor()),
            Some(u) => u
                .parse::<FieldUnit>()
                .map(|u| u.to_nt_factor())
                .map_err(|e| e.to_string()),
        }
    };
    let axis = |c: char| match c {
        'x' => 0,
        'y' => 1,
        _ => 2,
    };
    let kind = match name {
        "t" | "time" => {
            let u = match unit {
                // `unix`: seconds since 1970 (an orbit log's time tags).
                None | Some("s") | Some("unix") => TimeUnit::Seconds,
                Some("ms") => TimeUnit::Milliseconds,
                Some(u) => {
                    return Err(format!(
                        "unknown time unit \"{u}\" (expected s, ms or unix)"
                    ))
                }
            };
            return Ok((ColumnKind::Time(u), 1.0));
        }
        "bx" | "by" | "bz" => {
            let a = axis(name.chars().nth(1).unwrap_or('z'));
            return Ok((ColumnKind::Field(a), field_scale(unit)?));
        }
        "hx" | "hy" | "hz" => {
            let a = axis(name.chars().nth(1).unwrap_or('z'));
            return Ok((ColumnKind::Applied(a), field_scale(unit)?));
        }
        "px" | "py" | "pz" => {
            let scale = match unit {
                None | Some("m") => 1.0,
                Some("cm") => 1e-2,
                Some("mm") => 1e-3,
                Some(u) => {
                    return Err(format!(
                        "unknown length unit \"{u}\" (expected m, cm or mm)"
                    ))
                }
            };
            let a = axis(name.chars().nth(1).unwrap_or('z'));
            return Ok((ColumnKind::Probe(a), scale));
        }
        "temp" => {
            match unit {
                None | Some("C") | Some("°C") | Some("degC") => {}
                Some(u) => return Err(format!("unknown temperature unit \"{u}\" (expected °C)")),
            }
            ColumnKind::Temperature
        }
        "angle" => {
            let scale = match unit {
                None | Some("deg") | Some("°") => std::f64::consts::PI / 180.0,
                Some("rad") => 1.0,
                Some(u) => return Err(format!("unknown angle unit \"{u}\" (expected deg or rad)")),
            };
            return Ok((ColumnKind::Angle, scale));
        }
        "mount" => ColumnKind::Mount,
        _ => match name.strip_prefix("cmd_") {
            Some("") => return Err("a command column needs a rod name: cmd_<rod>".into()),
            Some(rod) => ColumnKind::Command(rod.to_string()),
            None => ColumnKind::Ignored,
        },
    };
    Ok((kind, 1.0))
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
