//! A check kind that exists only in the library's own tests, registered in one line of
//! the registry: it proves that a new kind reaches closeout, the ledger and history with
//! no other edit. It passes when its log's first field reading is positive.

use serde::Serialize;

use super::kind::{CheckKind, CheckSpec};
use super::outcome::{self, CheckResult, Gate, GateRole, Verdict};
use super::CheckInput;
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::{Cell, Section, Table};
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("dummy");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Test-only check",
    plan_range_applies: |_| true,
    run_step,
};

/// The dummy's result: the first `bx` reading and its gate.
#[derive(Debug, Clone, Serialize)]
pub struct DummyResult {
    /// First `bx` of the log, nT.
    pub first_bx_nt: f64,
    /// `pass` of the verdict.
    pub pass: Option<bool>,
    /// The verdict.
    pub verdict: Verdict,
    /// Its one gate.
    pub gates: Vec<Gate>,
}

impl DummyResult {
    /// A result for a first reading of `first_bx_nt`.
    pub fn new(first_bx_nt: f64) -> Self {
        let gates = vec![Gate::at_least(
            "positive",
            first_bx_nt,
            0.0,
            GateRole::Article,
        )];
        let verdict = Verdict::from_gates(&gates);
        DummyResult {
            first_bx_nt,
            pass: verdict.pass(),
            verdict,
            gates,
        }
    }
}

fn run_step(input: &CheckInput, _plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let b = input.log.require_field("the test check reads bx")?;
    let first = b[0]
        .first()
        .copied()
        .ok_or_else(|| Error::Degenerate("empty log".into()))?;
    Ok(Box::new(DummyResult::new(first)))
}

impl CheckResult for DummyResult {
    fn kind(&self) -> CheckKind {
        KIND
    }
    fn verdict(&self) -> Verdict {
        self.verdict
    }
    fn gates(&self) -> &[Gate] {
        &self.gates
    }
    fn warnings(&self) -> Vec<String> {
        Vec::new()
    }
    fn quantities(&self) -> Vec<Quantity> {
        vec![Quantity::number(
            "dummy_first_bx_nt".into(),
            "nT",
            self.first_bx_nt,
            Some(1.0),
        )]
    }
    fn summary(&self) -> String {
        format!("first bx {:.1} nT", self.first_bx_nt)
    }
    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![Section {
            kind: KIND.as_str().into(),
            title: SPEC.title.into(),
            verdict: self.verdict,
            figures_of_merit: vec![("first bx".into(), format!("{:.1} nT", self.first_bx_nt))],
            tables: vec![Table {
                caption: "gates".into(),
                header: vec!["gate".into(), "value".into()],
                rows: vec![vec![
                    Cell::plain("positive"),
                    Cell::plain(self.first_bx_nt.to_string()),
                ]],
            }],
            figures: vec![],
            warnings: vec![],
            notes: vec![],
            result: self.json()?,
        }])
    }
    fn json(&self) -> Result<serde_json::Value, Error> {
        outcome::to_json(self)
    }
}

#[cfg(test)]
mod tests {
    use crate::check::closeout::{run_closeout, CloseoutRequest};
    use crate::ledger::{changes, ChangeRules, Ledger, NewRun, RunFilter};

    /// Closeout of `build` with one dummy step whose log's first bx is `bx`, recorded.
    fn close_out(dir: &std::path::Path, ledger: &mut Ledger, build: &str, bx: f64) {
        let log = dir.join(format!("{build}.csv"));
        std::fs::write(&log, format!("t,bx,by,bz\n0,{bx},1,1\n1,{bx},1,2\n")).unwrap();
        let plan = dir.join(format!("{build}.toml"));
        std::fs::write(
            &plan,
            format!(
                "[article]\nserial = \"DMY-1\"\nbuild = \"{build}\"\n\n\
                 [[step]]\nkind = \"dummy\"\nlog = \"{build}.csv\"\n"
            ),
        )
        .unwrap();
        let result = run_closeout(&CloseoutRequest {
            plan,
            skip_bad_rows: false,
            ledger: None,
        })
        .unwrap();
        let runs: Vec<NewRun> = result
            .steps
            .iter()
            .map(|s| {
                NewRun::from_result(
                    &result.plan,
                    s.result.as_ref(),
                    (&s.log, &s.log_sha256),
                    serde_json::json!({}),
                )
                .unwrap()
            })
            .collect();
        ledger.record_runs(&runs).unwrap();
    }

    #[test]
    fn a_kind_registered_in_one_line_reaches_closeout_the_ledger_and_history() {
        let dir = tempfile::tempdir().unwrap();
        let mut ledger = Ledger::open(&dir.path().join("l.db")).unwrap();
        close_out(dir.path(), &mut ledger, "B1", 5.0);
        close_out(dir.path(), &mut ledger, "B2", -3.0);
        let runs = ledger.runs(&RunFilter::default()).unwrap();
        assert_eq!(runs.len(), 2);
        assert!(runs.iter().all(|r| r.kind == "dummy"));
        assert_eq!(runs[0].pass, Some(true));
        assert_eq!(runs[1].pass, Some(false));
        let ch = changes(&runs, &ChangeRules::default());
        let bx = ch
            .iter()
            .find(|c| c.quantity == "dummy_first_bx_nt")
            .unwrap();
        assert_eq!(bx.delta, Some(-8.0));
        let verdict = ch.iter().find(|c| c.quantity == "dummy_pass").unwrap();
        assert_eq!(verdict.to, serde_json::json!(false));
        let filtered = ledger
            .runs(&RunFilter {
                serial: None,
                kind: crate::check::CheckKind::parse("dummy"),
            })
            .unwrap();
        assert_eq!(filtered.len(), 2);
        let section = crate::report::sections::history_section(&runs, &ch).unwrap();
        let text = crate::report::terminal::render_section(
            &section,
            &crate::report::terminal::Style::plain(),
        );
        assert!(text.contains("dummy"), "{text}");
    }
}
