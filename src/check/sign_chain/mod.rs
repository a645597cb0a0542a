//! The sign chain of a closeout (docs/sign-chain.md): per body axis x, y, z, what the
//! closeout's steps proved about the magnetometer's axis (align), the gyro's axis
//! (align's gyro part), the torque rod along that axis (polarity) and the control law's
//! command for that rod (loop), and whether every element is proven on its own.
//!
//! Each element is judged alone. A flipped magnetometer axis and a reversed rod on the
//! same axis cancel in a B-dot law (m ∝ −Ḃ, Stickler & Alfriend 1976), so a vehicle that
//! "detumbled on the table" proves neither; a flip found by align marks its axis broken
//! whatever polarity and loop say.
//!
//! The chain reads each step's JSON (the documented keys of docs/alignment.md,
//! docs/polarity.md and the loop check's `rods`), not the checks' types, so that a check
//! can change its internals without touching this module.

#[cfg(test)]
mod contract_tests;
mod element;
mod ledger;
mod notes;
#[cfg(test)]
mod tests;

pub use element::Element;
use notes::{explanations, tumble_gyro_note};

use serde::Serialize;
use serde_json::Value;

use super::closeout::StepOutcome;
use super::{CheckKind, Verdict};
use crate::log::plan::ControlLaw;
use crate::log::Plan;
use crate::Error;

/// The kind the ledger files a closeout's sign chain under (not a plan step kind:
/// closeout derives it from the align, polarity and loop steps).
pub const KIND: CheckKind = CheckKind::new("sign_chain");

/// Step kinds the chain reads; a closeout with none of them has no chain.
pub const CHAIN_KINDS: [&str; 3] = ["align", "polarity", "loop"];

const AXES: [&str; 3] = ["x", "y", "z"];

/// One step's result as the chain reads it.
#[derive(Debug, Clone, Copy)]
pub struct StepJson<'a> {
    /// 1-based position of the step in the plan.
    pub index: usize,
    /// The step's kind name (`align`, `polarity`, `loop`, …).
    pub kind: &'a str,
    /// The step's result JSON.
    pub json: &'a Value,
}

/// A rod of the plan as the chain needs it.
#[derive(Debug, Clone)]
pub struct RodAxis {
    /// The rod's name (`[[rod]] name`).
    pub name: String,
    /// Index (0 x, 1 y, 2 z) of the dominant component of its `axis_body`, body frame.
    pub axis: usize,
}

impl RodAxis {
    /// Every rod of the plan, on the body axis its `axis_body` is mostly along.
    pub fn of_plan(plan: &Plan) -> Vec<RodAxis> {
        plan.rods
            .iter()
            .map(|r| RodAxis {
                name: r.name.clone(),
                axis: r.axis_body.iamax(),
            })
            .collect()
    }
}

/// One body axis of the chain: the closeout JSON's `sign_chain[]` entry.
#[derive(Debug, Clone, Serialize)]
pub struct AxisChain {
    /// Body axis: `"x"`, `"y"` or `"z"`.
    pub axis: &'static str,
    /// The magnetometer axis that reads this body axis (align).
    pub magnetometer: Element,
    /// The gyro axis that reads the rate about this body axis (align's gyro part).
    pub gyro: Element,
    /// The rod(s) along this body axis (polarity); the worst of them.
    pub rod: Element,
    /// The control law's command for the rod(s) along this axis (loop); the worst.
    pub law: Element,
    /// Every element needed is proven ok on its own.
    pub ok: bool,
}

/// The sign chain of one closeout.
#[derive(Debug, Clone)]
pub struct SignChain {
    /// Per body axis x, y, z.
    pub axes: Vec<AxisChain>,
    /// Whether the gyro is part of the chain (the law uses it); an unused gyro may stay
    /// unchecked or inconclusive, but a flipped or swapped one still breaks its axis.
    pub gyro_required: bool,
    /// Why each thing is as it is: the gyro rule, cancelling pairs, rods not in the plan.
    pub notes: Vec<String>,
    /// 1-based indices of the steps the chain read (their logs are its inputs).
    pub steps: Vec<usize>,
}

impl SignChain {
    /// Every element on every axis checked and ok (`sign_chain_complete`).
    pub fn complete(&self) -> bool {
        self.axes.iter().all(|a| a.ok)
    }

