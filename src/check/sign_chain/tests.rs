//! The chain builder on synthetic step JSON, shaped as the documented keys of
//! docs/alignment.md (`axes`, `handedness`, `gyro`), docs/polarity.md (`rods[].name`,
//! `rods[].verdict`) and the loop check's contract (`rods`: [{name, verdict, slope,
//! correlation}], verdicts consistent | reversed | not-driven | cross-wired | unused).

use serde_json::{json, Value};

use super::*;

fn align(mag: [&str; 3], gyro: Option<[&str; 3]>) -> Value {
    let axes = |v: [&str; 3]| {
        AXES.iter()
            .zip(v)
            .map(|(a, w)| json!({"axis": a, "verdict": w, "measured": null, "planned": format!("+{a}")}))
            .collect::<Vec<_>>()
    };
    json!({
        "axes": axes(mag),
        "handedness": "right",
        "gyro": gyro.map(|g| json!({"axes": axes(g)})),
        "verdict": "pass",
    })
}

fn rods_json(verdicts: [&str; 3]) -> Value {
    let rods: Vec<Value> = AXES
        .iter()
        .zip(verdicts)
        .map(|(n, v)| json!({"name": n, "verdict": v, "slope": 1.0, "correlation": 0.98}))
        .collect();
    json!({ "rods": rods })
}

fn looped(verdicts: [&str; 3], law: Option<&str>) -> Value {
    let mut j = rods_json(verdicts);
    if let Some(l) = law {
        j["law"] = json!(l);
    }
    j
}

/// Rods named x, y, z along body x, y, z.
pub(super) fn plan_rods() -> Vec<RodAxis> {
    AXES.iter()
        .enumerate()
        .map(|(axis, n)| RodAxis {
            name: n.to_string(),
            axis,
        })
        .collect()
}

/// The chain of `(kind, json)` steps, numbered in order, under [`plan_rods`].
pub(super) fn chain(steps: &[(&str, &Value)]) -> SignChain {
    let views: Vec<StepJson> = steps
        .iter()
        .enumerate()
        .map(|(k, (kind, json))| StepJson {
            index: k + 1,
            kind,
            json,
        })
        .collect();
    build_sign_chain(&views, &plan_rods()).expect("a chain step ran")
}

const OK3: [&str; 3] = ["ok", "ok", "ok"];

#[test]
fn every_element_proven_makes_the_chain_complete() {
    let a = align(OK3, Some(OK3));
    let p = rods_json(OK3);
    let l = looped(["consistent"; 3], Some("rate"));
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert!(c.complete(), "{c:?}");
    assert!(c.gyro_required, "the rate law uses the gyro");
    assert_eq!(c.verdict(), Verdict::Pass);
    assert_eq!(c.status(), "complete");
    assert!(c.axes.iter().all(|x| x.ok));
    assert_eq!(c.steps, vec![1, 2, 3]);
}

#[test]
fn a_flip_found_by_align_breaks_its_axis_whatever_polarity_says() {
    let a = align(["flipped", "ok", "ok"], None);
    let p = rods_json(OK3);
    let l = looped(["consistent"; 3], Some("bdot"));
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert_eq!(c.axes[0].magnetometer, Element::Flipped);
    assert_eq!(c.axes[0].rod, Element::Ok);
    assert!(!c.axes[0].ok);
    assert!(c.axes[1].ok && c.axes[2].ok);
    assert!(!c.complete());
    assert_eq!(c.verdict(), Verdict::Fail);
    assert!(c
        .notes
        .iter()
        .any(|n| n.contains("Polarity judges each rod through")));
}

#[test]
fn a_flipped_magnetometer_and_a_reversed_rod_on_one_axis_are_named_a_cancelling_pair() {
    let a = align(["ok", "flipped", "ok"], None);
    let p = rods_json(["ok", "reversed", "ok"]);
    let c = chain(&[("align", &a), ("polarity", &p)]);
    let pair: Vec<&String> = c.notes.iter().filter(|n| n.contains("cancel")).collect();
    assert_eq!(pair.len(), 1, "{:?}", c.notes);
    assert!(pair[0].starts_with("Body y:") && pair[0].contains("rod is reversed"));
    assert!(pair[0].contains("B-dot"));
    // A reversed rod without a flipped magnetometer is no pair.
    let a = align(OK3, None);
    let c = chain(&[("align", &a), ("polarity", &p)]);
    assert!(
        !c.notes.iter().any(|n| n.contains("cancel")),
        "{:?}",
        c.notes
    );
    assert_eq!(c.verdict(), Verdict::Fail);
}

