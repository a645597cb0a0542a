//! Columns of a sweep log as rows are accepted: one `f64` vector per numeric column,
//! time, mount label indices (first-seen order) and the file line of each row.

use std::collections::HashMap;

use super::column_kind::{ColumnKind, TimeUnit};
use super::header::Header;
use super::parallel::Part;
use super::row::RowParser;
use super::row_lines::RowLines;
use super::sweep_log::{CommandColumn, SweepLog, UsedColumn};

/// Accumulates good rows into columns.
pub(super) struct ColumnsBuilder {
    pub(super) numbers: Vec<Vec<f64>>,
    /// Indices of the numeric columns (the ones with a vector in `numbers`).
    pub(super) numeric: Vec<usize>,
    pub(super) time: Vec<f64>,
    pub(super) mount: Vec<Option<u32>>,
    pub(super) lines: RowLines,
    pub(super) has_time: bool,
    pub(super) has_mount: bool,
    /// Index of each mount label in `SweepLog::mount_labels` (first-seen order).
    label_index: HashMap<String, u32>,
}

impl ColumnsBuilder {
    pub(super) fn new(header: &Header) -> Self {
        ColumnsBuilder {
            numbers: header
                .columns
                .iter()
                .map(|c| {
                    if c.kind.is_numeric() {
                        Vec::with_capacity(1024)
                    } else {
                        Vec::new()
                    }
                })
                .collect(),
            numeric: (0..header.columns.len())
                .filter(|&k| header.columns[k].kind.is_numeric())
                .collect(),
            time: Vec::new(),
            mount: Vec::new(),
            lines: RowLines::new(),
            has_time: header
                .columns
                .iter()
                .any(|c| matches!(c.kind, ColumnKind::Time(_))),
            has_mount: header
                .columns
                .iter()
                .any(|c| matches!(c.kind, ColumnKind::Mount)),
            label_index: HashMap::new(),
        }
    }

    /// Append the plain rows of a part whose first line is line `before + 1`.
    pub(super) fn append(&mut self, part: &Part, before: u64) {
        let ColumnsBuilder {
            numbers,
            numeric,
            time,
            mount,
            lines,
            has_time,
            has_mount,
            ..
        } = self;
        if *has_mount {
            // Not reached: the fast path refuses headers with a mount column.
            mount.extend(part.lines.iter().map(|_| None));
        }
        // One task per column: on a long log most of the time here goes to paging in
        // the growing columns, which the threads do side by side.
        rayon::scope(|s| {
            let targets = numbers
                .iter_mut()
                .enumerate()
                .filter(|(k, _)| numeric.binary_search(k).is_ok())
                .map(|(_, col)| col);
            for (col, values) in targets.zip(&part.numbers) {
                s.spawn(move |_| col.extend_from_slice(values));
            }
            if *has_time {
                s.spawn(|_| time.extend_from_slice(&part.time));
            }
            lines.append_shifted(&part.lines, before);
        });
    }

    /// With `bytes_read` of a file of `size_bytes` read, reserve room for the rows the
    /// whole file holds at the bytes per row seen so far (plus 5 %). Returns true once
    /// done (or when there is nothing to go on).
    pub(super) fn reserve_for(&mut self, bytes_read: u64, size_bytes: Option<u64>) -> bool {
        let rows = self.lines.len();
        let Some(size) = size_bytes else { return true };
        if rows < 1024 || bytes_read == 0 {
            return false;
        }
        let expected = (rows as f64 * size as f64 / bytes_read as f64 * 1.05) as usize;
        let extra = expected.saturating_sub(rows);
        for &k in &self.numeric {
            if let Some(col) = self.numbers.get_mut(k) {
                col.reserve(extra);
            }
        }
        if self.has_time {
            self.time.reserve(extra);
        }
        if self.has_mount {
            self.mount.reserve(extra);
        }
        true
    }

