//! Streaming reader for sweep logs (format: `docs/formats.md`).
//!
//! The file is read line by line into one reused buffer; each data row is parsed into a
//! small row buffer and, once the whole row is good, appended to columns of `f64`. The
//! file is never held in memory as one string.
//!
//! The reader's files depend on each other one way only: `bytes` (byte helpers) and
//! `sweep_log` (the public [`SweepLog`]) use nothing else of the reader; `header` uses
//! `bytes`; `row` (the general row parser) uses `bytes` and `header`; `fast_row`,
//! `parallel` and `columns` come next; this file, the reader itself, comes last.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use super::bytes::{is_blank_or_comment, trim_line_end};
use super::columns::ColumnsBuilder;
use super::encoding::{sniff, Encoding};
use super::error::{LogError, Shown};
use super::fast_row::FastRow;
use super::hash::HashingReader;
use super::header::{parse_header, Header};
use super::layout::LogLayout;
use super::lines::LineReader;
use super::parallel::{parse_parts, split_block, Part, MIN_PARALLEL_BYTES};
use super::row::RowParser;
use super::sweep_log::{SkippedRow, SweepLog};
use super::units::FieldUnit;

/// How to read a sweep log.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// Unit of field columns whose header carries none (`--unit`, else the plan, else nT).
    pub default_unit: FieldUnit,
    /// Skip rows with a bad cell, a wrong field count or backwards time, and count them,
    /// instead of refusing the file.
    pub skip_bad_rows: bool,
    /// The log's own column names, raw counts, decimal commas, held commands.
    pub layout: LogLayout,
}

/// Read a sweep log from a file (format: `docs/formats.md`).
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

/// How far the reader has got in the file, and when to report progress next.
struct ReadPos<'p> {
    /// Lines read so far (the last one read is line `line_no`, 1-based).
    line_no: u64,
    /// Bytes consumed so far.
    bytes_read: u64,
    /// `progress` is called once `bytes_read` reaches this.
    next_report: u64,
    /// True once the columns have room for the whole file (or its size is unknown).
    sized: bool,
    /// The file size in bytes, when known.
    size_hint_bytes: Option<u64>,
    progress: &'p mut dyn FnMut(u64),
}