#[test]
fn a_reversed_law_pairs_with_a_flipped_magnetometer_too() {
    let a = align(["ok", "ok", "flipped"], None);
    let l = looped(["consistent", "consistent", "reversed"], Some("bdot"));
    let c = chain(&[("align", &a), ("loop", &l)]);
    assert!(c
        .notes
        .iter()
        .any(|n| n.starts_with("Body z:") && n.contains("law is reversed")));
}

#[test]
fn an_unchecked_gyro_under_a_bdot_law_leaves_the_chain_complete() {
    let a = align(OK3, None);
    let p = rods_json(OK3);
    let l = looped(["consistent"; 3], Some("bdot"));
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert!(!c.gyro_required);
    assert!(c.axes.iter().all(|x| x.gyro == Element::Unchecked));
    assert!(c.complete(), "{c:?}");
    assert_eq!(c.verdict(), Verdict::Pass);
}

#[test]
fn an_unchecked_gyro_under_a_rate_law_is_incomplete_not_broken() {
    let a = align(OK3, None);
    let p = rods_json(OK3);
    let l = looped(["consistent"; 3], Some("rate"));
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert!(c.gyro_required);
    assert!(!c.complete());
    assert_eq!(c.verdict(), Verdict::NoLimit);
    assert_eq!(c.status(), "incomplete");
}

#[test]
fn a_flipped_gyro_breaks_its_axis_even_when_the_law_does_not_use_it() {
    let a = align(OK3, Some(["ok", "ok", "flipped"]));
    let p = rods_json(OK3);
    let l = looped(["consistent"; 3], Some("bdot"));
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert!(!c.gyro_required);
    assert!(!c.axes[2].ok && c.axes[0].ok);
    assert_eq!(c.verdict(), Verdict::Fail);
}

#[test]
fn without_a_loop_step_the_law_is_unchecked_and_the_chain_incomplete() {
    let a = align(OK3, None);
    let p = rods_json(OK3);
    let c = chain(&[("align", &a), ("polarity", &p)]);
    assert!(c.axes.iter().all(|x| x.law == Element::Unchecked));
    assert!(c
        .axes
        .iter()
        .all(|x| x.magnetometer == Element::Ok && x.rod == Element::Ok));
    assert!(!c.complete());
    assert_eq!(
        c.verdict(),
        Verdict::NoLimit,
        "untested is not a failed check"
    );
    // Without a law named and no gyro measured, the gyro is not needed.
    assert!(!c.gyro_required);
}

/// The plan's `[control] law` decides the gyro when no loop step ran (common practice:
/// a rate law needs the rate sensor's sign; a B-dot law does not read the gyro).
#[test]
fn without_a_loop_step_the_plans_law_decides_whether_the_gyro_is_needed() {
    let a = align(OK3, None);
    let p = rods_json(OK3);
    let views = [
        StepJson {
            index: 1,
            kind: "align",
            json: &a,
        },
        StepJson {
            index: 2,
            kind: "polarity",
            json: &p,
        },
    ];
    let rate = build_sign_chain_under(&views, &plan_rods(), Some("rate")).unwrap();
    assert!(rate.gyro_required);
    assert!(
        rate.notes.iter().any(|n| n.contains("[control]")),
        "{rate:?}"
    );
    let bdot = build_sign_chain_under(&views, &plan_rods(), Some("bdot")).unwrap();
    assert!(!bdot.gyro_required);
    // A loop step's own law wins over the plan's.
    let l = looped(["consistent"; 3], Some("bdot"));
    let with_loop = [
        views[0],
        views[1],
        StepJson {
            index: 3,
            kind: "loop",
            json: &l,
        },
    ];
    let c = build_sign_chain_under(&with_loop, &plan_rods(), Some("rate")).unwrap();
    assert!(!c.gyro_required);
}

#[test]
fn polarity_and_loop_words_map_onto_their_axes() {
    let p = rods_json(["wrong-axis", "no-response", "off-axis"]);
    let l = looped(["cross-wired", "not-driven", "unused"], None);
    let c = chain(&[("polarity", &p), ("loop", &l)]);
    let rod: Vec<Element> = c.axes.iter().map(|a| a.rod).collect();
    let law: Vec<Element> = c.axes.iter().map(|a| a.law).collect();
    assert_eq!(
        rod,
        [
            Element::CrossWired,
            Element::NotDriven,
            Element::Inconclusive
        ]
    );
    assert_eq!(
        law,
        [Element::CrossWired, Element::NotDriven, Element::Unchecked]
    );
    assert!(c.axes.iter().all(|a| a.magnetometer == Element::Unchecked));
}

