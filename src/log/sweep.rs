//! Streaming reader for sweep logs (DESIGN §4).
//!
//! The file is read line by line into one reused buffer; each data row is parsed into a
//! small row buffer and, once the whole row is good, appended to columns of `f64`. The
//! file is never held in memory as one string.

use std::fs::File;
use std::io::Read;
use std::path::{Path, PathBuf};

use super::columns::ColumnsBuilder;
use super::error::{LogError, Shown};
use super::fast_row::FastRow;
use super::header::{parse_header, ColumnKind, Header, TimeUnit};
use super::lines::LineReader;
use super::parallel::{parse_parts, split_block, Part, MIN_PARALLEL_BYTES};
use super::row_lines::RowLines;
use super::units::FieldUnit;

/// How to read a sweep log.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// Unit of field columns whose header carries none (`--unit`, else the plan, else nT).
    pub default_unit: FieldUnit,
    /// Skip rows with a bad cell, a wrong field count or backwards time, and count them,
    /// instead of refusing the file.
    pub skip_bad_rows: bool,
}

/// A row that was skipped under `--skip-bad-rows`, with the reason.
#[derive(Debug, Clone)]
pub struct SkippedRow {
    /// 1-based line in the file.
    pub line: u64,
    /// The error the row would have raised.
    pub reason: String,
}

/// One torque-rod command column (`cmd_<rod>`), in the log's own command unit.
#[derive(Debug, Clone)]
pub struct CommandColumn {
    /// Rod name: the header name after `cmd_`, lower case.
    pub rod: String,
    /// The column as written in the header.
    pub header: String,
    /// Command value per row (any unit; the plan's nominal dipole is per this unit).
    pub values: Vec<f64>,
}

/// A sweep log read into columns. Every column has one entry per kept row.
#[derive(Debug, Clone, Default)]
pub struct SweepLog {
    /// The file it came from.
    pub path: PathBuf,
    /// Time of each row, s. From ISO-8601 timestamps: seconds after the first row.
    pub t_s: Option<Vec<f64>>,
    /// The first ISO-8601 timestamp as written, when time was given that way.
    pub t0_iso: Option<String>,
    /// Measured field, sensor frame (S), nT: `[bx, by, bz]`.
    pub b_nt: Option<[Vec<f64>; 3]>,
    /// Applied reference field, cage frame, nT: `[hx, hy, hz]`.
    pub h_nt: Option<[Vec<f64>; 3]>,
    /// Temperature, °C.
    pub temp_c: Option<Vec<f64>>,
    /// Torque-rod commands, one column per rod, in header order.
    pub commands: Vec<CommandColumn>,
    /// Turntable angle, rad (right-handed about the table's +z axis).
    pub angle_rad: Option<Vec<f64>>,
    /// Mount label per row; `None` where the article is absent (empty cell or `none`).
    pub mount: Option<Vec<Option<u32>>>,
    /// The distinct mount labels, indexed by the values of `mount`.
    pub mount_labels: Vec<String>,
    /// Probe position, table frame (L), m: `[px, py, pz]`.
    pub probe_m: Option<[Vec<f64>; 3]>,
    /// 1-based file line of each kept row, for messages.
    pub lines: RowLines,
    /// Columns present in the file that no check uses, as written in the header.
    pub ignored_columns: Vec<String>,
    /// Rows skipped under `--skip-bad-rows`.
    pub skipped_rows: Vec<SkippedRow>,
    /// Line of the header.
    pub header_line: u64,
}

impl SweepLog {
    /// Number of kept rows.
    pub fn len(&self) -> usize {
        self.lines.len()
    }

    /// True when no row was kept.
    pub fn is_empty(&self) -> bool {
        self.lines.is_empty()
    }

    fn missing(&self, column: &str, why: &str) -> LogError {
        LogError::MissingColumn {
            path: Shown(self.path.clone()),
            column: column.to_string(),
            why: why.to_string(),
        }
    }

    /// The measured field columns, or an error naming the missing column and why
    /// the caller needs it.
    pub fn require_field(&self, why: &str) -> Result<&[Vec<f64>; 3], LogError> {
        self.b_nt
            .as_ref()
            .ok_or_else(|| self.missing("bx, by, bz", why))
    }

    /// The time column, or an error saying why it is needed.
    pub fn require_time(&self, why: &str) -> Result<&[f64], LogError> {
        self.t_s.as_deref().ok_or_else(|| self.missing("t", why))
    }

