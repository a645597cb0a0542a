//! What every check's result offers the rest of the program: its kind, its verdict,
//! the gates behind the verdict, its warnings, the quantities the ledger compares across
//! builds, a one-line summary and the report sections every writer renders.
//! Closeout, the ledger, history and the writers see results only through
//! [`CheckResult`].

use std::fmt;

use serde::Serialize;

use super::kind::CheckKind;
use crate::ledger::Quantity;
use crate::report::Section;
use crate::Error;

/// A check's verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Every gate and limit met.
    Pass,
    /// A gate or limit shows the article is wrong.
    Fail,
    /// The data cannot answer: a gate about the data itself failed.
    Inconclusive,
    /// Nothing to judge against (no limit in the plan).
    NoLimit,
}

impl Verdict {
    /// From an optional pass flag (`None`: no limit).
    pub fn from_pass(pass: Option<bool>) -> Self {
        match pass {
            Some(true) => Verdict::Pass,
            Some(false) => Verdict::Fail,
            None => Verdict::NoLimit,
        }
    }

    /// The verdict from every gate: a failed article gate gives `Fail`, which wins over
    /// a failed data gate (`Inconclusive`); no gate at all gives `NoLimit`.
    pub fn from_gates(gates: &[Gate]) -> Self {
        if gates.iter().any(|g| !g.ok && g.role == GateRole::Article) {
            Verdict::Fail
        } else if gates.iter().any(|g| !g.ok) {
            Verdict::Inconclusive
        } else if gates.is_empty() {
            Verdict::NoLimit
        } else {
            Verdict::Pass
        }
    }

    /// The word shown with the verdict.
    pub fn word(self) -> &'static str {
        match self {
            Verdict::Pass => "PASS",
            Verdict::Fail => "FAIL",
            Verdict::Inconclusive => "INCONCLUSIVE",
            Verdict::NoLimit => "NO LIMIT",
        }
    }

    /// `Some(true)` for a pass, `Some(false)` for fail or inconclusive, `None` when
    /// there was nothing to judge against (the `pass` key of the results).
    pub fn pass(self) -> Option<bool> {
        match self {
            Verdict::Pass => Some(true),
            Verdict::Fail | Verdict::Inconclusive => Some(false),
            Verdict::NoLimit => None,
        }
    }

    /// The verdict of several results together: the worst of them.
    pub fn combine(verdicts: impl IntoIterator<Item = Verdict>) -> Verdict {
        let all: Vec<Verdict> = verdicts.into_iter().collect();
        if all.contains(&Verdict::Fail) {
            Verdict::Fail
        } else if all.contains(&Verdict::Inconclusive) {
            Verdict::Inconclusive
        } else if all.contains(&Verdict::Pass) {
            Verdict::Pass
        } else {
            Verdict::NoLimit
        }
    }
}

impl fmt::Display for Verdict {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.word())
    }
}

/// What a failed gate says.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum GateRole {
    /// A failure shows the article is wrong: the verdict is `fail`.
    Article,
    /// A failure means the data cannot answer: the verdict is `inconclusive`.
    Data,
}

/// Which side of its limit a gate's value must be on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Bound {
    /// `value ≤ limit`.
    AtMost,
    /// `value ≥ limit`.
    AtLeast,
    /// `value > limit`.
    Above,
}

impl Bound {
    /// The relation as a symbol.
    pub fn symbol(self) -> &'static str {
        match self {
            Bound::AtMost => "≤",
            Bound::AtLeast => "≥",
            Bound::Above => ">",
        }
    }
}

/// One test behind a verdict: a value against a limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Gate {
    /// Stable name, e.g. `residual`, `angle:x`.
    pub name: String,
    /// The value tested, in the unit the limit is in.
    pub value: f64,
    /// The limit it is tested against.
    pub limit: f64,
    /// Which side of the limit the value must be on.
    pub bound: Bound,
    /// Whether the value is on the right side of the limit.
    pub ok: bool,
    /// What a failure means.
    pub role: GateRole,
}

impl Gate {
    /// A gate that holds when `value ≤ limit` (a NaN value fails).
    pub fn at_most(name: impl Into<String>, value: f64, limit: f64, role: GateRole) -> Self {
        Gate {
            name: name.into(),
            value,
            limit,
            bound: Bound::AtMost,
            ok: value <= limit,
            role,
        }
    }

    /// A gate that holds when `value ≥ limit` (a NaN value fails).
    pub fn at_least(name: impl Into<String>, value: f64, limit: f64, role: GateRole) -> Self {
        Gate {
            name: name.into(),
            value,
            limit,
            bound: Bound::AtLeast,
            ok: value >= limit,
            role,
        }
    }

    /// A gate that holds when `value > limit` (a NaN value fails).
    pub fn above(name: impl Into<String>, value: f64, limit: f64, role: GateRole) -> Self {
        Gate {
            name: name.into(),
            value,
            limit,
            bound: Bound::Above,
            ok: value > limit,
            role,
        }
    }
}

