//! The closeout's sign chain section (docs/sign-chain.md): one row per body axis with
//! what align, polarity and loop proved for its magnetometer axis, gyro axis, rod and
//! law, and the notes (gyro rule, cancelling pairs) where they apply.

use super::super::model::{Cell, Section, Table, Tone};
use crate::check::sign_chain::{Element, SignChain};

/// `kind` of the section.
pub const KIND: &str = "sign_chain";

fn element_cell(e: Element, needed: bool) -> Cell {
    let tone = match e {
        Element::Ok => Tone::Good,
        _ if e.is_broken() => Tone::Bad,
        _ if needed => Tone::Warn,
        _ => Tone::Plain,
    };
    let text = match e {
        _ if needed || e == Element::Ok || e.is_broken() => e.label().to_string(),
        Element::Unchecked => "not needed".to_string(),
        _ => format!("{}, not needed", e.label()),
    };
    Cell::toned(text, tone)
}

/// What the chain's state means, for its figure of merit.
fn status_text(chain: &SignChain) -> String {
    let words = match chain.status() {
        "complete" => "complete: every element proven on its own",
        "broken" => "BROKEN: a wrong sign or axis was found",
        "inconclusive" => "inconclusive: a test could not tell (not proven)",
        _ => "incomplete: an element was not tested (not a failed check)",
    };
    words.to_string()
}

/// The section for a closeout's sign chain.
pub fn sign_chain_section(chain: &SignChain) -> Section {
    let rows = chain
        .axes
        .iter()
        .map(|a| {
            let (word, tone) = if a.ok {
                ("yes", Tone::Good)
            } else if [a.magnetometer, a.gyro, a.rod, a.law]
                .iter()
                .any(|e| e.is_broken())
            {
                ("NO: broken", Tone::Bad)
            } else {
                ("not proven", Tone::Warn)
            };
            vec![
                Cell::plain(format!("body {}", a.axis)),
                element_cell(a.magnetometer, true),
                element_cell(a.gyro, chain.gyro_required),
                element_cell(a.rod, true),
                element_cell(a.law, true),
                Cell::toned(word, tone),
            ]
        })
        .collect();
    let table = Table {
        caption: "Each element judged on its own: magnetometer and gyro axes by align, the \
                  rod along the axis by polarity, the law's command for that rod by loop"
            .into(),
        header: ["axis", "magnetometer", "gyro", "rod", "law", "ok"]
            .map(String::from)
            .to_vec(),
        rows,
    };
    let mut notes = chain.notes.clone();
    notes.push(
        "A closeout fails on a broken element (each one also fails its own step); an \
         element never tested, or whose test could not tell, leaves the chain unproven \
         without failing the closeout: the chain is proven only when it reads complete."
            .to_string(),
    );
    let mut result = serde_json::Map::new();
    for (k, v) in chain.json_keys() {
        result.insert(k.to_string(), v);
    }
    Section {
        kind: KIND.to_string(),
        title: "Sign chain per body axis".to_string(),
        verdict: chain.verdict(),
        figures_of_merit: vec![
            ("Chain".to_string(), status_text(chain)),
            (
                "Gyro".to_string(),
                if chain.gyro_required {
                    "part of the chain (the law uses it)".to_string()
                } else {
                    "not needed for completeness".to_string()
                },
            ),
        ],
        tables: vec![table],
        figures: vec![],
        warnings: vec![],
        notes,
        result: serde_json::Value::Object(result),
    }
}
