//! The one input builder every check uses: read the log, resolve the field unit and the
//! sensor range (command line, else plan, else default), screen the readings once for
//! impossible values and saturation, and carry what the reader skipped. Checks take its
//! [`CheckInput`] and never call the reader themselves.

use std::fmt;
use std::path::Path;

use super::input_forms::{currents_to_field, layout_for, spread_repeated_times};
use crate::log::{read_sweep_with_progress, FieldUnit, Plan, ReadOptions, SweepLog};
use crate::screen::plausible::check_field_scale;
use crate::screen::saturation::{screen_log, SaturationCause, SaturationReport};
use crate::screen::stuck::check_stuck_axes;
use crate::Error;

/// How to read a log, as the user asked (each `None` falls back to the plan, then to
/// the default).
#[derive(Debug, Clone, Copy, Default)]
pub struct InputOptions {
    /// Field unit of columns whose header names none; beats the plan's
    /// `[magnetometer] unit`. Default nT.
    pub unit: Option<FieldUnit>,
    /// Sensor full-scale range per axis, nT; beats the plan's `[magnetometer] range_nt`
    /// when that applies to the sensor that recorded the log.
    pub range_nt: Option<f64>,
    /// Skip rows with a bad cell (counted and reported) instead of refusing the log.
    pub skip_bad_rows: bool,
    /// Whether the plan's `[magnetometer] range_nt` applies: true when the flight
    /// magnetometer recorded the log, false for an external probe.
    pub plan_range_applies: bool,
    /// Numbers are written with a decimal comma (`--decimal-comma`; the plan's
    /// `[log] decimal = ","` says so too).
    pub decimal_comma: bool,
}

/// Something about the input that every check reports the same way.
#[derive(Debug, Clone, PartialEq)]
pub enum InputWarning {
    /// Readings on one axis were flagged as saturated and left out.
    Saturated {
        /// Sensor axis, 0 = x.
        axis: usize,
        /// Readings flagged on that axis.
        count: usize,
        /// The level, nT.
        level_nt: f64,
        /// Beyond the range, or piled up on a rail.
        cause: SaturationCause,
    },
    /// Rows shared a timestamp with the row before (a coarse clock); they were spread
    /// evenly up to the next time.
    RepeatedTimes {
        /// Rows whose time equals the row before's.
        count: usize,
        /// File line of the first.
        first_line: u64,
    },
    /// The log gives coil currents and the plan no `[cage] ambient_nt`: the ambient field
    /// is folded into the hard iron.
    AmbientFolded,
    /// Rows were skipped by the reader (`skip_bad_rows`).
    SkippedRows {
        /// Rows skipped.
        count: usize,
        /// Why the first one was skipped, with its line.
        first: String,
    },
}

impl fmt::Display for InputWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            InputWarning::Saturated {
                axis,
                count,
                level_nt,
                cause: SaturationCause::BeyondRange,
            } => write!(
                f,
                "sensor {}: {count} readings at or beyond the range ±{level_nt} nT were \
                 flagged as saturated and left out",
                axis_name(*axis)
            ),
            InputWarning::Saturated {
                axis,
                count,
                level_nt,
                cause: SaturationCause::Rail,
            } => write!(
                f,
                "sensor {}: {count} readings piled up at {level_nt} nT (the axis's rail) were \
                 flagged as saturated and left out; give the sensor's full-scale range if \
                 that is not it",
                axis_name(*axis)
            ),
            InputWarning::RepeatedTimes { count, first_line } => write!(
                f,
                "{count} rows repeat the timestamp of the row before (first on line \
                 {first_line}): the clock is coarser than the sampling; they were spread \
                 evenly up to the next time, so time steps are estimates"
            ),
            InputWarning::AmbientFolded => f.write_str(
                "the applied field comes from coil currents and the plan gives no [cage] \
                 ambient_nt: the ambient field with the coils off is folded into the hard \
                 iron; give ambient_nt (cage frame, nT) to separate them",
            ),
            InputWarning::SkippedRows { count, first } => write!(
                f,
                "{count} bad rows were skipped as asked; the first: {first}; fix or remove \
                 them to use every row"
            ),
        }
    }
}

