//! The one parser of numeric flags: every number given on the command line is read here,
//! against the domain its flag documents, so no `inf`, `NaN` or out-of-domain value
//! reaches a check, a file or the terminal. clap names the flag in its message
//! ("invalid value 'inf' for '--alt-m <ALT_M>': expected …"); the domain says the rest.
//! The table of flags and domains is in docs/reliability.md ("Numeric flags").

use nalgebra::Vector3;

/// Where a flag's value may lie, with its unit for the message.
#[derive(Debug, Clone, Copy)]
pub struct Domain {
    /// Lowest value.
    pub lo: f64,
    /// Whether `lo` itself is excluded (a positive quantity).
    pub lo_open: bool,
    /// Highest value (included).
    pub hi: f64,
    /// Unit as shown in the message (`""` for a pure number).
    pub unit: &'static str,
}

impl Domain {
    /// `lo..=hi`.
    pub const fn closed(lo: f64, hi: f64, unit: &'static str) -> Self {
        Domain {
            lo,
            lo_open: false,
            hi,
            unit,
        }
    }

    /// Above 0, at most `hi`.
    pub const fn positive(hi: f64, unit: &'static str) -> Self {
        Domain {
            lo: 0.0,
            lo_open: true,
            hi,
            unit,
        }
    }

    fn holds(&self, v: f64) -> bool {
        v.is_finite() && (v > self.lo || (!self.lo_open && v == self.lo)) && v <= self.hi
    }

    fn describe(&self) -> String {
        let unit = if self.unit.is_empty() {
            String::new()
        } else {
            format!(" {}", self.unit)
        };
        let (lo, hi) = (shown(self.lo), shown(self.hi));
        if self.lo_open {
            format!("a finite number above {lo}{unit}, at most {hi}{unit}")
        } else {
            format!("a finite number from {lo}{unit} to {hi}{unit}")
        }
    }
}

/// A bound as written in a message: `1e12` rather than thirteen digits.
fn shown(v: f64) -> String {
    if v.abs() >= 1e6 {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

/// One number in `domain`; `text` is the flag's value as typed.
pub fn number(text: &str, domain: Domain) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(v) if domain.holds(v) => Ok(v),
        _ => Err(format!(
            "expected {}, found \"{}\"",
            domain.describe(),
            text.escape_default()
        )),
    }
}

/// A comma-separated list of numbers, each in `domain`.
pub fn numbers(text: &str, domain: Domain) -> Result<Vec<f64>, String> {
    text.split(',')
        .enumerate()
        .map(|(i, part)| number(part, domain).map_err(|e| format!("element {}: {e}", i + 1)))
        .collect()
}

/// Three comma-separated numbers `X,Y,Z`, each in `domain`.
pub fn vector3(text: &str, domain: Domain) -> Result<Vector3<f64>, String> {
    match numbers(text, domain)?.as_slice() {
        [x, y, z] => Ok(Vector3::new(*x, *y, *z)),
        v => Err(format!("need three numbers X,Y,Z, got {}", v.len())),
    }
}

/// A whole number from `lo` to `hi`.
pub fn count(text: &str, lo: usize, hi: usize) -> Result<usize, String> {
    match text.trim().parse::<usize>() {
        Ok(n) if (lo..=hi).contains(&n) => Ok(n),
        _ => Err(format!(
            "expected a whole number from {lo} to {hi}, found \"{}\"",
            text.escape_default()
        )),
    }
}

/// A field in nT: a sensor range, a reference magnitude (above 0, at most the largest
/// physical field `screen::plausible::MAX_FIELD_NT`, 1000 T).
pub const FIELD_NT: Domain = Domain::positive(magproof::screen::plausible::MAX_FIELD_NT, "nT");

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn non_finite_and_out_of_domain_values_are_refused_with_the_domain() {
        let d = Domain::closed(0.0, 180.0, "deg");
        for bad in [
            "inf", "-inf", "NaN", "nan", "infinity", "181", "-0.5", "", "1e999", "x",
        ] {
            let e = number(bad, d).unwrap_err();
            assert!(
                e.contains("a finite number from 0 deg to 180 deg"),
                "{bad}: {e}"
            );
        }
        assert_eq!(number(" 180 ", d), Ok(180.0));
        assert_eq!(number("0", d), Ok(0.0));
        let p = Domain::positive(10.0, "s");
        assert!(number("0", p)
            .unwrap_err()
            .contains("above 0 s, at most 10 s"));
        assert!(number("2e12", FIELD_NT)
            .unwrap_err()
            .contains("at most 1e12 nT"));
        assert_eq!(number("1e-9", p), Ok(1e-9));
    }

    #[test]
    fn lists_name_the_bad_element_and_a_control_character_is_shown_escaped() {
        let d = Domain::closed(-1.0, 1.0, "");
        assert!(numbers("0,nan,1", d).unwrap_err().starts_with("element 2:"));
        assert!(vector3("0,1", d).unwrap_err().contains("got 2"));
        assert!(!number("\u{1b}[31m", d).unwrap_err().contains('\u{1b}'));
    }
}
