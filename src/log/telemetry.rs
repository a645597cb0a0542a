//! Reader for on-orbit telemetry logs (`magproof orbit`, format in `docs/orbit.md`):
//! `t` as ISO-8601 UTC or `t [unix]` (seconds since 1970, leap seconds ignored),
//! `bx by bz` (any field unit), optional Earth-fixed positions `rx ry rz` (km, m) or
//! geodetic `lat lon alt` (deg, deg, km, m), and regressors: `i_<name>` currents (A),
//! `cmd_<rod>` commands, `temp` (°C).
//!
//! The whole file is read once, hashed and parsed in parallel blocks of lines straight
//! into columns sized from a first count (no per-row allocation, no second copy). A bad
//! cell is refused with the file, its line and its column.

use std::path::Path;

use rayon::prelude::*;

use super::error::{LogError, Shown};
use super::row_lines::RowLines;
use super::sweep_log::{CommandColumn, SweepLog};
use super::units::FieldUnit;

/// Positions as logged, per row.
#[derive(Debug, Clone)]
pub enum LoggedPositions {
    /// Earth-fixed (ITRF-like) Cartesian position, km: `[rx, ry, rz]`.
    EcefKm([Vec<f64>; 3]),
    /// Geodetic latitude (deg), east longitude (deg), height above WGS-84 (km).
    Geodetic([Vec<f64>; 3]),
}

/// One regressor column: a current `i_<name>` (A) or a rod command `cmd_<rod>`.
#[derive(Debug, Clone)]
pub struct RegressorColumn {
    /// The column name as written, without its unit (`i_solar`, `cmd_x`).
    pub name: String,
    /// Unit of the values (`A` for currents, `command` for rods).
    pub unit: &'static str,
    /// Value per row.
    pub values: Vec<f64>,
}

/// What an orbit log holds besides the columns every check reads.
#[derive(Debug, Clone)]
pub struct OrbitColumns {
    /// Time of each row, s since 1970-01-01 UTC (leap seconds ignored).
    pub t_unix_s: Vec<f64>,
    /// Positions, when logged.
    pub positions: Option<LoggedPositions>,
    /// Currents and rod commands, in header order.
    pub regressors: Vec<RegressorColumn>,
}