impl ReadPos<'_> {
    /// Call `progress` when another 4 MiB have been read since the last call.
    fn report(&mut self) {
        if self.bytes_read >= self.next_report {
            (self.progress)(self.bytes_read);
            self.next_report = self.bytes_read + (1 << 22);
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
    let mut lines = LineReader::new(HashingReader::new(reader));
    let mut pos = ReadPos {
        line_no: 0,
        bytes_read: 0,
        next_report: 1 << 22,
        // Once some rows are in, the columns get room for the whole file at the bytes
        // per row seen so far (growing them by doubling would copy and page them in
        // again).
        sized: size_hint_bytes.is_none(),
        size_hint_bytes,
        progress,
    };
    let header = read_header(&mut lines, path, options, &mut pos)?;

    let log = SweepLog {
        path: path.to_path_buf(),
        header_line: pos.line_no,
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

    // Large plain blocks: parts parsed on all cores, appended in order (see parallel.rs).
    let threads = match row_path {
        RowPath::Parallel(n) => n,
        _ => rayon::current_num_threads(),
    };
    if threads > 1 {
        let min_bytes = match row_path {
            RowPath::Parallel(_) => 0,
            _ => MIN_PARALLEL_BYTES,
        };
        read_blocks(&mut lines, &mut sink, &mut pos, threads, min_bytes)?;
    }
    read_lines(&mut lines, &mut sink, &mut pos)?;
    sink.log.sha256 = lines.inner().hex_digest();
    finish(sink, &mut pos)
}

fn io_error(path: &Path) -> impl Fn(std::io::Error) -> LogError + '_ {
    move |source| LogError::Io {
        path: Shown(path.to_path_buf()),
        source,
    }
}

/// Read up to the header, the first line that is neither blank nor a comment, and
/// parse it.
fn read_header(
    lines: &mut LineReader<impl Read>,
    path: &Path,
    options: &ReadOptions,
    pos: &mut ReadPos<'_>,
) -> Result<Header, LogError> {
    let shown = || Shown(path.to_path_buf());
    loop {
        let Some((buf, consumed)) = lines.next_line().map_err(io_error(path))? else {
            return Err(LogError::NoHeader { path: shown() });
        };
        pos.line_no += 1;
        pos.bytes_read = consumed;
        if let Some(encoding) = sniff(trim_line_end(buf), pos.line_no == 1) {
            return Err(match encoding {
                Encoding::Binary => LogError::NotUtf8 {
                    path: shown(),
                    line: pos.line_no,
                },
                encoding => LogError::Encoding {
                    path: shown(),
                    line: pos.line_no,
                    encoding,
                },
            });
        }
        let mut text: &[u8] = trim_line_end(buf);
        if memchr::memchr(b'\r', text).is_some() {
            return Err(LogError::BareCarriageReturns {
                path: shown(),
                line: pos.line_no,
            });
        }
        if pos.line_no == 1 {
            text = text.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(text);
        }
        if is_blank_or_comment(text) {
            continue;
        }
        let text = std::str::from_utf8(text).map_err(|_| LogError::NotUtf8 {
            path: shown(),
            line: pos.line_no,
        })?;
        return parse_header(
            text,
            path,
            pos.line_no,
            options.default_unit,
            &options.layout,
        );
    }
}

/// Read block after block while the rows take the fast path: blocks of at least
/// `min_bytes` are cut into `threads` parts parsed in parallel and appended in order.
fn read_blocks(
    lines: &mut LineReader<impl Read + Send>,
    sink: &mut RowSink<'_>,
    pos: &mut ReadPos<'_>,
    threads: usize,
    min_bytes: usize,
) -> Result<(), LogError> {
    let mut pool: Vec<Part> = Vec::new();
    let ncols = sink.header.columns.len();
    while let Some(fast) = sink.fast.clone() {
        // While this block is parsed, the next one is read (see `LineReader`).
        let before = pos.line_no;
        let (sink, pool) = (&mut *sink, &mut pool);
        let parse = |block: &[u8]| -> Result<u64, LogError> {
            if block.len() < min_bytes {
                return sink.lines(block, before);
            }
            let pieces = split_block(block, threads);
            parse_parts(
                &pieces,
                pool,
                &fast,
                ncols,
                &sink.builder.numeric,
                sink.builder.has_time,
            );
            let mut done = 0;
            for (bytes, part) in pieces.iter().zip(pool.iter()) {
                done += sink.part(bytes, part, before + done)?;
            }
            Ok(done)
        };
        let Some((done, consumed)) = lines.next_block_with(parse).map_err(io_error(sink.path))?
        else {
            break;
        };
        pos.line_no += done?;
        pos.bytes_read = consumed;
        if !pos.sized {
            pos.sized = sink
                .builder
                .reserve_for(pos.bytes_read, pos.size_hint_bytes);
        }
        pos.report();
    }
    Ok(())
}

/// Read the rest of the file line by line.
fn read_lines(
    lines: &mut LineReader<impl Read>,
    sink: &mut RowSink<'_>,
    pos: &mut ReadPos<'_>,
) -> Result<(), LogError> {
    while let Some((buf, consumed)) = lines.next_line().map_err(io_error(sink.path))? {
        pos.line_no += 1;
        pos.bytes_read = consumed;
        if !pos.sized && pos.line_no % 1024 == 0 {
            pos.sized = sink
                .builder
                .reserve_for(pos.bytes_read, pos.size_hint_bytes);
        }
        pos.report();
        sink.line(buf, pos.line_no)?;
    }
    Ok(())
}

/// Report the final progress and move the columns into the log; a file without a kept
/// row is an error.
fn finish(sink: RowSink<'_>, pos: &mut ReadPos<'_>) -> Result<SweepLog, LogError> {
    let RowSink {
        path,
        header,
        builder,
        mut row,
        mut log,
        ..
    } = sink;
    let shown = || Shown(path.to_path_buf());
    (pos.progress)(pos.bytes_read);
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
    builder.finish(header, &mut log);
    if let Some(iso) = row.first_iso.take() {
        log.t0_iso = Some(iso);
    }
    Ok(log)
}
