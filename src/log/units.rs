//! Field units of sweep logs and plans (listed in `docs/formats.md`) and their exact
//! conversion to nanotesla.
//!
//! Every factor is an exact power of ten (1 G = 10⁻⁴ T = 100 000 nT, 1 mG = 100 nT,
//! 1 µT = 1 000 nT), so integer readings convert without rounding.

use std::fmt;
use std::str::FromStr;

/// A magnetic-field unit accepted in a column header (`bx [uT]`), a plan or `--unit`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FieldUnit {
    /// tesla
    Tesla,
    /// millitesla
    Millitesla,
    /// microtesla (`uT` or `µT`)
    Microtesla,
    /// nanotesla, the internal unit
    #[default]
    Nanotesla,
    /// gauss (10⁻⁴ T)
    Gauss,
    /// milligauss (10⁻⁷ T)
    Milligauss,
}

impl FieldUnit {
    /// Multiply a value in this unit by this factor to get nT.
    pub fn to_nt_factor(self) -> f64 {
        match self {
            FieldUnit::Tesla => 1e9,
            FieldUnit::Millitesla => 1e6,
            FieldUnit::Microtesla => 1e3,
            FieldUnit::Nanotesla => 1.0,
            FieldUnit::Gauss => 1e5,
            FieldUnit::Milligauss => 1e2,
        }
    }

    /// Convert a value in this unit to nT.
    pub fn to_nt(self, value: f64) -> f64 {
        value * self.to_nt_factor()
    }

    /// The unit's symbol as written in files.
    pub fn symbol(self) -> &'static str {
        match self {
            FieldUnit::Tesla => "T",
            FieldUnit::Millitesla => "mT",
            FieldUnit::Microtesla => "uT",
            FieldUnit::Nanotesla => "nT",
            FieldUnit::Gauss => "G",
            FieldUnit::Milligauss => "mG",
        }
    }
}

impl fmt::Display for FieldUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// The text was not one of the field units listed in `docs/formats.md`.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown field unit \"{0}\" (expected one of T, mT, uT, µT, nT, G, mG)")]
pub struct UnknownUnit(pub String);

impl FromStr for FieldUnit {
    type Err = UnknownUnit;

    /// Parse a unit symbol. Symbols are case-sensitive where case matters
    /// (`mT` is millitesla, `MT` is refused), as SI requires.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim() {
            "T" => Ok(FieldUnit::Tesla),
            "mT" => Ok(FieldUnit::Millitesla),
            "uT" | "µT" | "μT" => Ok(FieldUnit::Microtesla),
            "nT" => Ok(FieldUnit::Nanotesla),
            "G" => Ok(FieldUnit::Gauss),
            "mG" => Ok(FieldUnit::Milligauss),
            other => Err(UnknownUnit(other.to_string())),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Exact SI relations (BIPM SI brochure; 1 G = 1e-4 T by definition of the CGS unit).
    #[test]
    fn conversions_are_exact() {
        assert_eq!(FieldUnit::Gauss.to_nt(1.0).to_bits(), 100_000f64.to_bits());
        assert_eq!(FieldUnit::Milligauss.to_nt(1.0).to_bits(), 100f64.to_bits());
        assert_eq!(
            FieldUnit::Microtesla.to_nt(1.0).to_bits(),
            1000f64.to_bits()
        );
        assert_eq!(FieldUnit::Tesla.to_nt(1.0).to_bits(), 1e9f64.to_bits());
        assert_eq!(
            FieldUnit::Millitesla.to_nt(48.0).to_bits(),
            48e6f64.to_bits()
        );
    }

    #[test]
    fn micro_sign_and_greek_mu_both_parse() {
        assert_eq!("µT".parse::<FieldUnit>(), Ok(FieldUnit::Microtesla));
        assert_eq!("μT".parse::<FieldUnit>(), Ok(FieldUnit::Microtesla));
        assert_eq!("uT".parse::<FieldUnit>(), Ok(FieldUnit::Microtesla));
    }

    #[test]
    fn unknown_unit_is_refused() {
        assert!("Oe".parse::<FieldUnit>().is_err());
        assert!("MT".parse::<FieldUnit>().is_err());
    }
}
