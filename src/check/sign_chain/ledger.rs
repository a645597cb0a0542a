//! The sign chain as a ledger run (docs/sign-chain.md, docs/ledger.md): filed under the
//! plan's serial and build with kind `sign_chain`, the plan and the logs of the steps it
//! read as inputs, so that history compares each axis's chain across builds.

use super::{SignChain, KIND};
use crate::check::closeout::CloseoutResult;
use crate::ledger::{InputFile, InputRole, LedgerError, NewRun, Quantity};

impl SignChain {
    /// The quantities history compares: `sign_chain_<axis>` (`ok` | `broken` |
    /// `not-proven`), `sign_chain_<axis>_<element>` (the element's word) and
    /// `sign_chain_status` (`complete` | `broken` | `inconclusive` | `incomplete`). The
    /// ledger adds `sign_chain_pass` from the result's `pass`.
    pub fn quantities(&self) -> Vec<Quantity> {
        let mut out = Vec::with_capacity(1 + 5 * self.axes.len());
        for a in &self.axes {
            let elements = [a.magnetometer, a.gyro, a.rod, a.law];
            let word = if a.ok {
                "ok"
            } else if elements.iter().any(|e| e.is_broken()) {
                "broken"
            } else {
                "not-proven"
            };
            out.push(Quantity::verdict(format!("sign_chain_{}", a.axis), word));
            for (name, e) in ["magnetometer", "gyro", "rod", "law"].iter().zip(elements) {
                out.push(Quantity::verdict(
                    format!("sign_chain_{}_{name}", a.axis),
                    e.word(),
                ));
            }
        }
        out.push(Quantity::verdict("sign_chain_status".into(), self.status()));
        out
    }

    /// The run to record for this chain of `closeout`; `options` are the closeout's
    /// analysis options (as for its steps).
    pub fn new_run(
        &self,
        closeout: &CloseoutResult,
        options: serde_json::Value,
    ) -> Result<NewRun, LedgerError> {
        let plan = &closeout.plan;
        let article = plan
            .article
            .as_ref()
            .ok_or_else(|| LedgerError::NoArticle {
                plan: crate::log::Shown(plan.path.clone()),
            })?;
        let mut inputs = vec![InputFile::hashed(InputRole::Plan, &plan.path, &plan.sha256)];
        inputs.extend(
            closeout
                .steps
                .iter()
                .filter(|s| self.steps.contains(&s.index))
                .map(|s| InputFile::hashed(InputRole::Log, &s.log, &s.log_sha256)),
        );
        let mut result = serde_json::Map::new();
        for (k, v) in self.json_keys() {
            result.insert(k.to_string(), v);
        }
        result.insert("verdict".into(), serde_json::json!(self.verdict()));
        result.insert("pass".into(), serde_json::json!(self.verdict().pass()));
        Ok(NewRun {
            serial: article.serial.clone(),
            build: article.build.clone(),
            kind: KIND,
            inputs,
            result: serde_json::Value::Object(result),
            quantities: self.quantities(),
            options,
            sensor: None,
        })
    }
}