#[test]
fn the_worst_rod_on_an_axis_and_the_worst_step_decide() {
    let rods = vec![
        RodAxis {
            name: "x1".into(),
            axis: 0,
        },
        RodAxis {
            name: "x2".into(),
            axis: 0,
        },
        RodAxis {
            name: "y".into(),
            axis: 1,
        },
    ];
    let p1 = json!({"rods": [{"name": "x1", "verdict": "ok"}, {"name": "x2", "verdict": "reversed"},
                             {"name": "y", "verdict": "ok"}, {"name": "q", "verdict": "ok"}]});
    let p2 = json!({"rods": [{"name": "x1", "verdict": "ok"}, {"name": "x2", "verdict": "ok"},
                             {"name": "y", "verdict": "inconclusive"}]});
    let views = [
        StepJson {
            index: 1,
            kind: "polarity",
            json: &p1,
        },
        StepJson {
            index: 2,
            kind: "polarity",
            json: &p2,
        },
    ];
    let c = build_sign_chain(&views, &rods).unwrap();
    assert_eq!(c.axes[0].rod, Element::Reversed);
    assert_eq!(c.axes[1].rod, Element::Inconclusive);
    assert_eq!(c.axes[2].rod, Element::Unchecked);
    assert!(c.notes.iter().any(|n| n.contains("no rod along body z")));
    assert!(c
        .notes
        .iter()
        .any(|n| n.contains("\"q\" is not in the plan")));
}

#[test]
fn ok_axes_of_an_align_that_could_not_fix_the_field_sign_are_not_proof() {
    let mut a = align(OK3, None);
    a["handedness"] = json!("inconclusive");
    let c = chain(&[("align", &a)]);
    assert!(c
        .axes
        .iter()
        .all(|x| x.magnetometer == Element::Inconclusive));
    assert_eq!(c.status(), "inconclusive");
    // Not proven, but not a failed check: align carries its own verdict.
    assert_eq!(c.verdict(), Verdict::NoLimit);
}

#[test]
fn a_closeout_without_align_polarity_or_loop_has_no_chain() {
    let j = json!({"verdict": "pass"});
    let views = [StepJson {
        index: 1,
        kind: "calibrate",
        json: &j,
    }];
    assert!(build_sign_chain(&views, &plan_rods()).is_none());
}

#[test]
fn the_ledger_quantities_name_each_axis_and_element() {
    let a = align(["flipped", "ok", "ok"], None);
    let c = chain(&[("align", &a)]);
    let q = c.quantities();
    let word = |n: &str| {
        q.iter()
            .find(|x| x.name == n)
            .map(|x| x.value.clone())
            .unwrap_or_else(|| panic!("no {n}"))
    };
    use crate::ledger::QuantityValue::Verdict as W;
    assert_eq!(word("sign_chain_x"), W("broken".into()));
    assert_eq!(word("sign_chain_y"), W("not-proven".into()));
    assert_eq!(word("sign_chain_x_magnetometer"), W("flipped".into()));
    assert_eq!(word("sign_chain_z_law"), W("unchecked".into()));
    assert_eq!(word("sign_chain_status"), W("broken".into()));
    assert_eq!(q.len(), 16);
}

#[test]
fn a_tilted_rod_sits_on_the_body_axis_its_dipole_is_mostly_along() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plan.toml");
    std::fs::write(
        &path,
        "[article]\nserial = \"S\"\nbuild = \"B\"\n\
         [[rod]]\nname = \"a\"\naxis_body = [0.1, -0.99, 0.05]\nposition_m = [0, 0, 0]\n\
         [[rod]]\nname = \"b\"\naxis_body = [-0.6, 0.0, 0.8]\nposition_m = [0, 0, 0]\n",
    )
    .unwrap();
    let plan = crate::log::plan::read_plan(&path).unwrap();
    let rods = RodAxis::of_plan(&plan);
    let axes: Vec<(&str, usize)> = rods.iter().map(|r| (r.name.as_str(), r.axis)).collect();
    assert_eq!(
        axes,
        [("a", 1), ("b", 2)],
        "largest |component|, sign aside"
    );
}

