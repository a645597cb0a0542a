//! The command side of a polarity log: the `cmd_<rod>` columns (plan rods first), the
//! refusals of a log whose rods were not all pulsed, the sampling and pulse durations,
//! the rows with any command on, and the remanence state each pulse leaves behind.

use super::timing::{self, Pulse};
use super::warning::PolarityWarning;
use crate::log::{Plan, SweepLog};
use crate::Error;

/// The command columns: the plan's rods first (each must have its `cmd_<rod>` column),
/// then any other `cmd_` column, which is fitted so it cannot leak into the others but
/// gets no verdict. Returns (rod names, command values per row, command units).
pub(super) fn command_columns<'a>(
    plan: &Plan,
    log: &'a SweepLog,
    warnings: &mut Vec<PolarityWarning>,
) -> Result<(Vec<String>, Vec<&'a [f64]>), Error> {
    let mut names: Vec<String> = Vec::new();
    let mut columns: Vec<&[f64]> = Vec::new();
    for rod in &plan.rods {
        let c = log.require_command(&rod.name, &format!("the plan lists rod \"{}\"", rod.name))?;
        names.push(rod.name.clone());
        columns.push(&c.values);
    }
    for c in &log.commands {
        if !names.iter().any(|n| n.eq_ignore_ascii_case(&c.rod)) {
            warnings.push(PolarityWarning::UnplannedColumn {
                header: c.header.clone(),
            });
            names.push(c.rod.clone());
            columns.push(&c.values);
        }
    }
    Ok((names, columns))
}

/// Refuse (as an internal error) field or command columns whose length is not that of
/// the time column `t_s`: the reader gives every column one value per row.
pub(super) fn require_equal_lengths(
    log: &SweepLog,
    t_s: &[f64],
    b_nt: &[Vec<f64>; 3],
    columns: &[&[f64]],
) -> Result<(), Error> {
    let n = t_s.len();
    if b_nt.iter().any(|c| c.len() != n) || columns.iter().any(|c| c.len() != n) {
        return Err(Error::Internal(format!(
            "{}: columns of different lengths in the log",
            log.path.display()
        )));
    }
    Ok(())
}

/// Refuse a log with no pulse at all, a plan rod never pulsed, or too few rows.
pub(super) fn refuse_unpulsed(
    plan: &Plan,
    log: &SweepLog,
    pulses: &[Pulse],
    n: usize,
) -> Result<(), Error> {
    if pulses.is_empty() {
        return Err(Error::Degenerate(format!(
            "{}: no pulses: every cmd_ column is zero, so no rod was driven",
            log.path.display()
        )));
    }
    for (ci, rod) in plan.rods.iter().enumerate() {
        if !pulses.iter().any(|p| p.column == ci) {
            return Err(Error::Degenerate(format!(
                "{}: rod \"{}\" was never pulsed (cmd_{} is zero throughout)",
                log.path.display(),
                rod.name,
                rod.name
            )));
        }
    }
    if n < 10 {
        return Err(Error::Degenerate(format!(
            "{}: {n} rows are too few for a polarity check",
            log.path.display()
        )));
    }
    Ok(())
}

/// The log's sampling and its pulses' durations.
pub(super) struct Sampling {
    /// Median sample interval, s (> 0).
    pub(super) dt_s: f64,
    /// Last time minus first time, s.
    pub(super) span_s: f64,
    /// Longest pulse, s (a pulse running to the end of the log lasts one interval more).
    pub(super) longest_pulse_s: f64,
    /// Shortest pulse, s.
    pub(super) shortest_pulse_s: f64,
}

impl Sampling {
    /// Measure the sampling of `t_s` (at least one row; refused when time does not
    /// advance) and the durations of `pulses`; warns of gaps longer than five intervals.
    pub(super) fn measure(
        log: &SweepLog,
        t_s: &[f64],
        pulses: &[Pulse],
        warnings: &mut Vec<PolarityWarning>,
    ) -> Result<Self, Error> {
        let t = t_s;
        let n = t.len();
        let dt = timing::median_interval_s(t)
            .filter(|d| *d > 0.0)
            .ok_or_else(|| {
                Error::Degenerate(format!("{}: time does not advance", log.path.display()))
            })?;
        let span = t[n - 1] - t[0];
        let dur = |p: &Pulse| t.get(p.end).copied().unwrap_or(t[n - 1] + dt) - t[p.start];
        let longest = pulses.iter().map(dur).fold(0.0, f64::max);
        let shortest = pulses.iter().map(dur).fold(f64::INFINITY, f64::min);
        if t.windows(2).any(|w| w[1] - w[0] > 5.0 * dt) {
            warnings.push(PolarityWarning::Gaps);
        }
        Ok(Sampling {
            dt_s: dt,
            span_s: span,
            longest_pulse_s: longest,
            shortest_pulse_s: shortest,
        })
    }
}

/// Per row, whether any command column is on (inside a pulse); `n` rows.
pub(super) fn any_command_on(pulses: &[Pulse], n: usize) -> Vec<bool> {
    let mut any_on = vec![false; n];
    for p in pulses {
        any_on[p.start..p.end].iter_mut().for_each(|v| *v = true);
    }
    any_on
}

/// Remanence: after a pulse a rod keeps a small dipole along the sign of that pulse.
/// Modelled as the sign of the last pulse while the command is off and zero while it is
/// on (the field while on is the coupling's), for columns pulsed both ways (with one
/// sign only it cannot be told from the baseline: a plan rod gets a warning). Returns
/// (column, state per row).
pub(super) fn remanence_states(
    columns: &[&[f64]],
    pulses: &[Pulse],
    n: usize,
    rod_names: &[String],
    warnings: &mut Vec<PolarityWarning>,
) -> Vec<(usize, Vec<f64>)> {
    let mut rem: Vec<(usize, Vec<f64>)> = Vec::new();
    for c in 0..columns.len() {
        let mine: Vec<&Pulse> = pulses.iter().filter(|p| p.column == c).collect();
        let both = mine.iter().any(|p| p.command > 0.0) && mine.iter().any(|p| p.command < 0.0);
        if !both {
            if let Some(rod) = rod_names.get(c) {
                warnings.push(PolarityWarning::OneSignOnly { rod: rod.clone() });
            }
            continue;
        }
        let mut state = vec![0.0; n];
        let mut k = 0;
        let mut s = 0.0;
        for (i, v) in state.iter_mut().enumerate() {
            while k < mine.len() && mine[k].start <= i {
                s = mine[k].command.signum();
                k += 1;
            }
            *v = if k > 0 && i < mine[k - 1].end { 0.0 } else { s };
        }
        rem.push((c, state));
    }
    rem
}