    /// The command column of one rod, or an error naming `cmd_<rod>`.
    pub fn require_command(&self, rod: &str, why: &str) -> Result<&CommandColumn, LogError> {
        let key = rod.to_ascii_lowercase();
        self.commands
            .iter()
            .find(|c| c.rod == key)
            .ok_or_else(|| self.missing(&format!("cmd_{rod}"), why))
    }

    /// Measured field of row `i`, sensor frame, nT.
    pub fn field_at(&self, i: usize) -> Option<nalgebra::Vector3<f64>> {
        let b = self.b_nt.as_ref()?;
        Some(nalgebra::Vector3::new(
            *b[0].get(i)?,
            *b[1].get(i)?,
            *b[2].get(i)?,
        ))
    }
}

/// Read a sweep log from a file (DESIGN §4).
pub fn read_sweep(path: &Path, options: &ReadOptions) -> Result<SweepLog, LogError> {
    read_sweep_with_progress(path, options, &mut |_| {})
}

/// As [`read_sweep`], calling `progress(bytes_read)` now and then (for a progress bar).
pub fn read_sweep_with_progress(
    path: &Path,
    options: &ReadOptions,
    progress: &mut dyn FnMut(u64),
) -> Result<SweepLog, LogError> {
    let file = File::open(path).map_err(|source| LogError::Io {
        path: Shown(path.to_path_buf()),
        source,
    })?;
    let size = file.metadata().map(|m| m.len()).ok();
    read_sweep_impl(file, path, options, progress, RowPath::Fast, size)
}

/// Read a sweep log from any reader; `path` is used in messages only.
pub fn read_sweep_from(
    reader: impl Read + Send,
    path: &Path,
    options: &ReadOptions,
    progress: &mut dyn FnMut(u64),
) -> Result<SweepLog, LogError> {
    read_sweep_impl(reader, path, options, progress, RowPath::Fast, None)
}

/// Which row parser reads the plain rows (tests compare the two).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum RowPath {
    /// Plain numeric rows take [`FastRow`]; the rest the general parser.
    Fast,
    /// Every row goes through the general parser.
    #[cfg_attr(not(test), allow(dead_code))]
    GeneralOnly,
    /// As `Fast`, with every block split into this many parts whatever its size.
    #[cfg_attr(not(test), allow(dead_code))]
    Parallel(usize),
}

/// Where rows go: the parsers, the columns and the log being built.
struct RowSink<'a> {
    path: &'a Path,
    header: &'a Header,
    options: &'a ReadOptions,
    fast: Option<FastRow>,
    builder: ColumnsBuilder,
    row: RowParser,
    log: SweepLog,
}

impl RowSink<'_> {
    /// Read one line (without `\n`) that is line `line_no` of the file.
    fn line(&mut self, buf: &[u8], line_no: u64) -> Result<(), LogError> {
        let text = trim_line_end(buf);
        if is_blank_or_comment(text) {
            return Ok(());
        }
        let (row, builder) = (&mut self.row, &mut self.builder);
        // Plain numeric rows take the fast path; anything else, including every row
        // that would be refused, is read by the general parser.
        if let (Some(fast), false) = (&self.fast, row.time_is_iso == Some(true)) {
            if let Some(time) = fast.parse(text, &mut row.numbers, builder.last_time()) {
                if time.is_some() {
                    row.time_is_iso = Some(false);
                }
                row.time_s = time;
                builder.push(row, line_no, &mut self.log.mount_labels);
                return Ok(());
            }
        }
        match row.parse(text, self.path, line_no, self.header, builder.last_time()) {
            Ok(()) => {
                builder.push(row, line_no, &mut self.log.mount_labels);
            }
            Err(e) if self.options.skip_bad_rows && e.line().is_some() => {
                self.log.skipped_rows.push(SkippedRow {
                    line: line_no,
                    reason: e.to_string(),
                });
            }
            Err(e) => return Err(e),
        }
        Ok(())
    }

    /// Read every line of `bytes` (complete lines, each ending with `\n`), the first
    /// being line `before + 1`. Returns the number of lines.
    fn lines(&mut self, bytes: &[u8], before: u64) -> Result<u64, LogError> {
        let mut count = 0;
        let mut pos = 0;
        while pos < bytes.len() {
            let end = memchr::memchr(b'\n', &bytes[pos..]).map_or(bytes.len(), |i| pos + i);
            count += 1;
            self.line(&bytes[pos..end], before + count)?;
            pos = end + 1;
        }
        Ok(count)
    }

    /// Take a part read in parallel: its plain rows if they fit after the rows so far,
    /// then the rest of it line by line. `bytes` is the part, its first line is line
    /// `before + 1`. Returns the number of lines.
    fn part(&mut self, bytes: &[u8], part: &Part, before: u64) -> Result<u64, LogError> {
        let first_time = part.time.first().copied();
        let fits = self.row.time_is_iso != Some(true)
            && match (first_time, self.builder.last_time()) {
                (Some(t), Some(prev)) => t >= prev,
                _ => true,
            };
        if !fits {
            return self.lines(bytes, before);
        }
        self.builder.append(part, before);
        if first_time.is_some() {
            self.row.time_is_iso = Some(false);
        }
        match part.stop {
            None => Ok(part.line_count),
            Some((offset, lines_before)) => {
                let rest = bytes.get(offset..).unwrap_or(&[]);
                Ok(lines_before + self.lines(rest, before + lines_before)?)
            }
        }
    }
}

