//! The orbit log's header: each column classified (time, field, position, regressor)
//! with its unit factor, and the set of columns checked as a whole.

use std::path::Path;

use crate::log::error::{LogError, Shown};
use crate::log::units::FieldUnit;

/// What a column holds; the `f64` is the factor to internal units (nT for the field,
/// km for positions and heights, 1 for angles in degrees).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Kind {
    TimeIso,
    TimeUnix,
    Field(usize, f64),
    Ecef(usize, f64),
    Geo(usize, f64),
    Temp,
    Current,
    Command,
    Ignored,
}

impl Kind {
    /// The axis (0 x, 1 y, 2 z) of a field column.
    pub(super) fn field_axis(self) -> Option<usize> {
        match self {
            Kind::Field(a, _) => Some(a),
            _ => None,
        }
    }

    /// The axis (0 x, 1 y, 2 z) of an Earth-fixed position column.
    pub(super) fn ecef_axis(self) -> Option<usize> {
        match self {
            Kind::Ecef(a, _) => Some(a),
            _ => None,
        }
    }

    /// The place (0 lat, 1 lon, 2 alt) of a geodetic position column.
    pub(super) fn geo_axis(self) -> Option<usize> {
        match self {
            Kind::Geo(a, _) => Some(a),
            _ => None,
        }
    }
}

/// One header column: as written, its lower-case name without the unit, and its kind.
pub(super) struct Col {
    pub(super) raw: String,
    pub(super) name: String,
    pub(super) kind: Kind,
}

fn header_err(path: &Path, line: u64, column: &str, problem: String) -> LogError {
    LogError::Header {
        path: Shown(path.to_path_buf()),
        line,
        column: column.to_string(),
        problem,
    }
}

/// `name [unit]` split into the lower-case name and the unit, when one is given.
fn split_unit(raw: &str) -> (String, Option<String>) {
    match (raw.find('['), raw.rfind(']')) {
        (Some(a), Some(b)) if b > a => (
            raw[..a].trim().to_lowercase(),
            Some(raw[a + 1..b].trim().to_string()),
        ),
        _ => (raw.trim().to_lowercase(), None),
    }
}

/// The lower-case name and kind of a header cell `raw`, or why it is refused.
fn classify(raw: &str, default_unit: FieldUnit) -> Result<(String, Kind), String> {
    let (name, unit) = split_unit(raw);
    let u = unit.as_deref();
    let axis = |s: &str| match s {
        "x" => 0,
        "y" => 1,
        _ => 2,
    };
    let length = |u: Option<&str>| match u {
        None | Some("km") => Ok(1.0),
        Some("m") => Ok(1e-3),
        Some(o) => Err(format!("unknown length unit \"{o}\" (expected km or m)")),
    };
    let kind = match name.as_str() {
        "t" | "time" => match u {
            None => Kind::TimeIso,
            Some("unix") | Some("unix s") => Kind::TimeUnix,
            Some(o) => {
                return Err(format!(
                    "unknown time unit \"{o}\" (an orbit log's time is ISO-8601 UTC, or \
                     seconds since 1970 written `t [unix]`)"
                ))
            }
        },
        "bx" | "by" | "bz" => {
            let scale = match u {
                None => default_unit.to_nt_factor(),
                Some(s) => s
                    .parse::<FieldUnit>()
                    .map_err(|e| e.to_string())?
                    .to_nt_factor(),
            };
            Kind::Field(axis(&name[1..]), scale)
        }
        "rx" | "ry" | "rz" => Kind::Ecef(axis(&name[1..]), length(u)?),
        "lat" | "lon" => {
            if !matches!(u, None | Some("deg") | Some("°")) {
                return Err(format!(
                    "unknown angle unit \"{}\" (expected deg)",
                    u.unwrap_or("")
                ));
            }
            Kind::Geo(if name == "lat" { 0 } else { 1 }, 1.0)
        }
        "alt" => Kind::Geo(2, length(u)?),
        "temp" => match u {
            None | Some("C") | Some("°C") | Some("degC") => Kind::Temp,
            Some(o) => return Err(format!("unknown temperature unit \"{o}\" (expected °C)")),
        },
        n if n.starts_with("i_") && n.len() > 2 => match u {
            None | Some("A") => Kind::Current,
            Some("mA") => return Err("write currents in A (`i_<name> [A]`)".into()),
            Some(o) => return Err(format!("unknown current unit \"{o}\" (expected A)")),
        },
        n if n.starts_with("cmd_") && n.len() > 4 => Kind::Command,
        _ => Kind::Ignored,
    };
    Ok((name, kind))
}

/// Parse the header line `text` (line `line` of `path`): every column classified, no
/// name twice, the field and time present, position groups whole and given once.
pub(super) fn parse_header(
    text: &str,
    path: &Path,
    line: u64,
    unit: FieldUnit,
) -> Result<Vec<Col>, LogError> {
    let mut cols: Vec<Col> = Vec::new();
    for raw in text.split(',') {
        let raw = raw.trim().trim_matches('"').trim().to_string();
        let (name, kind) = classify(&raw, unit).map_err(|p| header_err(path, line, &raw, p))?;
        if kind != Kind::Ignored && cols.iter().any(|c| c.name == name) {
            return Err(header_err(path, line, &raw, "duplicated column".into()));
        }
        cols.push(Col { raw, name, kind });
    }
    let has = |f: &dyn Fn(Kind) -> bool| cols.iter().filter(|c| f(c.kind)).count();
    let groups: [(&str, usize); 3] = [
        ("bx, by, bz", has(&|k| matches!(k, Kind::Field(..)))),
        ("rx, ry, rz", has(&|k| matches!(k, Kind::Ecef(..)))),
        ("lat, lon, alt", has(&|k| matches!(k, Kind::Geo(..)))),
    ];
    for (g, n) in groups {
        if n != 0 && n != 3 {
            return Err(header_err(
                path,
                line,
                g,
                format!("only {n} of the three columns {g} are present; give all three"),
            ));
        }
    }
    if groups[0].1 == 0 {
        return Err(header_err(
            path,
            line,
            "bx, by, bz",
            "an orbit log needs the measured field".into(),
        ));
    }
    if has(&|k| matches!(k, Kind::TimeIso | Kind::TimeUnix)) == 0 {
        return Err(header_err(
            path,
            line,
            "t",
            "an orbit log needs a time column `t` (ISO-8601 UTC or `t [unix]`)".into(),
        ));
    }
    if groups[1].1 == 3 && groups[2].1 == 3 {
        return Err(header_err(
            path,
            line,
            "rx, lat",
            "give positions once: rx ry rz or lat lon alt, not both".into(),
        ));
    }
    Ok(cols)
}