    /// Every element the chain needs, over all axes: the magnetometer, rod and law, and
    /// the gyro when the law uses it or when it is broken.
    fn needed(&self) -> Vec<Element> {
        let needed = |a: &AxisChain| {
            let mut v = vec![a.magnetometer, a.rod, a.law];
            if self.gyro_required || a.gyro.is_broken() {
                v.push(a.gyro);
            }
            v
        };
        self.axes.iter().flat_map(needed).collect()
    }

    /// The chain as a verdict: `Fail` when an element is broken (a wrong sign or axis),
    /// `Pass` when complete, else `NoLimit`: an element never tested, or tested and
    /// unable to tell, proves nothing but is not a failed check (the step that could
    /// not tell carries its own verdict), so it never lowers a closeout's verdict.
    pub fn verdict(&self) -> Verdict {
        let all = self.needed();
        if all.iter().any(|e| e.is_broken()) {
            Verdict::Fail
        } else if all.iter().all(|e| *e == Element::Ok) {
            Verdict::Pass
        } else {
            Verdict::NoLimit
        }
    }

    /// The chain's state in one word: `complete`, `broken`, `inconclusive` (nothing
    /// broken, a needed element's test could not tell) or `incomplete` (nothing broken
    /// or inconclusive, a needed element never tested).
    pub fn status(&self) -> &'static str {
        match self.verdict() {
            Verdict::Pass => "complete",
            Verdict::Fail => "broken",
            _ if self.needed().contains(&Element::Inconclusive) => "inconclusive",
            _ => "incomplete",
        }
    }

    /// The keys the closeout JSON carries: `sign_chain`, `sign_chain_complete`,
    /// `sign_chain_status`, `sign_chain_gyro_required`, `sign_chain_notes`.
    pub fn json_keys(&self) -> Vec<(&'static str, Value)> {
        vec![
            ("sign_chain", serde_json::json!(self.axes)),
            ("sign_chain_complete", Value::Bool(self.complete())),
            ("sign_chain_status", Value::from(self.status())),
            ("sign_chain_gyro_required", Value::Bool(self.gyro_required)),
            ("sign_chain_notes", serde_json::json!(self.notes)),
        ]
    }
}

/// The sign chain of a closeout's steps under its plan; `None` when no step is an
/// align, polarity or loop step.
pub fn sign_chain_of(plan: &Plan, steps: &[StepOutcome]) -> Result<Option<SignChain>, Error> {
    let jsons = steps
        .iter()
        .map(|s| Ok((s.index, s.result.kind().as_str(), s.result.json()?)))
        .collect::<Result<Vec<_>, Error>>()?;
    let views: Vec<StepJson> = jsons
        .iter()
        .map(|(index, kind, json)| StepJson {
            index: *index,
            kind,
            json,
        })
        .collect();
    let plan_law = plan.control.as_ref().map(|c| match c.law {
        ControlLaw::Bdot => "bdot",
        ControlLaw::Rate => "rate",
    });
    Ok(build_sign_chain_under(
        &views,
        &RodAxis::of_plan(plan),
        plan_law,
    ))
}

/// Build the chain from the steps' JSON and the plan's rods; `None` when no step is an
/// align, polarity or loop step.
pub fn build_sign_chain(steps: &[StepJson], rods: &[RodAxis]) -> Option<SignChain> {
    build_sign_chain_under(steps, rods, None)
}