fn axis_name(axis: usize) -> &'static str {
    ["x", "y", "z"].get(axis).copied().unwrap_or("?")
}

/// How the reader reads a log under `plan` as `options` ask: the field unit of columns
/// without one (command line, else the plan's magnetometer, else nT) and the layout
/// (`[columns]`, the magnetometer's columns and counts, `[log]`, `--decimal-comma`).
pub fn read_options(plan: Option<&Plan>, options: &InputOptions) -> Result<ReadOptions, Error> {
    let unit = options
        .unit
        .or_else(|| plan.and_then(|p| p.magnetometer.as_ref()?.unit))
        .unwrap_or_default();
    Ok(ReadOptions {
        default_unit: unit,
        skip_bad_rows: options.skip_bad_rows,
        layout: layout_for(plan, options)?,
    })
}

/// A log read and screened once, ready for any check.
#[derive(Debug, Clone)]
pub struct CheckInput {
    /// The log, field in nT.
    pub log: SweepLog,
    /// The unit assumed for field columns whose header names none.
    pub unit: FieldUnit,
    /// The sensor range applied, nT per axis (`None`: only the rail heuristic).
    pub range_nt: Option<f64>,
    /// Rows flagged as saturated, and what was found per axis.
    pub saturation: SaturationReport,
    /// What the reader and the screens found, for the check's warnings.
    pub warnings: Vec<InputWarning>,
}

impl CheckInput {
    /// Read and screen the log at `path`.
    pub fn read(path: &Path, plan: Option<&Plan>, options: &InputOptions) -> Result<Self, Error> {
        Self::read_with_progress(path, plan, options, &mut |_| {})
    }

    /// As [`CheckInput::read`], calling `progress(bytes_read)` while the log is read.
    pub fn read_with_progress(
        path: &Path,
        plan: Option<&Plan>,
        options: &InputOptions,
        progress: &mut dyn FnMut(u64),
    ) -> Result<Self, Error> {
        let magnetometer = plan.and_then(|p| p.magnetometer.as_ref());
        let read = read_options(plan, options)?;
        let mut log = read_sweep_with_progress(path, &read, progress)?;
        let mut early = Vec::new();
        currents_to_field(&mut log, plan, &mut early)?;
        let range_nt = options.range_nt.or_else(|| {
            magnetometer
                .and_then(|m| m.range_nt)
                .filter(|_| options.plan_range_applies)
        });
        let mut input = Self::screen(log, read.default_unit, range_nt)?;
        input.warnings.extend(early);
        Ok(input)
    }

    /// Screen a log already read: impossible values refuse it; saturated rows are
    /// flagged (an axis saturated throughout refuses it).
    pub fn screen(
        mut log: SweepLog,
        unit: FieldUnit,
        range_nt: Option<f64>,
    ) -> Result<Self, Error> {
        let repeated = log.t_s.as_mut().and_then(|t| spread_repeated_times(t));
        check_field_scale(&log)?;
        let saturation = screen_log(&log, range_nt)?;
        check_stuck_axes(&log, &saturation.flagged)?;
        let mut warnings: Vec<InputWarning> = saturation
            .axes
            .iter()
            .map(|a| InputWarning::Saturated {
                axis: a.axis,
                count: a.count,
                level_nt: a.level_nt,
                cause: a.cause,
            })
            .collect();
        if let Some((count, first)) = repeated {
            warnings.push(InputWarning::RepeatedTimes {
                count,
                first_line: log.lines.get(first).unwrap_or(0),
            });
        }
        if let Some(first) = log.skipped_rows.first() {
            warnings.push(InputWarning::SkippedRows {
                count: log.skipped_rows.len(),
                first: first.reason.clone(),
            });
        }
        Ok(CheckInput {
            log,
            unit,
            range_nt,
            saturation,
            warnings,
        })
    }

    /// Rows flagged as saturated.
    pub fn saturated_rows(&self) -> usize {
        self.saturation.count()
    }
}
