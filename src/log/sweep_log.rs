//! The public result of reading a sweep log: [`SweepLog`], its columns in internal
//! units (nT, s, rad, m), and accessors that name a missing column and why it is needed.
//!
//! This file depends only on the error type and the row-line store, so every other part
//! of the reader may use it.

use std::path::PathBuf;

use super::error::{LogError, Shown};
use super::row_lines::RowLines;

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

/// A column the reader used: our quantity and the column as written in the log.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct UsedColumn {
    /// Our name of the quantity (`bx`, `t`, `cmd_x`).
    pub quantity: String,
    /// The column as written in the header (`MAG_X [uT]`).
    pub header: String,
    /// Unit conversion applied, as a factor to the internal unit (nT, s, rad, m, A,
    /// rad/s; 1 for commands, labels and time stamps).
    pub scale: f64,
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
    /// Cage coil currents, A: `[ix, iy, iz]` (the input builder turns them into the
    /// applied field with the plan's `[cage] nt_per_amp`).
    pub i_a: Option<[Vec<f64>; 3]>,
    /// Angular rate, gyro frame, rad/s: `[gx, gy, gz]`.
    pub gyro_rad_s: Option<[Vec<f64>; 3]>,
    /// Temperature, °C.
    pub temp_c: Option<Vec<f64>>,
    /// Rod current on the bench (`i`), A.
    pub current_a: Option<Vec<f64>>,
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
    /// The columns used, in header order: our quantity and the column as written.
    pub columns_used: Vec<UsedColumn>,
    /// Columns present in the file that no check uses, as written in the header.
    pub ignored_columns: Vec<String>,
    /// Rows skipped under `--skip-bad-rows`.
    pub skipped_rows: Vec<SkippedRow>,
    /// Line of the header.
    pub header_line: u64,
    /// SHA-256 (lower-case hex) of the bytes read, hashed in the same pass that parsed
    /// them: the identity of exactly what was analysed.
    pub sha256: String,
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