#[test]
fn a_cancelling_pair_is_caught_by_the_chain_while_the_loop_passes() {
    // The y magnetometer axis flipped and the y rod reversed: the software's B-dot
    // command through the flipped axis is reversed too, so the rod pushes the right way,
    // the rotation loses energy and loop, reading through the same plan, finds every rod
    // consistent and passes (the sign argument of docs/sign-chain.md, m ∝ −Ḃ, Stickler &
    // Alfriend 1976). Align and polarity each fail on their own element.
    let a = align(["ok", "flipped", "ok"], None);
    let p = rods_json(["ok", "reversed", "ok"]);
    let mut l = looped(["consistent"; 3], Some("bdot"));
    l["energy"] = json!("removes");
    l["verdict"] = json!("pass");
    l["pass"] = json!(true);
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert_eq!(c.axes[1].law, Element::Ok, "the loop saw nothing wrong");
    assert_eq!(c.axes[1].magnetometer, Element::Flipped);
    assert_eq!(c.axes[1].rod, Element::Reversed);
    assert!(!c.axes[1].ok && c.axes[0].ok && c.axes[2].ok);
    assert!(!c.complete());
    assert_eq!(c.status(), "broken");
    assert!(c
        .notes
        .iter()
        .any(|n| n.starts_with("Body y:") && n.contains("cancel")));
    // Even were every step's own verdict a pass, the closeout's would fail on the chain.
    let steps_and_chain = [Verdict::Pass, Verdict::Pass, Verdict::Pass, c.verdict()];
    assert_eq!(Verdict::combine(steps_and_chain), Verdict::Fail);
}

#[test]
fn missing_elements_are_unproven_never_ok() {
    // Only a polarity step: the magnetometer and the law were never tested.
    let p = rods_json(OK3);
    let c = chain(&[("polarity", &p)]);
    for x in &c.axes {
        assert_eq!(x.rod, Element::Ok);
        assert_eq!(x.magnetometer, Element::Unchecked);
        assert_eq!(x.law, Element::Unchecked);
        assert!(!x.ok, "{x:?}");
    }
    assert!(!c.complete());
    assert_eq!(c.status(), "incomplete");
    assert_eq!(c.verdict(), Verdict::NoLimit);
    let q = c.quantities();
    assert!(q.iter().any(|x| x.name == "sign_chain_x"
        && x.value == crate::ledger::QuantityValue::Verdict("not-proven".into())));
}

/// An align step's JSON for a hand tumble: the magnetometer's keys null, the gyro judged
/// against the magnetometer (docs/alignment.md, "Hand tumble").
fn tumble(gyro: [&str; 3]) -> Value {
    let mut j = align(OK3, Some(gyro));
    j["axes"] = Value::Null;
    j["handedness"] = Value::Null;
    j["gyro"]["reference"] = json!("magnetometer");
    j
}

#[test]
fn a_gyro_judged_on_a_hand_tumble_proves_nothing_until_the_magnetometer_is_proven() {
    let l = looped(["consistent"; 3], Some("rate"));
    let p = rods_json(OK3);
    let t = tumble(OK3);
    let c = chain(&[("align", &t), ("polarity", &p), ("loop", &l)]);
    assert!(c.axes.iter().all(|x| x.magnetometer == Element::Unchecked));
    assert!(c.axes.iter().all(|x| x.gyro == Element::Inconclusive));
    assert_eq!(c.status(), "inconclusive");
    assert!(c.notes.iter().any(|n| n.contains("hand tumble")));

    // A turntable align proves the magnetometer: the tumble's gyro axes then stand.
    let table = align(OK3, None);
    let c = chain(&[
        ("align", &table),
        ("align", &t),
        ("polarity", &p),
        ("loop", &l),
    ]);
    assert!(c.axes.iter().all(|x| x.gyro == Element::Ok), "{c:?}");
    assert!(c.complete());

    // A disagreeing gyro axis stays broken, with the note that either may be at fault.
    let t = tumble(["ok", "flipped", "flipped"]);
    let c = chain(&[("align", &t), ("polarity", &p), ("loop", &l)]);
    assert_eq!(c.axes[1].gyro, Element::Flipped);
    assert_eq!(c.axes[0].gyro, Element::Inconclusive);
    assert_eq!(c.verdict(), Verdict::Fail);
    assert!(c.notes.iter().any(|n| n.contains("check both mappings")));
}

#[test]
fn a_reversed_rod_under_a_reversed_law_is_a_cancelling_pair_and_three_wrong_signs_are_not() {
    // A harness wired backwards under a software command of the wrong sign: the dipole
    // is right, so the pair cancels in B-dot (m ∝ −Ḃ: each sign multiplies the dipole).
    let a = align(OK3, None);
    let p = rods_json(["ok", "reversed", "ok"]);
    let l = looped(["consistent", "reversed", "consistent"], Some("bdot"));
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    let pair: Vec<&String> = c.notes.iter().filter(|n| n.contains("cancel")).collect();
    assert_eq!(pair.len(), 1, "{:?}", c.notes);
    assert!(pair[0].starts_with("Body y: the rod is reversed and the law is reversed"));
    assert_eq!(c.verdict(), Verdict::Fail);
    // Three wrong signs on one axis multiply to a wrong dipole: no cancelling pair.
    let a = align(["ok", "flipped", "ok"], None);
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert!(
        !c.notes.iter().any(|n| n.contains("cancel")),
        "{:?}",
        c.notes
    );
}
