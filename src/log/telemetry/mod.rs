//! Reader for on-orbit telemetry logs (`magproof orbit`, format in `docs/orbit.md`):
//! `t` as ISO-8601 UTC or `t [unix]` (seconds since 1970, leap seconds ignored),
//! `bx by bz` (any field unit), optional Earth-fixed positions `rx ry rz` (km, m) or
//! geodetic `lat lon alt` (deg, deg, km, m), and regressors: `i_<name>` currents (A),
//! `cmd_<rod>` commands, `temp` (°C).
//!
//! The whole file is read once, hashed and parsed in parallel blocks of lines straight
//! into columns sized from a first count (no per-row allocation, no second copy). A bad
//! cell is refused with the file, its line and its column.
//!
//! `header` classifies the columns, `time` reads the timestamps, `block` parses a block
//! of rows; this file finds the header, counts, splits and assembles.

use std::path::Path;

use rayon::prelude::*;

mod block;
mod header;
mod time;

use block::{blocks, is_row, parse_block, Targets};
use header::{parse_header, Col, Kind};

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

/// Parse a whole orbit log held in memory (`path` names it in messages).
fn parse_bytes(bytes: &[u8], path: &Path, unit: FieldUnit) -> Result<Telemetry, LogError> {
    let bytes = text_after_bom(bytes, path)?;
    let (header, header_line, body_start) = find_header(bytes, path)?;
    let cols = parse_header(header, path, header_line, unit)?;
    let body = &bytes[body_start..];
    let parts = blocks(body, rayon::current_num_threads() * 8);
    let counts = count_rows(body, &parts);
    let rows: usize = counts.iter().map(|c| c.0).sum();
    if rows == 0 {
        return Err(LogError::NoRows {
            path: Shown(path.to_path_buf()),
            header_line,
        });
    }
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
    let body_lines = BodyBlocks {
        body,
        parts: &parts,
        counts: &counts,
        first_line: header_line + 1,
    };
    let lines = body_lines.parse_into(&cols, &mut data, path)?;
    assemble(cols, data, lines, path, header_line)
}

/// The bytes after a UTF-8 byte-order mark, if any; a carriage return not followed by
/// a line feed (an old Mac line end) is refused with its line.
fn text_after_bom<'a>(bytes: &'a [u8], path: &Path) -> Result<&'a [u8], LogError> {
    let bytes = bytes.strip_prefix(b"\xef\xbb\xbf").unwrap_or(bytes);
    if memchr::memchr(b'\r', bytes).is_some_and(|k| bytes.get(k + 1) != Some(&b'\n')) {
        let line =
            1 + memchr::memchr_iter(b'\n', &bytes[..memchr::memchr(b'\r', bytes).unwrap_or(0)])
                .count() as u64;
        return Err(LogError::BareCarriageReturns {
            path: Shown(path.to_path_buf()),
            line,
        });
    }
    Ok(bytes)
}

/// The header (the first line that is not blank or a comment) without its line end, its
/// 1-based line number and the byte offset where the body starts.
fn find_header<'a>(bytes: &'a [u8], path: &Path) -> Result<(&'a str, u64, usize), LogError> {
    let mut pos = 0;
    let mut line_no = 0u64;
    loop {
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
            return Ok((text.trim_end_matches('\r'), line_no, pos));
        }
    }
}

/// First pass over the body: per block `(a, b)` of `parts`, its data rows and its lines
/// (a last line without a line end counts).
fn count_rows(body: &[u8], parts: &[(usize, usize)]) -> Vec<(usize, u64)> {
    parts
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
        .collect()
}

/// The body cut into blocks, with what the first pass counted in each.
struct BodyBlocks<'a> {
    body: &'a [u8],
    /// Byte ranges of the blocks, in order, each ending at a line end.
    parts: &'a [(usize, usize)],
    /// Per block: data rows, lines.
    counts: &'a [(usize, u64)],
    /// The 1-based line number of the body's first line.
    first_line: u64,
}

