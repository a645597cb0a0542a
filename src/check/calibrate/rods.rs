//! Torque rods in a calibration log: rows with any rod on, or still settling after a
//! command change, carry the rod's own field and are left out of the fit.

use crate::log::{Plan, SweepLog};

/// Settle time after a command change when the plan's `[[rod]]` gives none, s (common
/// practice for small air- and ferrite-core rods driven by a current source).
pub const DEFAULT_SETTLE_S: f64 = 0.2;

/// Rows blanked because a rod was on or settling, and how many there were.
#[derive(Debug, Clone, Default)]
pub(super) struct RodBlanking {
    /// One flag per row.
    pub blanked: Vec<bool>,
    /// Rows blanked.
    pub rows: usize,
    /// Command columns seen.
    pub columns: usize,
}

/// The blanking of every `cmd_<rod>` column of `log`: a row is blanked while the
/// command is non-zero and for the rod's settle time after every change of it (by row
/// count, one row, when the log has no time column).
// Logged commands are set points read as written: a change is any difference, and off
// is exactly zero.
#[allow(clippy::float_cmp)]
pub(super) fn rod_blanking(log: &SweepLog, plan: Option<&Plan>) -> RodBlanking {
    let n = log.len();
    let mut blanked = vec![false; n];
    for c in &log.commands {
        let settle_s = plan
            .and_then(|p| p.rods.iter().find(|r| r.name.eq_ignore_ascii_case(&c.rod)))
            .and_then(|r| r.settle_s)
            .unwrap_or(DEFAULT_SETTLE_S);
        let mut last_change: Option<usize> = None;
        for i in 0..n.min(c.values.len()) {
            if i > 0 && c.values[i] != c.values[i - 1] {
                last_change = Some(i);
            }
            let settling = last_change.is_some_and(|k| match &log.t_s {
                Some(t) => t[i] - t[k] < settle_s * (1.0 - 1e-9),
                None => i == k,
            });
            if c.values[i] != 0.0 || settling {
                blanked[i] = true;
            }
        }
    }
    let rows = blanked.iter().filter(|b| **b).count();
    RodBlanking {
        blanked,
        rows,
        columns: log.commands.len(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::CommandColumn;

    #[test]
    fn on_rows_and_the_settle_window_after_each_change_are_blanked() {
        let log = SweepLog {
            t_s: Some((0..10).map(|i| i as f64 * 0.1).collect()),
            commands: vec![CommandColumn {
                rod: "x".into(),
                header: "cmd_x".into(),
                values: vec![0.0, 0.0, 1.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
            }],
            lines: (2..12).collect(),
            ..Default::default()
        };
        // On at rows 2–3; off at row 4, settling until 0.4 + 0.2 s: rows 4 and 5
        // (0.5 s), not row 6 (0.6 s, 0.2 s after the change).
        let b = rod_blanking(&log, None);
        let expect = [
            false, false, true, true, true, true, false, false, false, false,
        ];
        assert_eq!(b.blanked, expect);
        assert_eq!(b.rows, 4);
    }
}
