//! Build-to-build history: the numbers each run carries (`Run::quantities`) and what changed
//! from one build of a serial number to the next ([`changes`], the `changes` array of docs/ledger.md).
//!
//! Rules (also in `docs/ledger.md`):
//! - builds of a serial are ordered by their first recorded run (ledger id, not clock);
//! - within a build, the latest run of a kind stands for that kind (a re-measurement
//!   replaces the earlier one in the comparison; both stay listed as runs);
//! - a kind's run is compared with the same kind in the nearest earlier build that has it;
//! - the combined 1σ of a difference of two independent estimates is √(σ₁² + σ₂²)
//!   (law of propagation of uncertainty, GUM JCGM 100:2008 §5.1, cited from memory); a
//!   change is `significant` when |Δ| > k·σ with k = 3 by default (common practice for
//!   "beyond noise"; about 0.3 % false alarms per Gaussian quantity);
//! - a verdict that goes pass → fail is `limit-crossed`: the check's limit (plan
//!   `[limits]`) is no longer met.

use std::collections::HashMap;

use serde::Serialize;
use serde_json::Value;

use super::compare::compare;
use super::{LedgerError, Run, RunId};
use crate::check::CheckKind;

/// What a change amounts to. Serialized in kebab-case (`limit-crossed`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Flag {
    /// |Δ| exceeds k times the combined 1σ: a real change.
    Significant,
    /// |Δ| within k times the combined 1σ: consistent with measurement noise.
    WithinNoise,
    /// No uncertainty known for one side: the change is shown but cannot be judged.
    NoSigma,
    /// The check's verdict went from pass to fail: a limit is now exceeded.
    LimitCrossed,
    /// The check's verdict went from fail to pass.
    LimitCleared,
    /// A rod's verdict changed (e.g. `ok` → `reversed`), or a rod appeared or vanished.
    VerdictChanged,
    /// Same verdict in both builds.
    Unchanged,
}

impl Flag {
    /// The word used in JSON, CSV and on screen.
    pub fn as_str(self) -> &'static str {
        match self {
            Flag::Significant => "significant",
            Flag::WithinNoise => "within-noise",
            Flag::NoSigma => "no-sigma",
            Flag::LimitCrossed => "limit-crossed",
            Flag::LimitCleared => "limit-cleared",
            Flag::VerdictChanged => "verdict-changed",
            Flag::Unchanged => "unchanged",
        }
    }

    /// Whether the change deserves a reviewer's attention.
    pub fn is_alert(self) -> bool {
        matches!(
            self,
            Flag::Significant | Flag::LimitCrossed | Flag::VerdictChanged
        )
    }
}

/// How changes are judged.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChangeRules {
    significance_sigma: f64,
}

impl Default for ChangeRules {
    /// k = 3.
    fn default() -> Self {
        ChangeRules {
            significance_sigma: 3.0,
        }
    }
}

impl ChangeRules {
    /// Rules with a change significant beyond `k` combined σ (`k` finite and > 0).
    pub fn with_significance_sigma(k: f64) -> Result<Self, LedgerError> {
        if !(k.is_finite() && k > 0.0) {
            return Err(LedgerError::InvalidRule(format!(
                "significance threshold must be a positive number of sigma, got {k}"
            )));
        }
        Ok(ChangeRules {
            significance_sigma: k,
        })
    }

    /// k: how many combined σ make a change significant.
    pub fn significance_sigma(&self) -> f64 {
        self.significance_sigma
    }
}