/// [`build_sign_chain`] under a plan whose `[control]` names the law (`bdot` or `rate`),
/// which decides whether the gyro is part of the chain when no loop step names it.
pub fn build_sign_chain_under(
    steps: &[StepJson],
    rods: &[RodAxis],
    plan_law: Option<&str>,
) -> Option<SignChain> {
    let read: Vec<&StepJson> = steps
        .iter()
        .filter(|s| CHAIN_KINDS.contains(&s.kind))
        .collect();
    if read.is_empty() {
        return None;
    }
    let mut notes = Vec::new();
    let of = |kind: &'static str| -> Vec<&StepJson> {
        read.iter().filter(|s| s.kind == kind).copied().collect()
    };
    let magnetometer = magnetometer_elements(&of("align"), &mut notes);
    let gyro = gyro_elements(&of("align"), &magnetometer, &mut notes);
    let rod = rod_elements(&of("polarity"), rods, Element::from_polarity, &mut notes);
    let law = rod_elements(&of("loop"), rods, Element::from_loop, &mut notes);
    for (a, name) in AXES.iter().enumerate() {
        if !rods.iter().any(|r| r.axis == a) {
            notes.push(format!(
                "The plan has no rod along body {name}: its rod and law stay unchecked."
            ));
        }
    }
    let gyro_required = gyro_needed(&read, plan_law, &mut notes);
    let axes: Vec<AxisChain> = (0..3)
        .map(|a| {
            let gyro_ok = gyro[a] == Element::Ok
                || (!gyro_required
                    && matches!(gyro[a], Element::Unchecked | Element::Inconclusive));
            AxisChain {
                axis: AXES[a],
                magnetometer: magnetometer[a],
                gyro: gyro[a],
                rod: rod[a],
                law: law[a],
                ok: gyro_ok
                    && [magnetometer[a], rod[a], law[a]]
                        .iter()
                        .all(|e| *e == Element::Ok),
            }
        })
        .collect();
    notes.extend(explanations(
        &axes,
        read.iter().any(|s| s.kind == "polarity"),
    ));
    Some(SignChain {
        axes,
        gyro_required,
        notes,
        steps: read.iter().map(|s| s.index).collect(),
    })
}

/// Per body axis, the elements of an `axes` array ([{axis, verdict}]); `None` when the
/// array is absent, null or empty (nothing judged). An entry missing for an axis or
/// with an unknown word is `inconclusive`.
fn axes_elements(
    axes: Option<&Value>,
    notes: &mut Vec<String>,
    what: &str,
) -> Option<[Element; 3]> {
    let list = axes.and_then(Value::as_array).filter(|l| !l.is_empty())?;
    let mut out = [Element::Inconclusive; 3];
    for (a, name) in AXES.iter().enumerate() {
        let entry = list
            .iter()
            .find(|e| e.get("axis").and_then(Value::as_str) == Some(name));
        let word = entry.and_then(|e| e.get("verdict")).and_then(Value::as_str);
        out[a] = match word.and_then(Element::from_align) {
            Some(e) => e,
            None => {
                notes.push(format!(
                    "Align gave no known verdict for the {what}'s body {name} axis ({}): taken as inconclusive.",
                    word.unwrap_or("missing")
                ));
                Element::Inconclusive
            }
        };
    }
    Some(out)
}

/// Worst of `acc` and `next` per axis, where `None` is "no step yet".
fn merge(acc: Option<[Element; 3]>, next: Option<[Element; 3]>) -> Option<[Element; 3]> {
    match (acc, next) {
        (Some(a), Some(b)) => Some([a[0].worst(b[0]), a[1].worst(b[1]), a[2].worst(b[2])]),
        (a, b) => a.or(b),
    }
}

/// The magnetometer per body axis from every align step (the worst over steps). When a
/// step could not fix the field's sign (`handedness` inconclusive) align took the
/// explanation closest to the plan, so its `ok` axes are not a proof: `inconclusive`.
fn magnetometer_elements(steps: &[&StepJson], notes: &mut Vec<String>) -> [Element; 3] {
    let mut acc = None;
    for s in steps {
        let mut found = axes_elements(s.json.get("axes"), notes, "magnetometer");
        let sign_free = s.json.get("handedness").and_then(Value::as_str) == Some("inconclusive");
        if let (Some(f), true) = (found.as_mut(), sign_free) {
            notes.push(format!(
                "Step {}: align could not fix the field's sign (no [site] or measured \
                 field), so a magnetometer and its mirror explain the log equally; its \
                 \"ok\" axes are counted as inconclusive.",
                s.index
            ));
            for e in f.iter_mut().filter(|e| **e == Element::Ok) {
                *e = Element::Inconclusive;
            }
        }
        acc = merge(acc, found);
    }
    acc.unwrap_or([Element::Unchecked; 3])
}

