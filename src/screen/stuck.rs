//! A stuck sensor axis: one axis of `bx by bz` holding the very same value in every row
//! while another axis varies. No working sensor repeats one reading bit for bit over a
//! whole log (its noise alone moves the last digit), so the axis is stuck, disconnected
//! or filled in; a fit would take the constant for a field and give a wrong number
//! without a warning. The log is refused, naming the axis and its value. A log whose
//! three axes are all constant is left to the fits, which refuse it as constant.

use crate::log::SweepLog;
use crate::Error;

/// Fewest unflagged rows for the screen to judge an axis: below this a log is too short
/// to call an axis stuck, and the checks' own minimum counts (30 samples for a
/// calibration) speak first.
pub const MIN_ROWS: usize = 30;

/// Refuse a log with a stuck sensor axis (sensor frame, nT). Rows where `flagged` is true
/// (saturated, already left out) are not looked at.
pub fn check_stuck_axes(log: &SweepLog, flagged: &[bool]) -> Result<(), Error> {
    let Some(b) = log.b_nt.as_ref() else {
        return Ok(());
    };
    let kept = |i: &usize| !flagged.get(*i).copied().unwrap_or(false);
    let mut constant = [None; 3];
    let mut rows = 0;
    for (axis, col) in b.iter().enumerate() {
        let mut values = (0..col.len()).filter(kept).map(|i| col[i]);
        let Some(first) = values.next() else {
            return Ok(());
        };
        let mut n = 1;
        let mut same = true;
        for v in values {
            n += 1;
            same &= v.to_bits() == first.to_bits();
        }
        rows = n;
        if same {
            constant[axis] = Some(first);
        }
    }
    if rows < MIN_ROWS || constant.iter().all(Option::is_some) {
        return Ok(());
    }
    match constant.iter().position(Option::is_some) {
        None => Ok(()),
        Some(axis) => Err(Error::Degenerate(format!(
            "{}: sensor {} reads {} nT in every one of its {rows} rows while the other axes \
             vary: the axis is stuck (constant), disconnected or filled in, and any fit on it \
             would be wrong; check the sensor and its wiring and record the log again",
            log.path.display(),
            ["x", "y", "z"][axis],
            constant[axis].unwrap_or_default()
        ))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn log(z: impl Fn(usize) -> f64) -> SweepLog {
        let n = 50;
        SweepLog {
            path: "l.csv".into(),
            b_nt: Some([
                (0..n).map(|i| 100.0 + i as f64).collect(),
                (0..n).map(|i| (i as f64).sin()).collect(),
                (0..n).map(z).collect(),
            ]),
            ..SweepLog::default()
        }
    }

    // Common practice: a constant channel among varying ones is a stuck channel.
    #[test]
    fn a_constant_axis_among_varying_ones_is_refused_by_name() {
        let err = check_stuck_axes(&log(|_| -41000.0), &[])
            .unwrap_err()
            .to_string();
        assert!(err.contains("sensor z") && err.contains("-41000"), "{err}");
        assert!(check_stuck_axes(&log(|i| -41000.0 + 1e-3 * i as f64), &[]).is_ok());
    }

    // Common practice: rows already flagged as saturated are out of every judgement.
    #[test]
    fn flagged_rows_are_not_looked_at() {
        let mut flagged = vec![false; 50];
        flagged[3] = true;
        let l = log(|i| if i == 3 { 5.0 } else { 7.0 });
        assert!(check_stuck_axes(&l, &flagged).is_err());
        assert!(check_stuck_axes(&l, &[]).is_ok());
    }
}
