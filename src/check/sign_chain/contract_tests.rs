//! The chain on the JSON that align and loop really write (tests/data/sign_chain/,
//! made with magproof's simulators and cut to the keys the chain reads; how is in that
//! folder's README): every key and verdict word the chain reads is one those checks
//! write.

use serde_json::{json, Value};

use super::tests::chain;
use super::*;

fn fixture(name: &str) -> Value {
    let path = format!(
        "{}/tests/data/sign_chain/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{path}: {e}"))
}

/// A polarity step's `rods` (docs/polarity.md) for rods x, y, z.
fn polarity(verdicts: [&str; 3]) -> Value {
    let rods: Vec<Value> = AXES
        .iter()
        .zip(verdicts)
        .map(|(n, v)| json!({"name": n, "verdict": v}))
        .collect();
    json!({ "rods": rods })
}

#[test]
fn every_verdict_word_align_and_loop_wrote_is_one_the_chain_knows() {
    for name in [
        "align_table_gyro_flip_z.json",
        "align_tumble.json",
        "align_tumble_mag_flip_x.json",
    ] {
        let j = fixture(name);
        let mag = j["axes"].as_array().into_iter().flatten();
        for a in mag.chain(j["gyro"]["axes"].as_array().expect(name)) {
            let w = a["verdict"].as_str().expect(name);
            assert!(Element::from_align(w).is_some(), "{name}: {w}");
        }
    }
    for name in ["loop_bdot.json", "loop_bdot_rod_sign_and_wiring_y.json"] {
        let j = fixture(name);
        for r in j["rods"].as_array().expect(name) {
            let w = r["verdict"].as_str().expect(name);
            assert!(Element::from_loop(w).is_some(), "{name}: {w}");
        }
    }
}

#[test]
fn a_table_align_with_a_flipped_gyro_and_a_passing_bdot_loop_break_body_z() {
    let a = fixture("align_table_gyro_flip_z.json");
    let l = fixture("loop_bdot.json");
    let p = polarity(["ok"; 3]);
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert!(!c.gyro_required, "loop wrote law bdot");
    assert!(c.axes.iter().all(|x| x.magnetometer == Element::Ok));
    assert!(c.axes.iter().all(|x| x.law == Element::Ok));
    assert_eq!(c.axes[2].gyro, Element::Flipped);
    assert!(c.axes[0].ok && c.axes[1].ok && !c.axes[2].ok);
    assert_eq!(c.status(), "broken");
}

#[test]
fn a_hand_tumble_gyro_is_not_proof_of_the_gyro_on_its_own() {
    let t = fixture("align_tumble.json");
    let l = fixture("loop_bdot.json");
    let p = polarity(["ok"; 3]);
    let c = chain(&[("align", &t), ("polarity", &p), ("loop", &l)]);
    assert!(c.axes.iter().all(|x| x.magnetometer == Element::Unchecked));
    assert!(c.axes.iter().all(|x| x.gyro == Element::Inconclusive));
    assert_eq!(
        c.status(),
        "incomplete",
        "the magnetometer was never tested"
    );

    // A flipped magnetometer x axis shows on a tumble as gyro y and z flipped.
    let t = fixture("align_tumble_mag_flip_x.json");
    let c = chain(&[("align", &t), ("polarity", &p), ("loop", &l)]);
    let gyro: Vec<Element> = c.axes.iter().map(|x| x.gyro).collect();
    assert_eq!(
        gyro,
        [Element::Inconclusive, Element::Flipped, Element::Flipped]
    );
    assert!(c.notes.iter().any(|n| n.contains("check both mappings")));
}

#[test]
fn a_reversed_harness_under_a_reversed_software_sign_is_named_a_cancelling_pair() {
    let a = fixture("align_table_gyro_flip_z.json");
    let l = fixture("loop_bdot_rod_sign_and_wiring_y.json");
    let p = polarity(["ok", "reversed", "ok"]);
    let c = chain(&[("align", &a), ("polarity", &p), ("loop", &l)]);
    assert_eq!(c.axes[1].law, Element::Reversed);
    assert_eq!(c.axes[1].rod, Element::Reversed);
    assert!(c
        .notes
        .iter()
        .any(|n| n.starts_with("Body y: the rod is reversed and the law is reversed")));
}