pub(crate) fn read_sweep_impl(
    reader: impl Read + Send,
    path: &Path,
    options: &ReadOptions,
    progress: &mut dyn FnMut(u64),
    row_path: RowPath,
    size_hint_bytes: Option<u64>,
) -> Result<SweepLog, LogError> {
    let mut lines = LineReader::new(reader);
    let shown = || Shown(path.to_path_buf());
    let io_err = |source| LogError::Io {
        path: Shown(path.to_path_buf()),
        source,
    };
    let mut line_no: u64 = 0;
    let mut next_report: u64 = 1 << 22;
    let mut bytes_read: u64;

    // Header: the first line that is neither blank nor a comment.
    let header: Header = loop {
        let Some((buf, consumed)) = lines.next_line().map_err(io_err)? else {
            return Err(LogError::NoHeader { path: shown() });
        };
        line_no += 1;
        bytes_read = consumed;
        let mut text: &[u8] = trim_line_end(buf);
        if line_no == 1 {
            text = text.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(text);
        }
        if is_blank_or_comment(text) {
            continue;
        }
        let text = std::str::from_utf8(text).map_err(|_| LogError::NotUtf8 {
            path: shown(),
            line: line_no,
        })?;
        break parse_header(text, path, line_no, options.default_unit)?;
    };

    let log = SweepLog {
        path: path.to_path_buf(),
        header_line: line_no,
        ignored_columns: header.ignored.clone(),
        ..SweepLog::default()
    };
    let mut sink = RowSink {
        path,
        header: &header,
        options,
        fast: FastRow::new(&header).filter(|_| row_path != RowPath::GeneralOnly),
        builder: ColumnsBuilder::new(&header),
        row: RowParser::new(&header),
        log,
    };

    // Once some rows are in, the columns get room for the whole file at the bytes per
    // row seen so far (growing them by doubling would copy and page them in again).
    let mut sized = size_hint_bytes.is_none();
    // Large plain blocks: parts parsed on all cores, appended in order (see parallel.rs).
    let threads = match row_path {
        RowPath::Parallel(n) => n,
        _ => rayon::current_num_threads(),
    };
    if threads > 1 {
        let mut pool: Vec<Part> = Vec::new();
        let min_bytes = match row_path {
            RowPath::Parallel(_) => 0,
            _ => MIN_PARALLEL_BYTES,
        };
        while let Some(fast) = sink.fast.clone() {
            // While this block is parsed, the next one is read (see `LineReader`).
            let before = line_no;
            let (sink, pool) = (&mut sink, &mut pool);
            let parse = |block: &[u8]| -> Result<u64, LogError> {
                if block.len() < min_bytes {
                    return sink.lines(block, before);
                }
                let pieces = split_block(block, threads);
                parse_parts(
                    &pieces,
                    pool,
                    &fast,
                    header.columns.len(),
                    &sink.builder.numeric,
                    sink.builder.has_time,
                );
                let mut done = 0;
                for (bytes, part) in pieces.iter().zip(pool.iter()) {
                    done += sink.part(bytes, part, before + done)?;
                }
                Ok(done)
            };
            let Some((done, consumed)) = lines.next_block_with(parse).map_err(io_err)? else {
                break;
            };
            line_no += done?;
            bytes_read = consumed;
            if !sized {
                sized = sink.builder.reserve_for(bytes_read, size_hint_bytes);
            }
            if bytes_read >= next_report {
                progress(bytes_read);
                next_report = bytes_read + (1 << 22);
            }
        }
    }

    while let Some((buf, consumed)) = lines.next_line().map_err(io_err)? {
        line_no += 1;
        bytes_read = consumed;
        if !sized && line_no % 1024 == 0 {
            sized = sink.builder.reserve_for(bytes_read, size_hint_bytes);
        }
        if bytes_read >= next_report {
            progress(bytes_read);
            next_report = bytes_read + (1 << 22);
        }
        sink.line(buf, line_no)?;
    }
    let RowSink {
        builder,
        mut row,
        mut log,
        ..
    } = sink;
    progress(bytes_read);
    if builder.lines.is_empty() {
        if log.skipped_rows.is_empty() {
            return Err(LogError::NoRows {
                path: shown(),
                header_line: log.header_line,
            });
        }
        // Every row was bad: say so with the first reason rather than "no rows".
        let first = &log.skipped_rows[0];
        return Err(LogError::Cell {
            path: shown(),
            line: first.line,
            column: "(every row)".into(),
            problem: format!(
                "all {} data rows were bad and skipped; the first one: {}",
                log.skipped_rows.len(),
                first.reason
            ),
            found: String::new(),
        });
    }
    builder.finish(&header, &mut log);
    log.t0_iso = row.first_iso.take();
    Ok(log)
}