/// An orbit log: the common part (field, temperature, time after the first row, lines,
/// hash) and the orbit columns.
#[derive(Debug, Clone)]
pub struct Telemetry {
    /// Field (nT, sensor frame), `temp`, `cmd_*` and the time after the first row.
    pub log: SweepLog,
    /// Absolute time, positions and regressors.
    pub orbit: OrbitColumns,
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Kind {
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

struct Col {
    raw: String,
    name: String,
    kind: Kind,
}

fn header_err(path: &Path, line: u64, column: &str, problem: String) -> LogError {
    LogError::Header {
        path: Shown(path.to_path_buf()),
        line,
        column: column.to_string(),
        problem,
    }
}

fn split_unit(raw: &str) -> (String, Option<String>) {
    match (raw.find('['), raw.rfind(']')) {
        (Some(a), Some(b)) if b > a => (
            raw[..a].trim().to_lowercase(),
            Some(raw[a + 1..b].trim().to_string()),
        ),
        _ => (raw.trim().to_lowercase(), None),
    }
}

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

fn parse_header(text: &str, path: &Path, line: u64, unit: FieldUnit) -> Result<Vec<Col>, LogError> {
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

/// Days from 1970-01-01 to the civil date (Hinnant's `days_from_civil`, public domain).
fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = if y >= 0 { y } else { y - 399 } / 400;
    let yoe = y - era * 400;
    let doy = (153 * (m + if m > 2 { -3 } else { 9 }) + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146097 + doe - 719468
}

/// `YYYY-MM-DDTHH:MM:SS[.f…][Z]` to Unix seconds; anything else goes to the full parser.
fn parse_time_iso(cell: &[u8]) -> Option<f64> {
    let digits = |a: usize, b: usize| -> Option<i64> {
        let s = cell.get(a..b)?;
        s.iter().try_fold(0i64, |acc, &c| {
            c.is_ascii_digit().then(|| acc * 10 + i64::from(c - b'0'))
        })
    };
    let fast = (|| {
        if cell.len() < 19 || cell[4] != b'-' || cell[7] != b'-' || cell[10] != b'T' {
            return None;
        }
        if cell[13] != b':' || cell[16] != b':' {
            return None;
        }
        let (y, mo, d) = (digits(0, 4)?, digits(5, 7)?, digits(8, 10)?);
        let (h, mi, s) = (digits(11, 13)?, digits(14, 16)?, digits(17, 19)?);
        if !(1..=12).contains(&mo) || !(1..=31).contains(&d) || h > 23 || mi > 59 || s > 60 {
            return None;
        }
        let mut rest = &cell[19..];
        let mut frac = 0.0;
        if rest.first() == Some(&b'.') {
            let n = rest[1..].iter().take_while(|c| c.is_ascii_digit()).count();
            if n == 0 {
                return None;
            }
            frac = fast_float2::parse::<f64, _>(&rest[..n + 1]).ok()?;
            rest = &rest[n + 1..];
        }
        if !(rest.is_empty() || rest == b"Z") {
            return None;
        }
        let days = days_from_civil(y, mo, d);
        Some((days * 86400 + h * 3600 + mi * 60 + s) as f64 + frac)
    })();
    fast.or_else(|| super::parse_iso8601(std::str::from_utf8(cell).ok()?))
}

/// Where a row's cells go.
struct Targets<'a> {
    cols: Vec<&'a mut [f64]>,
}

fn is_row(line: &[u8]) -> bool {
    let t = line.trim_ascii();
    !(t.is_empty() || t[0] == b'#')
}

/// Split `body` into about `parts` blocks ending at line ends.
fn blocks(body: &[u8], parts: usize) -> Vec<(usize, usize)> {
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

/// Read an orbit telemetry log. `default_unit` applies to field columns without a unit.
pub fn read_telemetry(path: &Path, default_unit: FieldUnit) -> Result<Telemetry, LogError> {
    let bytes = std::fs::read(path).map_err(|source| LogError::Io {
        path: Shown(path.to_path_buf()),
        source,
    })?;
    let (sha256, parsed) = rayon::join(
        || super::hash::sha256_bytes(&bytes),
        || parse_bytes(&bytes, path, default_unit),
    );
    let mut t = parsed?;
    t.log.sha256 = sha256;
    Ok(t)
}

fn parse_bytes(bytes: &[u8], path: &Path, unit: FieldUnit) -> Result<Telemetry, LogError> {
    let text_start = if bytes.starts_with(b"\xef\xbb\xbf") {
        3
    } else {
        0
    };
    let bytes = &bytes[text_start..];
    if memchr::memchr(b'\r', bytes).is_some_and(|k| bytes.get(k + 1) != Some(&b'\n')) {
        let line =
            1 + memchr::memchr_iter(b'\n', &bytes[..memchr::memchr(b'\r', bytes).unwrap_or(0)])
                .count() as u64;
        return Err(LogError::BareCarriageReturns {
            path: Shown(path.to_path_buf()),
            line,
        });
    }
    // Header: the first line that is not blank or a comment.
    let mut pos = 0;
    let mut line_no = 0u64;
    let (header, header_line) = loop {
        if pos >= bytes.len() {
            return Err(LogError::NoHeader {
                path: Shown(path.to_path_buf()),
            });
        }
        let end = memchr::memchr(b'\n', &bytes[pos..]).map_or(bytes.len(), |k| pos + k);
        line_no += 1;
        let line = &bytes[pos..end];
        pos = (end + 1).min(bytes.len());
        if is_row(line) {
            let text = std::str::from_utf8(line).map_err(|_| LogError::NotUtf8 {
                path: Shown(path.to_path_buf()),
                line: line_no,
            })?;
            break (text.trim_end_matches('\r'), line_no);
        }
    };
    let cols = parse_header(header, path, header_line, unit)?;
    let body = &bytes[pos..];
    let parts = blocks(body, rayon::current_num_threads() * 8);
    // First pass: rows and lines per block.
    let counts: Vec<(usize, u64)> = parts
        .par_iter()
        .map(|&(a, b)| {
            let lines = body[a..b].split(|&c| c == b'\n');
            let nl = memchr::memchr_iter(b'\n', &body[a..b]).count() as u64;
            let nl = if b == body.len() && !body[a..b].ends_with(b"\n") {
                nl + 1
            } else {
                nl
            };
            (lines.filter(|l| is_row(l)).count(), nl)
        })
        .collect();
    let rows: usize = counts.iter().map(|c| c.0).sum();
    if rows == 0 {
        return Err(LogError::NoRows {
            path: Shown(path.to_path_buf()),
            header_line,
        });
    }
    let ncol = cols.len();
    let mut data: Vec<Vec<f64>> = cols
        .iter()
        .map(|c| {
            if c.kind == Kind::Ignored {
                Vec::new()
            } else {
                vec![0.0; rows]
            }
        })
        .collect();
    // Second pass: parse each block into its slice of every column.
    let mut per_block: Vec<Targets> = parts.iter().map(|_| Targets { cols: Vec::new() }).collect();
    for col in data.iter_mut() {
        let mut rest: &mut [f64] = col.as_mut_slice();
        for (t, c) in per_block.iter_mut().zip(&counts) {
            let n = if rest.is_empty() { 0 } else { c.0 };
            let (a, b) = std::mem::take(&mut rest).split_at_mut(n);
            t.cols.push(a);
            rest = b;
        }
    }
    let mut first_line = header_line + 1;
    let starts: Vec<u64> = counts
        .iter()
        .map(|c| {
            let s = first_line;
            first_line += c.1;
            s
        })
        .collect();
    let lines: Vec<RowLines> = parts
        .par_iter()
        .zip(per_block.par_iter_mut())
        .zip(starts.par_iter())
        .map(|((&(a, b), t), &start)| parse_block(&body[a..b], start, &cols, t, path, ncol))
        .collect::<Result<_, _>>()?;
    drop(per_block);
    let mut all_lines = RowLines::new();
    for l in &lines {
        for line in l.iter() {
            all_lines.push(line);
        }
    }
    assemble(cols, data, all_lines, path, header_line)
}

fn parse_block(
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

fn assemble(
    cols: Vec<Col>,
    mut data: Vec<Vec<f64>>,
    lines: RowLines,
    path: &Path,
    header_line: u64,
) -> Result<Telemetry, LogError> {
    let mut take = |f: &dyn Fn(Kind) -> bool| -> Option<Vec<f64>> {
        let j = cols.iter().position(|c| f(c.kind))?;
        Some(std::mem::take(&mut data[j]))
    };
    let t_unix_s = take(&|k| matches!(k, Kind::TimeIso | Kind::TimeUnix)).unwrap_or_default();
    let mut triple = |f: fn(Kind) -> Option<usize>| -> Option<[Vec<f64>; 3]> {
        let mut out: [Option<Vec<f64>>; 3] = [None, None, None];
        for (a, slot) in out.iter_mut().enumerate() {
            *slot = take(&|k| f(k) == Some(a));
        }
        let [a, b, c] = out;
        Some([a?, b?, c?])
    };
    let b_nt = triple(|k| {
        if let Kind::Field(a, _) = k {
            Some(a)
        } else {
            None
        }
    });
    let ecef = triple(|k| {
        if let Kind::Ecef(a, _) = k {
            Some(a)
        } else {
            None
        }
    });
    let geo = triple(|k| {
        if let Kind::Geo(a, _) = k {
            Some(a)
        } else {
            None
        }
    });
    let temp_c = take(&|k| k == Kind::Temp);
    let mut regressors = Vec::new();
    let mut commands = Vec::new();
    for (j, c) in cols.iter().enumerate() {
        match c.kind {
            Kind::Current => regressors.push(RegressorColumn {
                name: c.name.clone(),
                unit: "A",
                values: std::mem::take(&mut data[j]),
            }),
            Kind::Command => {
                let values = std::mem::take(&mut data[j]);
                commands.push(CommandColumn {
                    rod: c.name["cmd_".len()..].to_string(),
                    header: c.raw.clone(),
                    values: values.clone(),
                });
                regressors.push(RegressorColumn {
                    name: c.name.clone(),
                    unit: "command",
                    values,
                });
            }
            _ => {}
        }
    }
    let t0 = t_unix_s.first().copied().unwrap_or(0.0);
    let log = SweepLog {
        path: path.to_path_buf(),
        t_s: Some(t_unix_s.iter().map(|t| t - t0).collect()),
        b_nt,
        temp_c,
        commands,
        lines,
        ignored_columns: cols
            .iter()
            .filter(|c| c.kind == Kind::Ignored)
            .map(|c| c.raw.clone())
            .collect(),
        header_line,
        ..SweepLog::default()
    };
    let positions = match (ecef, geo) {
        (Some(r), _) => Some(LoggedPositions::EcefKm(r)),
        (None, Some(g)) => Some(LoggedPositions::Geodetic(g)),
        _ => None,
    };
    Ok(Telemetry {
        log,
        orbit: OrbitColumns {
            t_unix_s,
            positions,
            regressors,
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn civil_days_match_known_dates() {
        // 2000-01-01 is day 10957 after 1970-01-01; 2026-07-19 is day 20653 (calendar count).
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        assert_eq!(days_from_civil(2000, 1, 1), 10957);
        assert_eq!(days_from_civil(2026, 7, 19), 20653);
        let t = parse_time_iso(b"2026-07-19T06:10:00.5Z").unwrap();
        assert!((t - (20653.0 * 86400.0 + 6.0 * 3600.0 + 600.0 + 0.5)).abs() < 1e-6);
        assert_eq!(
            parse_time_iso(b"2026-07-19T06:10:00+00:00"),
            Some(20653.0 * 86400.0 + 22200.0)
        );
        assert!(parse_time_iso(b"2026-13-19T06:10:00Z").is_none());
    }

    #[test]
    fn a_bad_cell_names_line_and_column() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("o.csv");
        std::fs::write(
            &p,
            "# orbit\nt,bx,by,bz,i_solar [A]\n2026-07-19T06:10:00Z,1,2,3,0.5\n\n2026-07-19T06:10:01Z,1,2,x,0.5\n",
        )
        .unwrap();
        let e = read_telemetry(&p, FieldUnit::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains(":5") || e.contains("line 5"), "{e}");
        assert!(e.contains("bz"), "{e}");
    }

    #[test]
    fn columns_and_lines_are_read() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("o.csv");
        std::fs::write(
            &p,
            "t [unix],bx [uT],by,bz,lat,lon,alt [km],i_solar [A],cmd_x,temp\n\
             100.0,1,2000,3000,10,20,500,0.5,1,20\n\n101.0,2,2000,3000,11,21,501,0.6,0,21\n",
        )
        .unwrap();
        let t = read_telemetry(&p, FieldUnit::default()).unwrap();
        assert_eq!(t.orbit.t_unix_s, vec![100.0, 101.0]);
        assert_eq!(t.log.b_nt.as_ref().unwrap()[0], vec![1000.0, 2000.0]);
        assert_eq!(t.log.lines.iter().collect::<Vec<_>>(), vec![2, 4]);
        assert!(matches!(
            t.orbit.positions,
            Some(LoggedPositions::Geodetic(_))
        ));
        let names: Vec<&str> = t.orbit.regressors.iter().map(|r| r.name.as_str()).collect();
        assert_eq!(names, ["i_solar", "cmd_x"]);
        assert_eq!(t.log.temp_c, Some(vec![20.0, 21.0]));
    }
}
