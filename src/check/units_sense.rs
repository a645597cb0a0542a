//! Unit sense: the mean |b| of a log against the field the test implies. A log whose
//! field is off by a factor that a unit mix-up explains (10³ for µT read as nT, 10⁵ for
//! gauss, …) is refused as bad input, with the likely unit named, before any fit runs.

use super::CheckInput;
use crate::log::FieldUnit;
use crate::Error;

/// What field the test implies.
#[derive(Debug, Clone, Copy)]
pub enum ExpectedField {
    /// A known magnitude, nT: a tumble's reference, a cage's mean applied field.
    Magnitude {
        /// The magnitude, nT.
        nt: f64,
        /// What it is, for the message ("reference", "mean applied field").
        what: &'static str,
    },
    /// The geomagnetic field somewhere on Earth (an ambient test without a reference).
    Geomagnetic,
}

/// The geomagnetic field's magnitude range at the surface, nT (IGRF; about 22 000 to
/// 66 000 nT, rounded out).
pub const GEOMAGNETIC_RANGE_NT: (f64, f64) = (20_000.0, 70_000.0);

/// A log whose mean |b| is off by more than this factor from a known magnitude is
/// refused even when no unit explains it.
const FAR_OFF: f64 = 10.0;

const UNITS: [FieldUnit; 6] = [
    FieldUnit::Tesla,
    FieldUnit::Millitesla,
    FieldUnit::Microtesla,
    FieldUnit::Nanotesla,
    FieldUnit::Gauss,
    FieldUnit::Milligauss,
];

/// Mean |b| of the unflagged rows, nT (every row up to 10⁵, a stride beyond).
pub fn mean_field_nt(input: &CheckInput) -> Option<f64> {
    let b = input.log.b_nt.as_ref()?;
    let n = b[0].len();
    let stride = (n / 100_000).max(1);
    let (mut sum, mut count) = (0.0, 0usize);
    for i in (0..n).step_by(stride) {
        if input.saturation.flagged.get(i).copied().unwrap_or(false) {
            continue;
        }
        sum += (b[0][i] * b[0][i] + b[1][i] * b[1][i] + b[2][i] * b[2][i]).sqrt();
        count += 1;
    }
    (count > 0).then(|| sum / count as f64)
}

/// The unit whose values, read as `assumed`, come out `factor` times too small (within
/// a factor of two).
fn unit_for(assumed: FieldUnit, factor: f64) -> Option<FieldUnit> {
    UNITS.into_iter().find(|u| {
        let f = u.to_nt_factor() / assumed.to_nt_factor();
        *u != assumed && (f / factor).ln().abs() < 2f64.ln()
    })
}

/// Refuse a log whose field cannot be in the unit it was read in.
pub fn check_unit_sense(input: &CheckInput, expected: ExpectedField) -> Result<(), Error> {
    let Some(mean) = mean_field_nt(input) else {
        return Ok(());
    };
    if mean <= 0.0 {
        return Ok(());
    }
    let path = input.log.path.display();
    let assumed = input.unit;
    match expected {
        ExpectedField::Magnitude { nt, what } => {
            let factor = nt / mean;
            if factor.ln().abs() < FAR_OFF.ln() {
                return Ok(());
            }
            let hint = match unit_for(assumed, factor) {
                Some(u) => format!(
                    "the field columns look like {u} read as {assumed}; write the unit in \
                     the header (`bx [{u}]`) or give it"
                ),
                None => "check the field unit and that this is the right log".into(),
            };
            Err(Error::Degenerate(format!(
                "{path}: mean |b| is {mean:.4e} nT against a {nt:.0} nT {what}, {factor:.3e} \
                 times too small: {hint}"
            )))
        }
        ExpectedField::Geomagnetic => {
            let (lo, hi) = GEOMAGNETIC_RANGE_NT;
            if (lo / FAR_OFF..=hi * FAR_OFF).contains(&mean) {
                return Ok(());
            }
            let mid = (lo * hi).sqrt();
            match unit_for(assumed, mid / mean) {
                Some(u)
                    if (lo..=hi).contains(&(mean * u.to_nt_factor() / assumed.to_nt_factor())) =>
                {
                    Err(Error::Degenerate(format!(
                        "{path}: mean |b| is {mean:.4e} nT, outside the geomagnetic range \
                         {lo:.0}–{hi:.0} nT: the field columns look like {u} read as \
                         {assumed}; write the unit in the header (`bx [{u}]`) or give it"
                    )))
                }
                _ => Ok(()),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_thousandfold_shortfall_read_as_nt_is_microtesla() {
        assert_eq!(
            unit_for(FieldUnit::Nanotesla, 1000.0),
            Some(FieldUnit::Microtesla)
        );
        assert_eq!(unit_for(FieldUnit::Nanotesla, 1e5), Some(FieldUnit::Gauss));
        assert_eq!(
            unit_for(FieldUnit::Microtesla, 1e-3),
            Some(FieldUnit::Nanotesla)
        );
        assert_eq!(unit_for(FieldUnit::Nanotesla, 30.0), None);
    }
}