/// One entry of `changes` (docs/ledger.md).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Change {
    /// Serial number.
    pub serial: String,
    /// Earlier build compared.
    pub from_build: String,
    /// Later build.
    pub to_build: String,
    /// Quantity name (see [`Quantity::name`](super::Quantity::name); `soft_iron_max_element` for soft iron).
    pub quantity: String,
    /// Later minus earlier, in `unit`; `null` for verdicts.
    pub delta: Option<f64>,
    /// Combined 1σ of `delta` = √(σ₁² + σ₂²), `null` when a side has none.
    pub sigma: Option<f64>,
    /// What the change amounts to.
    pub flag: Flag,
    /// Which check the quantity comes from (its stored name).
    pub kind: String,
    /// Unit of `delta`, `sigma`, `from`, `to`.
    pub unit: String,
    /// Value in the earlier build (number, verdict word or bool; `null` if absent).
    pub from: Value,
    /// Value in the later build.
    pub to: Value,
    /// Ledger id of the earlier run.
    pub from_run: RunId,
    /// Ledger id of the later run.
    pub to_run: RunId,
    /// Extra words, e.g. which soft-iron element changed most.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub detail: Option<String>,
}

/// The runs of one build of one serial, in recorded order.
#[derive(Debug, Clone)]
pub struct BuildRuns<'a> {
    /// Build label.
    pub build: &'a str,
    /// Its runs, in recorded order.
    pub runs: Vec<&'a Run>,
}

/// The builds of one serial, in order of each build's first record.
#[derive(Debug, Clone)]
pub struct SerialRuns<'a> {
    /// Serial number.
    pub serial: &'a str,
    /// Its builds.
    pub builds: Vec<BuildRuns<'a>>,
}

/// Runs grouped by serial (in order of first record), then by build (in order of the
/// build's first record), each build's runs in recorded order.
pub fn group_by_build(runs: &[Run]) -> Vec<SerialRuns<'_>> {
    let mut sorted: Vec<&Run> = runs.iter().collect();
    sorted.sort_by_key(|r| r.id);
    let mut out: Vec<SerialRuns<'_>> = Vec::new();
    // Where each serial, and each (serial, build), sits in `out`: one hash look-up per
    // run, so grouping is linear in the runs however many serials and builds there are.
    let mut serial_at: HashMap<&str, usize> = HashMap::new();
    let mut build_at: HashMap<(&str, &str), usize> = HashMap::new();
    for run in sorted {
        let serial_idx = *serial_at.entry(&run.serial).or_insert_with(|| {
            out.push(SerialRuns {
                serial: &run.serial,
                builds: Vec::new(),
            });
            out.len() - 1
        });
        let Some(serial) = out.get_mut(serial_idx) else {
            continue;
        };
        let key = (run.serial.as_str(), run.build.as_str());
        match build_at.get(&key) {
            Some(&b) => serial.builds[b].runs.push(run),
            None => {
                build_at.insert(key, serial.builds.len());
                serial.builds.push(BuildRuns {
                    build: &run.build,
                    runs: vec![run],
                });
            }
        }
    }
    out
}

/// The `changes` of a set of runs: for each serial, kind and pair of consecutive
/// builds having that kind, one [`Change`] per quantity (see the module rules).
pub fn changes(runs: &[Run], rules: &ChangeRules) -> Vec<Change> {
    let mut out = Vec::new();
    let kinds = kinds_of(runs);
    for serial in group_by_build(runs) {
        for kind in &kinds {
            // Like with like: each magnetometer's runs are compared with its own.
            for sensor in super::tracks::sensors_of(runs, kind) {
                let mut previous: Option<&Run> = None;
                for build in &serial.builds {
                    let Some(latest) = build
                        .runs
                        .iter()
                        .rev()
                        .find(|r| r.kind == *kind && super::tracks::sensor_of(r) == sensor)
                    else {
                        continue;
                    };
                    if let Some(prev) = previous {
                        compare(prev, latest, rules, &mut out);
                    }
                    previous = Some(latest);
                }
            }
        }
    }
    out
}