pub(crate) fn trim_line_end(buf: &[u8]) -> &[u8] {
    let mut end = buf.len();
    while end > 0 && (buf[end - 1] == b'\n' || buf[end - 1] == b'\r') {
        end -= 1;
    }
    &buf[..end]
}

pub(crate) fn is_blank_or_comment(text: &[u8]) -> bool {
    match text.iter().position(|c| !c.is_ascii_whitespace()) {
        None => true,
        Some(i) => text[i] == b'#',
    }
}

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
    first_iso: Option<String>,
    time_is_iso: Option<bool>,
}

impl RowParser {
    fn new(header: &Header) -> Self {
        RowParser {
            numbers: vec![0.0; header.columns.len()],
            mount_label: String::new(),
            has_label: false,
            time_s: None,
            fields: Vec::with_capacity(header.columns.len()),
            first_epoch_s: None,
            first_iso: None,
            time_is_iso: None,
        }
    }

    fn parse(
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
                ColumnKind::Mount => {
                    let s = std::str::from_utf8(cell)
                        .map_err(|_| cell_err("expected a mount label in UTF-8 text"))?;
                    let s = s.trim();
                    self.has_label = !(s.is_empty() || s.eq_ignore_ascii_case("none"));
                    if self.has_label {
                        self.mount_label.clear();
                        self.mount_label.push_str(s);
                    }
                }
                ColumnKind::Time(unit) => {
                    let t = self.parse_time(cell, *unit, &cell_err)?;
                    if let Some(prev) = last_time {
                        if t < prev {
                            return Err(LogError::TimeBackwards {
                                path: Shown(path.to_path_buf()),
                                line,
                                column: col.raw.clone(),
                                found: t,
                                previous: prev,
                            });
                        }
                    }
                    self.time_s = Some(t);
                }
                _ => {
                    let v = parse_number(cell, &cell_err)?;
                    self.numbers[k] = v * col.scale;
                    if !self.numbers[k].is_finite() {
                        return Err(cell_err("the value overflows once converted"));
                    }
                }
            }
        }
        Ok(())
    }

    fn parse_time(
        &mut self,
        cell: &[u8],
        unit: TimeUnit,
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
            return Ok(parse_number(cell, cell_err)? * unit.to_seconds());
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

fn parse_number(cell: &[u8], cell_err: &dyn Fn(&str) -> LogError) -> Result<f64, LogError> {
    if cell.is_empty() {
        return Err(cell_err("expected a number, the cell is empty"));
    }
    match fast_float2::parse::<f64, _>(cell) {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(cell_err("expected a finite number")),
        Err(_) => Err(cell_err("expected a number")),
    }
}

fn trim_cell(cell: &[u8]) -> &[u8] {
    let start = cell.iter().position(|c| !c.is_ascii_whitespace());
    let Some(start) = start else { return &[] };
    let end = cell
        .iter()
        .rposition(|c| !c.is_ascii_whitespace())
        .unwrap_or(start);
    let cell = &cell[start..=end];
    if cell.len() >= 2 && cell[0] == b'"' && cell[cell.len() - 1] == b'"' {
        &cell[1..cell.len() - 1]
    } else {
        cell
    }
}

fn shorten(cell: &[u8]) -> String {
    let s = String::from_utf8_lossy(cell);
    if s.chars().count() > 40 {
        let head: String = s.chars().take(37).collect();
        format!("{head}...")
    } else {
        s.into_owned()
    }
}

/// Split a line into field byte ranges. Double-quoted fields may hold the delimiter.
pub(crate) fn split_fields(text: &[u8], delimiter: u8, out: &mut Vec<(usize, usize)>) {
    out.clear();
    if memchr::memchr(b'"', text).is_none() {
        let mut start = 0;
        for i in memchr::memchr_iter(delimiter, text) {
            out.push((start, i));
            start = i + 1;
        }
        out.push((start, text.len()));
        return;
    }
    let mut start = 0;
    let mut in_quotes = false;
    for (i, &c) in text.iter().enumerate() {
        if c == b'"' {
            in_quotes = !in_quotes;
        } else if c == delimiter && !in_quotes {
            out.push((start, i));
            start = i + 1;
        }
    }
    out.push((start, text.len()));
}

#[cfg(test)]
// Unit conversion must be exact (powers of ten applied to exactly representable values),
// so these tests compare floats exactly on purpose.
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    fn read(text: &str, opts: &ReadOptions) -> Result<SweepLog, LogError> {
        read_sweep_from(text.as_bytes(), Path::new("mem.csv"), opts, &mut |_| {})
    }

    #[test]
    fn columns_units_and_lines_are_kept() {
        let log = read(
            "# rig 3\nt [ms],bx [uT],by [uT],bz [uT],hx,hy,hz,temp,cmd_X,angle,mount,px [mm],py,pz\n\
             0,1,2,3,10,20,30,21.5,0.5,90,upright,100,0,0\n\
             # comment between rows\n\
             500,4,5,6,10,20,30,21.6,-0.5,180,,200,0,0\n",
            &ReadOptions::default(),
        )
        .unwrap();
        assert_eq!(log.len(), 2);
        assert_eq!(log.lines.to_vec(), vec![3, 5]);
        assert_eq!(log.t_s.as_ref().unwrap()[1], 0.5);
        assert_eq!(log.b_nt.as_ref().unwrap()[2][1], 6000.0);
        assert_eq!(log.h_nt.as_ref().unwrap()[1][0], 20.0);
        assert_eq!(log.commands[0].rod, "x");
        assert_eq!(log.commands[0].header, "cmd_X");
        assert!((log.angle_rad.as_ref().unwrap()[0] - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
        assert_eq!(log.mount.as_ref().unwrap(), &vec![Some(0), None]);
        assert_eq!(log.mount_labels, vec!["upright".to_string()]);
        assert!((log.probe_m.as_ref().unwrap()[0][1] - 0.2).abs() < 1e-15);
    }

    #[test]
    fn quoted_fields_may_hold_the_delimiter() {
        let log = read(
            "bx,by,bz,mount\n1,2,3,\"side, left\"\n",
            &ReadOptions::default(),
        )
        .unwrap();
        assert_eq!(log.mount_labels, vec!["side, left".to_string()]);
    }

    #[test]
    fn default_unit_applies_only_without_a_bracket() {
        let opts = ReadOptions {
            default_unit: FieldUnit::Gauss,
            ..ReadOptions::default()
        };
        let log = read("bx,by [nT],bz\n1,1,1\n", &opts).unwrap();
        let b = log.b_nt.unwrap();
        assert_eq!((b[0][0], b[1][0]), (100_000.0, 1.0));
    }

    #[test]
    fn mixed_time_formats_are_refused() {
        let e = read(
            "t,bx,by,bz\n2026-01-01T00:00:00Z,1,2,3\n5,1,2,3\n",
            &ReadOptions::default(),
        )
        .unwrap_err();
        assert_eq!(e.line(), Some(3));
    }

    #[test]
    fn every_row_bad_is_an_error_even_when_skipping() {
        let opts = ReadOptions {
            skip_bad_rows: true,
            ..ReadOptions::default()
        };
        let e = read("bx,by,bz\nx,1,1\ny,1,1\n", &opts).unwrap_err();
        assert!(e.to_string().contains("all 2 data rows were bad"), "{e}");
    }

    #[test]
    fn overflow_after_conversion_is_refused() {
        let e = read("bx [T],by,bz\n1e300,1,1\n", &ReadOptions::default()).unwrap_err();
        assert!(e.to_string().contains("overflows"), "{e}");
    }
}
