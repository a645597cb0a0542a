//! Field readings no sensor can give: a log whose values would overflow the fits'
//! sums of squares (|B| beyond 10¹² nT = 1000 T) or whose largest reading is below
//! 10⁻³ nT (1 pT, below the noise floor of any fluxgate or magnetoresistive sensor — common
//! practice) is refused with the reason before any fit runs. Both usually mean a wrong
//! field unit.

use rayon::prelude::*;

use super::SweepLog;
use crate::Error;

/// Values per task when a long log is checked in parallel.
const CHUNK: usize = 65_536;

/// Largest |reading| accepted, nT (1000 T: beyond any laboratory magnet; its square
/// and sums of squares stay far inside f64).
pub const MAX_FIELD_NT: f64 = 1e12;

/// A log whose largest |reading| is below this is refused, nT.
pub const MIN_SIGNAL_NT: f64 = 1e-3;

/// Refuse a log whose `bx by bz` (and `hx hy hz`, when present) hold a value beyond
/// [`MAX_FIELD_NT`], or whose field readings all lie below [`MIN_SIGNAL_NT`].
pub fn check_field_scale(log: &SweepLog) -> Result<(), Error> {
    let groups = [("b", log.b_nt.as_ref()), ("h", log.h_nt.as_ref())];
    for (prefix, cols) in groups {
        let Some(cols) = cols else { continue };
        for (axis, col) in cols.iter().enumerate() {
            let bad = |v: &f64| v.is_nan() || v.abs() > MAX_FIELD_NT;
            let first_bad = col
                .par_chunks(CHUNK)
                .position_first(|ch| ch.iter().any(bad));
            if let Some(i) =
                first_bad.and_then(|c| col[c * CHUNK..].iter().position(bad).map(|i| c * CHUNK + i))
            {
                let line = log.lines.get(i).unwrap_or(0);
                return Err(Error::Degenerate(format!(
                    "{}:{line}: {prefix}{} = {:e} nT is beyond any physical field (limit \
                     {MAX_FIELD_NT:e} nT = 1000 T); check the field unit (--unit, or the \
                     column header)",
                    log.path.display(),
                    ["x", "y", "z"][axis],
                    col[i]
                )));
            }
        }
    }
    if let Some(b) = &log.b_nt {
        let largest = b
            .iter()
            .map(|c| {
                c.par_chunks(CHUNK)
                    .map(|ch| ch.iter().fold(0.0_f64, |m, v| m.max(v.abs())))
                    .reduce(|| 0.0, f64::max)
            })
            .fold(0.0_f64, f64::max);
        if !b[0].is_empty() && largest < MIN_SIGNAL_NT {
            return Err(Error::Degenerate(format!(
                "{}: the largest field reading is {largest:e} nT, below {MIN_SIGNAL_NT:e} nT \
                 (1 pT): no magnetometer resolves that; check the field unit (--unit, or the \
                 column header) or whether the sensor gave any signal",
                log.path.display()
            )));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn log_of(b: [Vec<f64>; 3]) -> SweepLog {
        let n = b[0].len();
        SweepLog {
            lines: (2..2 + n as u64).collect(),
            b_nt: Some(b),
            ..SweepLog::default()
        }
    }

    #[test]
    fn huge_value_is_refused_naming_line_and_column() {
        let log = log_of([vec![1.0, 2.0], vec![3.0, 4e300], vec![5.0, 6.0]]);
        let e = check_field_scale(&log).unwrap_err().to_string();
        assert!(e.contains(":3:") && e.contains("by = 4e300"), "{e}");
    }

    #[test]
    fn tiny_log_is_refused_and_ordinary_log_passes() {
        let tiny = log_of([vec![1e-300; 3], vec![-2e-300; 3], vec![0.0; 3]]);
        assert!(check_field_scale(&tiny)
            .unwrap_err()
            .to_string()
            .contains("below"));
        let ok = log_of([vec![48_000.0; 3], vec![-2.0; 3], vec![0.0; 3]]);
        assert!(check_field_scale(&ok).is_ok());
    }
}
