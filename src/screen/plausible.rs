//! Field readings no sensor can give: a log whose values would overflow the fits'
//! sums of squares (|B| beyond 10¹² nT = 1000 T) or whose largest reading is below
//! 10⁻³ nT (1 pT, below the noise floor of any fluxgate or magnetoresistive sensor — common
//! practice) is refused with the reason before any fit runs. Both usually mean a wrong
//! field unit.

use rayon::prelude::*;

use crate::log::SweepLog;
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
    // Largest |b| over the three field columns, found in the same pass.
    let mut largest = 0.0_f64;
    for (prefix, cols) in groups {
        let Some(cols) = cols else { continue };
        for (axis, col) in cols.iter().enumerate() {
            let (first_bad, col_largest) = scan(col);
            if let Some(i) = first_bad {
                let line = log.lines.get(i).unwrap_or(0);
                return Err(Error::Degenerate(format!(
                    "{}:{line}: {prefix}{} = {:e} nT is beyond any physical field (limit \
                     {MAX_FIELD_NT:e} nT = 1000 T); check the field unit (the unit given, the \
                     plan's, or the column header's)",
                    log.path.display(),
                    ["x", "y", "z"][axis],
                    col[i]
                )));
            }
            if prefix == "b" {
                largest = largest.max(col_largest);
            }
        }
    }
    if let Some(b) = &log.b_nt {
        if !b[0].is_empty() && largest < MIN_SIGNAL_NT {
            return Err(Error::Degenerate(format!(
                "{}: the largest field reading is {largest:e} nT, below {MIN_SIGNAL_NT:e} nT \
                 (1 pT): no magnetometer resolves that; check the field unit (the unit given, the \
                 plan's, or the column header's) or whether the sensor gave any signal",
                log.path.display()
            )));
        }
    }
    Ok(())
}

/// One pass over a column (in parallel chunks): the index of its first value that is
/// NaN or beyond [`MAX_FIELD_NT`], and its largest |value| (meaningful when there is
/// no such value).
fn scan(col: &[f64]) -> (Option<usize>, f64) {
    // NaN or too large (the negated comparison is also true for NaN).
    #[allow(clippy::neg_cmp_op_on_partial_ord)]
    fn is_bad(abs: f64) -> bool {
        !(abs <= MAX_FIELD_NT)
    }
    let chunk = |(c, ch): (usize, &[f64])| {
        let mut largest = 0.0_f64;
        let mut bad = false;
        for v in ch {
            let a = v.abs();
            bad |= is_bad(a);
            largest = largest.max(a);
        }
        let first = if bad {
            ch.iter()
                .position(|v| is_bad(v.abs()))
                .map(|i| c * CHUNK + i)
        } else {
            None
        };
        (first, largest)
    };
    col.par_chunks(CHUNK).enumerate().map(chunk).reduce(
        || (None, 0.0),
        |(fa, la), (fb, lb)| {
            let first = match (fa, fb) {
                (Some(a), Some(b)) => Some(a.min(b)),
                (a, b) => a.or(b),
            };
            (first, la.max(lb))
        },
    )
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
    fn the_first_bad_value_of_a_long_column_is_named() {
        // Past several parallel chunks; a NaN later on must not win over the first.
        let n = 5 * CHUNK;
        let mut by = vec![40_000.0; n];
        by[3 * CHUNK + 7] = -2e13;
        by[4 * CHUNK] = f64::NAN;
        let log = log_of([vec![1.0; n], by, vec![2.0; n]]);
        let e = check_field_scale(&log).unwrap_err().to_string();
        let line = 2 + 3 * CHUNK + 7;
        assert!(
            e.contains(&format!(":{line}:")) && e.contains("-2e13"),
            "{e}"
        );
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