/// A check's result, as the rest of the program sees it.
pub trait CheckResult: fmt::Debug + Send + Sync {
    /// Which check made it.
    fn kind(&self) -> CheckKind;
    /// Its verdict.
    fn verdict(&self) -> Verdict;
    /// Every gate evaluated, failed or not.
    fn gates(&self) -> &[Gate];
    /// Its warnings as shown: each once, with a count when it occurred more than once.
    fn warnings(&self) -> Vec<String>;
    /// The numbers and verdicts the ledger keeps and history compares across builds.
    fn quantities(&self) -> Vec<Quantity>;
    /// One line for summaries: the key numbers with units.
    fn summary(&self) -> String;
    /// The report sections every writer renders (terminal, HTML).
    fn sections(&self) -> Result<Vec<Section>, Error>;
    /// The result as a JSON object (the check's documented keys).
    fn json(&self) -> Result<serde_json::Value, Error>;
    /// The serial and build the ledger files the run under when they are not the plan's
    /// `[article]` (a rod on the bench: the rod's serial and batch); `None` for the plan's.
    fn ledger_identity(&self) -> Option<(String, String)> {
        None
    }
    /// Compare with what the ledger held before this run, for a check whose result
    /// refers to an earlier one (the orbit calibration against the ground calibration
    /// of the same serial and magnetometer). A closeout calls it for every step, before
    /// anything is recorded, with the ledger it records into (`None`: none) and the
    /// step's plan. Most checks: nothing.
    fn compare_with_ledger(
        &mut self,
        _plan: &crate::log::Plan,
        _ledger: Option<&std::path::Path>,
    ) -> Result<(), Error> {
        Ok(())
    }
    /// What the result gives the flight parameters, if anything (most checks: nothing).
    fn flight_part(&self) -> Option<super::FlightPart<'_>> {
        None
    }
}

/// The five methods of [`CheckResult`] that every result with `verdict`, `gates` and
/// `warnings` fields implements the same way; used inside `impl CheckResult for …`
/// with the check's kind: `result_basics!(KIND);`.
#[macro_export]
macro_rules! result_basics {
    ($kind:expr) => {
        fn kind(&self) -> $crate::check::CheckKind {
            $kind
        }

        fn verdict(&self) -> $crate::check::Verdict {
            self.verdict
        }

        fn gates(&self) -> &[$crate::check::Gate] {
            &self.gates
        }

        fn warnings(&self) -> Vec<String> {
            $crate::check::outcome::tally(&self.warnings)
        }

        fn json(&self) -> Result<serde_json::Value, $crate::Error> {
            $crate::check::outcome::to_json(self)
        }
    };
}

/// A result as a JSON value.
pub fn to_json(value: &impl Serialize) -> Result<serde_json::Value, Error> {
    serde_json::to_value(value).map_err(|e| Error::Internal(format!("result to JSON: {e}")))
}

/// Warnings as shown: each distinct text once, in order of first appearance, with
/// "(N times)" when it occurred more than once.
pub fn tally<W: fmt::Display>(warnings: &[W]) -> Vec<String> {
    let mut seen: Vec<(String, usize)> = Vec::new();
    for w in warnings {
        let text = w.to_string();
        match seen.iter_mut().find(|(t, _)| *t == text) {
            Some((_, n)) => *n += 1,
            None => seen.push((text, 1)),
        }
    }
    seen.into_iter()
        .map(|(t, n)| if n > 1 { format!("{t} ({n} times)") } else { t })
        .collect()
}

/// Serialise a list of warnings as their tallied texts (for `#[serde(serialize_with)]`).
pub fn serialize_tally<W: fmt::Display, S: serde::Serializer>(
    warnings: &[W],
    s: S,
) -> Result<S::Ok, S::Error> {
    s.collect_seq(tally(warnings))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_repeated_warning_is_shown_once_with_its_count() {
        let w = ["a", "b", "a", "a"];
        assert_eq!(tally(&w), vec!["a (3 times)".to_string(), "b".to_string()]);
    }

    #[test]
    fn an_article_gate_wins_over_a_data_gate() {
        let data = Gate::at_least("coverage", 0.3, 0.6, GateRole::Data);
        let art = Gate::at_most("residual", 9.0, 5.0, GateRole::Article);
        let good = Gate::at_most("residual", 1.0, 5.0, GateRole::Article);
        assert_eq!(
            Verdict::from_gates(std::slice::from_ref(&data)),
            Verdict::Inconclusive
        );
        assert_eq!(Verdict::from_gates(&[data, art]), Verdict::Fail);
        assert_eq!(Verdict::from_gates(&[good]), Verdict::Pass);
        assert_eq!(Verdict::from_gates(&[]), Verdict::NoLimit);
        let nan = Gate::at_most("residual", f64::NAN, 5.0, GateRole::Article);
        assert!(!nan.ok, "a NaN value never meets a limit");
    }
}