/// The kinds present in `runs`: registered kinds in registry order, then any kind this
/// version does not know (recorded by a newer magproof) in order of name.
pub fn kinds_of(runs: &[Run]) -> Vec<String> {
    let mut out: Vec<String> = CheckKind::all()
        .map(|k| k.as_str().to_string())
        .filter(|k| runs.iter().any(|r| r.kind == *k))
        .collect();
    let mut unknown: Vec<String> = runs
        .iter()
        .map(|r| r.kind.clone())
        .filter(|k| CheckKind::parse(k).is_none())
        .collect();
    unknown.sort();
    unknown.dedup();
    out.extend(unknown);
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::quantity::Quantity;
    use approx::assert_relative_eq;
    use serde_json::json;

    fn run(id: i64, build: &str, kind: &str, result: Value) -> Run {
        Run {
            id: RunId(id),
            serial: "KST-002".into(),
            build: build.into(),
            kind: kind.into(),
            quantities: legacy_with_pass(kind, &result),
            recorded_at: "2026-11-20T09:00:00.000Z".into(),
            tool_version: Some(crate::VERSION.into()),
            pass: result.get("pass").and_then(Value::as_bool),
            result,
            inputs: vec![],
        }
    }

    /// The quantities a run of the first kinds carried, as the ledger stores them.
    fn legacy_with_pass(kind: &str, result: &Value) -> Vec<Quantity> {
        let mut q = crate::ledger::legacy_quantities(kind, result);
        if let Some(p) = result.get("pass").and_then(Value::as_bool) {
            q.push(Quantity::pass(kind, p));
        }
        q
    }

    fn calib(h: [f64; 3], s: [f64; 3], w01: f64, pass: bool) -> Value {
        json!({"method": "tumble", "hard_iron_nt": h, "hard_iron_sigma_nt": s,
               "soft_iron": [[1.0, w01, 0.0], [w01, 1.0, 0.0], [0.0, 0.0, 1.0]],
               "residual_rms_nt": 40.0, "pass": pass})
    }

    fn find<'a>(c: &'a [Change], q: &str) -> &'a Change {
        c.iter().find(|x| x.quantity == q).unwrap()
    }

    #[test]
    fn hard_iron_change_uses_the_root_sum_square_sigma_and_three_sigma_rule() {
        let runs = [
            run(
                1,
                "B3",
                "calibrate",
                calib([100.0, 200.0, -50.0], [3.0, 4.0, 5.0], 0.01, true),
            ),
            run(
                2,
                "B4",
                "calibrate",
                calib([130.0, 210.0, -50.0], [4.0, 3.0, 5.0], 0.03, true),
            ),
        ];
        let c = changes(&runs, &ChangeRules::default());
        let x = find(&c, "hard_iron_x_nt");
        assert_relative_eq!(x.delta.unwrap(), 30.0);
        assert_relative_eq!(x.sigma.unwrap(), 5.0); // √(3² + 4²)
        assert_eq!(x.flag, Flag::Significant); // 30 > 3 × 5
        let y = find(&c, "hard_iron_y_nt");
        assert_eq!(y.flag, Flag::WithinNoise); // 10 ≤ 15
        assert_eq!((y.from_build.as_str(), y.to_build.as_str()), ("B3", "B4"));
        // |h| σ by first-order propagation, combined over both builds.
        let m = find(&c, "hard_iron_magnitude_nt");
        let mag = |h: [f64; 3]| h.iter().map(|v| v * v).sum::<f64>().sqrt();
        let s_mag = |h: [f64; 3], s: [f64; 3]| {
            (0..3)
                .map(|i| (h[i] / mag(h) * s[i]).powi(2))
                .sum::<f64>()
                .sqrt()
        };
        let (h1, h2) = ([100.0, 200.0, -50.0], [130.0, 210.0, -50.0]);
        assert_relative_eq!(m.delta.unwrap(), mag(h2) - mag(h1), epsilon = 1e-9);
        let s = s_mag(h1, [3.0, 4.0, 5.0]).hypot(s_mag(h2, [4.0, 3.0, 5.0]));
        assert_relative_eq!(m.sigma.unwrap(), s, epsilon = 1e-9);
        // Soft iron: largest element change, no σ in the result.
        let w = find(&c, "soft_iron_max_element");
        assert_relative_eq!(w.delta.unwrap(), 0.02, epsilon = 1e-12);
        assert_eq!(w.sigma, None);
        assert_eq!(w.flag, Flag::NoSigma);
        assert_eq!(find(&c, "calibrate_pass").flag, Flag::Unchanged);
    }

    #[test]
    fn a_verdict_going_from_pass_to_fail_is_a_crossed_limit() {
        let d = |m: [f64; 3], pass| {
            json!({"moment_body_am2": m, "moment_sigma_am2": [1e-4, 1e-4, 1e-4],
                                          "magnitude_am2": (m[0]*m[0]+m[1]*m[1]+m[2]*m[2]).sqrt(),
                                          "pass": pass})
        };
        let runs = [
            run(1, "B3", "dipole", d([0.002, 0.0, 0.001], true)),
            run(2, "B4", "dipole", d([0.006, 0.0, 0.001], false)),
            run(3, "B5", "dipole", d([0.002, 0.0, 0.001], true)),
        ];
        let c = changes(&runs, &ChangeRules::default());
        let passes: Vec<Flag> = c
            .iter()
            .filter(|x| x.quantity == "dipole_pass")
            .map(|x| x.flag)
            .collect();
        assert_eq!(passes, [Flag::LimitCrossed, Flag::LimitCleared]);
        let mx = c.iter().find(|x| x.quantity == "dipole_x_am2").unwrap();
        assert_relative_eq!(mx.sigma.unwrap(), 2f64.sqrt() * 1e-4);
        assert_eq!(mx.flag, Flag::Significant);
    }

    #[test]
    fn rod_verdicts_are_compared_by_name_and_a_swap_is_flagged() {
        let p = |x: &str, y: &str| json!({"rods": [{"name": "x", "verdict": x}, {"name": "y", "verdict": y}], "pass": x == "ok" && y == "ok"});
        let runs = [
            run(1, "B3", "polarity", p("ok", "ok")),
            run(2, "B4", "polarity", p("ok", "reversed")),
        ];
        let c = changes(&runs, &ChangeRules::default());
        assert_eq!(find(&c, "rod_x_verdict").flag, Flag::Unchanged);
        let y = find(&c, "rod_y_verdict");
        assert_eq!(
            (y.flag, &y.from, &y.to),
            (Flag::VerdictChanged, &json!("ok"), &json!("reversed"))
        );
        assert_eq!(find(&c, "polarity_pass").flag, Flag::LimitCrossed);
    }

    #[test]
    fn builds_follow_first_record_and_the_latest_run_of_a_build_stands_for_it() {
        let d = |x: f64| json!({"moment_body_am2": [x, 0.0, 0.0], "moment_sigma_am2": [1e-3, 1e-3, 1e-3]});
        let runs = [
            run(1, "B3", "dipole", d(0.010)),
            run(2, "B4", "dipole", d(0.020)),
            run(3, "B3", "dipole", d(0.011)), // re-measured B3 after B4 began
            run(4, "B4", "calibrate", calib([0.0; 3], [1.0; 3], 0.0, true)),
            run(
                5,
                "B5",
                "calibrate",
                calib([1.0, 0.0, 0.0], [1.0; 3], 0.0, true),
            ),
        ];
        let c = changes(&runs, &ChangeRules::default());
        let x = find(&c, "dipole_x_am2");
        assert_eq!((x.from_build.as_str(), x.to_build.as_str()), ("B3", "B4"));
        assert_relative_eq!(x.delta.unwrap(), 0.009, epsilon = 1e-12);
        assert_eq!((x.from_run, x.to_run), (RunId(3), RunId(2)));
        // No dipole in B5: no dipole change B4 → B5; calibrate compares B4 → B5.
        assert!(!c.iter().any(|x| x.kind == "dipole" && x.to_build == "B5"));
        assert_eq!(find(&c, "hard_iron_x_nt").from_build, "B4");
    }

    #[test]
    fn the_significance_threshold_must_be_positive() {
        assert!(ChangeRules::with_significance_sigma(0.0).is_err());
        assert!(ChangeRules::with_significance_sigma(f64::NAN).is_err());
        assert_relative_eq!(
            ChangeRules::with_significance_sigma(2.0)
                .unwrap()
                .significance_sigma(),
            2.0
        );
    }
}