impl BodyBlocks<'_> {
    /// Second pass: parse each block, in parallel, into its slice of every column of
    /// `data` (sized to the row count); returns the line of every row, in order.
    fn parse_into(
        &self,
        cols: &[Col],
        data: &mut [Vec<f64>],
        path: &Path,
    ) -> Result<RowLines, LogError> {
        let mut per_block: Vec<Targets> = self
            .parts
            .iter()
            .map(|_| Targets { cols: Vec::new() })
            .collect();
        for col in data.iter_mut() {
            let mut rest: &mut [f64] = col.as_mut_slice();
            for (t, c) in per_block.iter_mut().zip(self.counts) {
                let n = if rest.is_empty() { 0 } else { c.0 };
                let (a, b) = std::mem::take(&mut rest).split_at_mut(n);
                t.cols.push(a);
                rest = b;
            }
        }
        let mut first_line = self.first_line;
        let starts: Vec<u64> = self
            .counts
            .iter()
            .map(|c| {
                let s = first_line;
                first_line += c.1;
                s
            })
            .collect();
        let ncol = cols.len();
        let body = self.body;
        let lines: Vec<RowLines> = self
            .parts
            .par_iter()
            .zip(per_block.par_iter_mut())
            .zip(starts.par_iter())
            .map(|((&(a, b), t), &start)| parse_block(&body[a..b], start, cols, t, path, ncol))
            .collect::<Result<_, _>>()?;
        let mut all_lines = RowLines::new();
        for l in &lines {
            for line in l.iter() {
                all_lines.push(line);
            }
        }
        Ok(all_lines)
    }
}

/// Takes parsed columns out by kind, each at most once (a second take gives it empty).
struct ColumnTaker<'a> {
    cols: &'a [Col],
    data: &'a mut [Vec<f64>],
}

impl ColumnTaker<'_> {
    /// The first column whose kind passes `f`.
    fn one(&mut self, f: impl Fn(Kind) -> bool) -> Option<Vec<f64>> {
        let j = self.cols.iter().position(|c| f(c.kind))?;
        Some(std::mem::take(&mut self.data[j]))
    }

    /// The three columns of a group, by `axis` (0 x, 1 y, 2 z, or lat, lon, alt), when
    /// all three are there.
    fn triple(&mut self, axis: fn(Kind) -> Option<usize>) -> Option<[Vec<f64>; 3]> {
        let mut out: [Option<Vec<f64>>; 3] = [None, None, None];
        for (a, slot) in out.iter_mut().enumerate() {
            *slot = self.one(|k| axis(k) == Some(a));
        }
        let [a, b, c] = out;
        Some([a?, b?, c?])
    }

    /// The currents (A) and rod commands, in header order, as regressors; the commands
    /// also as the log's command columns.
    fn regressors(&mut self) -> (Vec<RegressorColumn>, Vec<CommandColumn>) {
        let mut regressors = Vec::new();
        let mut commands = Vec::new();
        for (j, c) in self.cols.iter().enumerate() {
            match c.kind {
                Kind::Current => regressors.push(RegressorColumn {
                    name: c.name.clone(),
                    unit: "A",
                    values: std::mem::take(&mut self.data[j]),
                }),
                Kind::Command => {
                    let values = std::mem::take(&mut self.data[j]);
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
        (regressors, commands)
    }
}

/// The parsed columns into the common log (time after the first row) and the orbit
/// columns (absolute time, positions, regressors).
fn assemble(
    cols: Vec<Col>,
    mut data: Vec<Vec<f64>>,
    lines: RowLines,
    path: &Path,
    header_line: u64,
) -> Result<Telemetry, LogError> {
    let mut take = ColumnTaker {
        cols: &cols,
        data: &mut data,
    };
    let t_unix_s = take
        .one(|k| matches!(k, Kind::TimeIso | Kind::TimeUnix))
        .unwrap_or_default();
    let b_nt = take.triple(Kind::field_axis);
    let ecef = take.triple(Kind::ecef_axis);
    let geo = take.triple(Kind::geo_axis);
    let temp_c = take.one(|k| k == Kind::Temp);
    let (regressors, commands) = take.regressors();
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