    pub(super) fn last_time(&self) -> Option<f64> {
        self.time.last().copied()
    }

    pub(super) fn push(&mut self, row: &RowParser, line: u64, labels: &mut Vec<String>) {
        for &k in &self.numeric {
            if let (Some(col), Some(&v)) = (self.numbers.get_mut(k), row.numbers.get(k)) {
                col.push(v);
            }
        }
        if self.has_time {
            self.time.push(row.time_s.unwrap_or(f64::NAN));
        }
        if self.has_mount {
            let idx = row.has_label.then(|| {
                let label = row.mount_label.as_str();
                match self.label_index.get(label) {
                    Some(&i) => i,
                    None => {
                        let i = labels.len() as u32;
                        labels.push(label.to_string());
                        self.label_index.insert(label.to_string(), i);
                        i
                    }
                }
            });
            self.mount.push(idx);
        }
        self.lines.push(line);
    }

    pub(super) fn finish(mut self, header: &Header, log: &mut SweepLog) {
        let mut take = |kind: &ColumnKind| -> Option<Vec<f64>> {
            let k = header.columns.iter().position(|c| &c.kind == kind)?;
            Some(std::mem::take(&mut self.numbers[k]))
        };
        use ColumnKind as K;
        let triple = |a: Option<Vec<f64>>, b: Option<Vec<f64>>, c: Option<Vec<f64>>| match (a, b, c)
        {
            (Some(a), Some(b), Some(c)) => Some([a, b, c]),
            _ => None,
        };
        log.b_nt = triple(take(&K::Field(0)), take(&K::Field(1)), take(&K::Field(2)));
        log.h_nt = triple(
            take(&K::Applied(0)),
            take(&K::Applied(1)),
            take(&K::Applied(2)),
        );
        log.probe_m = triple(take(&K::Probe(0)), take(&K::Probe(1)), take(&K::Probe(2)));
        log.i_a = triple(
            take(&K::Current(0)),
            take(&K::Current(1)),
            take(&K::Current(2)),
        );
        log.gyro_rad_s = triple(take(&K::Gyro(0)), take(&K::Gyro(1)), take(&K::Gyro(2)));
        log.temp_c = take(&K::Temperature);
        log.current_a = take(&K::RodCurrent);
        log.angle_rad = take(&K::Angle);
        for (k, col) in header.columns.iter().enumerate() {
            if let ColumnKind::Command(rod) = &col.kind {
                log.commands.push(CommandColumn {
                    rod: rod.clone(),
                    header: col.raw.clone(),
                    values: std::mem::take(&mut self.numbers[k]),
                });
            }
        }
        if self.has_time {
            if header.time_unit() == Some(TimeUnit::Unix) {
                log.t0_iso = self.time.first().and_then(|&t0| unix_to_iso(t0));
                let t0 = self.time.first().copied().unwrap_or(0.0);
                self.time.iter_mut().for_each(|t| *t -= t0);
            }
            log.t_s = Some(self.time);
        }
        log.columns_used = header
            .columns
            .iter()
            .filter(|c| c.kind != ColumnKind::Ignored)
            .map(|c| UsedColumn {
                quantity: c.kind.quantity(),
                header: c.raw.clone(),
                scale: c.scale,
            })
            .collect();
        if self.has_mount {
            log.mount = Some(self.mount);
        }
        log.lines = self.lines;
    }
}

/// Seconds since 1970 as an RFC 3339 timestamp (UTC), for the log's first time.
fn unix_to_iso(t_s: f64) -> Option<String> {
    let whole = t_s.floor();
    let nanos = ((t_s - whole) * 1e9).round().clamp(0.0, 999_999_999.0) as i128;
    let t = time::OffsetDateTime::from_unix_timestamp_nanos(whole as i128 * 1_000_000_000 + nanos)
        .ok()?;
    t.format(&time::format_description::well_known::Rfc3339)
        .ok()
}
