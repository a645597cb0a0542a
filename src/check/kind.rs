//! The registry of check kinds: the one place that lists every check the program can
//! run. Closeout, the ledger, history and the writers read kinds from here and never
//! match on a particular kind, so a new check is its own files plus one line in
//! [`specs`].

use std::fmt;
use std::sync::OnceLock;

use serde::Serialize;

use super::input::CheckInput;
use super::outcome::CheckResult;
use crate::log::Plan;
use crate::Error;

/// A kind of check, by its stable name (`calibrate`, `polarity`, `dipole`, …).
///
/// The name is what plans write in `[[step]] kind`, what the ledger stores and what
/// `history --kind` takes. Only names in the registry can be made by [`CheckKind::parse`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
#[serde(transparent)]
pub struct CheckKind(&'static str);

impl CheckKind {
    /// A kind with this name; for a check module's own `KIND` constant. Anything read
    /// from a file or typed by a user goes through [`CheckKind::parse`] instead.
    pub const fn new(name: &'static str) -> Self {
        CheckKind(name)
    }

    /// The stable name.
    pub fn as_str(self) -> &'static str {
        self.0
    }

    /// The registered kind with this name, if any.
    pub fn parse(name: &str) -> Option<Self> {
        specs().iter().map(|s| s.kind).find(|k| k.0 == name)
    }

    /// Every registered kind, in registry order.
    pub fn all() -> impl Iterator<Item = CheckKind> {
        specs().iter().map(|s| s.kind)
    }

    /// The registered names joined for a message: "calibrate, polarity, dipole".
    pub fn names() -> String {
        Self::all().map(|k| k.0).collect::<Vec<_>>().join(", ")
    }

    /// This kind's registry entry.
    pub fn spec(self) -> Result<&'static CheckSpec, Error> {
        specs()
            .iter()
            .find(|s| s.kind == self)
            .ok_or_else(|| Error::Internal(format!("check kind {:?} is not registered", self.0)))
    }
}

impl fmt::Display for CheckKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.0)
    }
}

/// How a closeout step runs one check: the step's log, already read and screened,
/// and the plan it belongs to.
pub type RunStep = fn(&CheckInput, &Plan) -> Result<Box<dyn CheckResult>, Error>;

/// One registered check.
#[derive(Debug, Clone, Copy)]
pub struct CheckSpec {
    /// Its kind.
    pub kind: CheckKind,
    /// Heading of its report section ("Magnetometer calibration").
    pub title: &'static str,
    /// Whether the plan's `[magnetometer] range_nt` applies to this check's log (true
    /// when the flight magnetometer records it, false for an external probe).
    pub plan_range_applies: fn(&Plan) -> bool,
    /// Run it as a closeout step.
    pub run_step: RunStep,
}

/// Every registered check, in the order closeout summaries and history list them.
pub fn specs() -> &'static [CheckSpec] {
    static SPECS: OnceLock<Vec<CheckSpec>> = OnceLock::new();
    SPECS.get_or_init(|| {
        #[allow(unused_mut)]
        let mut specs = vec![
            super::calibrate::seam::SPEC,
            super::polarity::seam::SPEC,
            super::dipole::seam::SPEC,
            super::align::seam::SPEC,
            super::rod::seam::SPEC,
            super::orbit::seam::SPEC,
            super::loop_law::seam::SPEC,
        ];
        #[cfg(test)]
        specs.push(super::dummy::SPEC);
        specs
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_registered_kind_parses_back_and_names_are_unique() {
        let names: Vec<&str> = CheckKind::all().map(CheckKind::as_str).collect();
        for n in &names {
            assert_eq!(CheckKind::parse(n).map(CheckKind::as_str), Some(*n));
            assert_eq!(names.iter().filter(|m| *m == n).count(), 1, "{n} twice");
        }
        assert!(CheckKind::parse("tumble").is_none());
    }
}