/// The gyro per body axis from every align step's `gyro.axes`. A gyro judged on a hand
/// tumble (`gyro.reference` `magnetometer`) is judged against the magnetometer's planned
/// mapping, not the body: its `ok` axes prove the gyro only when the closeout proved the
/// magnetometer on every axis (else `inconclusive`), and its broken axes may be the
/// magnetometer's error as much as the gyro's (said in a note; they stay broken).
fn gyro_elements(
    steps: &[&StepJson],
    magnetometer: &[Element; 3],
    notes: &mut Vec<String>,
) -> [Element; 3] {
    let mag_proven = magnetometer.iter().all(|e| *e == Element::Ok);
    let mut acc = None;
    for s in steps {
        let gyro = s.json.get("gyro");
        let mut found = axes_elements(gyro.and_then(|g| g.get("axes")), notes, "gyro");
        let relative = gyro
            .and_then(|g| g.get("reference"))
            .and_then(Value::as_str)
            == Some("magnetometer");
        if let (Some(f), true) = (found.as_mut(), relative) {
            notes.push(tumble_gyro_note(s.index, f, mag_proven));
            if !mag_proven {
                for e in f.iter_mut().filter(|e| **e == Element::Ok) {
                    *e = Element::Inconclusive;
                }
            }
        }
        acc = merge(acc, found);
    }
    acc.unwrap_or([Element::Unchecked; 3])
}

/// Per body axis, the worst finding over the rods along it, from every step's `rods`
/// ([{name, verdict}]); a rod no step judged is `unchecked`.
fn rod_elements(
    steps: &[&StepJson],
    rods: &[RodAxis],
    map: fn(&str) -> Option<Element>,
    notes: &mut Vec<String>,
) -> [Element; 3] {
    let mut per_rod: Vec<Option<Element>> = vec![None; rods.len()];
    for s in steps {
        let list = s.json.get("rods").and_then(Value::as_array);
        for entry in list.into_iter().flatten() {
            let name = entry.get("name").and_then(Value::as_str).unwrap_or("?");
            let word = entry
                .get("verdict")
                .and_then(Value::as_str)
                .unwrap_or("missing");
            let Some(k) = rods.iter().position(|r| r.name == name) else {
                notes.push(format!(
                    "Step {} ({}): rod \"{name}\" is not in the plan's [[rod]] list; its \
                     verdict is not placed on an axis.",
                    s.index, s.kind
                ));
                continue;
            };
            let e = map(word).unwrap_or_else(|| {
                notes.push(format!(
                    "Step {} ({}): rod \"{name}\" has the unknown verdict \"{word}\": taken as inconclusive.",
                    s.index, s.kind
                ));
                Element::Inconclusive
            });
            per_rod[k] = Some(per_rod[k].map_or(e, |p| p.worst(e)));
        }
    }
    let mut out = [Element::Unchecked; 3];
    for (a, slot) in out.iter_mut().enumerate() {
        let on_axis = rods.iter().zip(&per_rod).filter(|(r, _)| r.axis == a);
        *slot = on_axis
            .map(|(_, e)| e.unwrap_or(Element::Unchecked))
            .reduce(Element::worst)
            .unwrap_or(Element::Unchecked);
    }
    out
}

/// Whether the law uses the gyro: a loop step's `law` (or `control.law`), else the
/// plan's `[control] law`, says so — `rate` uses it, `bdot` does not. Without one, the
/// gyro counts only when a step measured it (align's `gyro` is not null).
fn gyro_needed(steps: &[&StepJson], plan_law: Option<&str>, notes: &mut Vec<String>) -> bool {
    let step_law = steps.iter().filter(|s| s.kind == "loop").find_map(|s| {
        s.json
            .get("law")
            .or_else(|| s.json.get("control").and_then(|c| c.get("law")))
            .and_then(Value::as_str)
    });
    if let (None, Some(l)) = (step_law, plan_law) {
        notes.push(format!(
            "No loop step ran; the plan's [control] names the law \"{l}\"."
        ));
    }
    let law = step_law.or(plan_law);
    let measured = steps
        .iter()
        .any(|s| s.kind == "align" && s.json.get("gyro").is_some_and(|g| !g.is_null()));
    let (required, why) = match law {
        Some("rate") => (true, "the law is \"rate\" (m ∝ ω × B), which uses the gyro"),
        Some("bdot") => (
            false,
            "the law is \"bdot\" (m ∝ −Ḃ), which does not use the gyro",
        ),
        _ if measured => (
            true,
            "neither a loop step nor the plan names the law, and a step measured the gyro",
        ),
        _ => (
            false,
            "neither a loop step nor the plan names the law, and no step measured the gyro",
        ),
    };
    notes.push(format!(
        "Gyro {}: {why}.",
        if required {
            "counted in the chain"
        } else {
            "not needed for completeness (a flipped or swapped gyro still breaks its axis)"
        }
    ));
    required
}
