//! One unit per quantity: the demo's closeouts are run again on the demo's ledger, and
//! every number the closeout summary shows that the ledger also keeps (and history
//! shows) carries the unit the ledger records for it; and every quantity has one unit
//! in the whole ledger. The closeout's figure labels are matched to the ledger's
//! quantities through history's own label for each (the same function history uses),
//! with the few figures the closeout names otherwise listed in `ALIASES`.

use std::collections::{BTreeMap, BTreeSet};

use magproof::ledger::{Change, Flag, RunId};
use magproof::report::sections::change_text::change_label;
use serde_json::Value;

use super::util::{assert_code, json_stdout, stdout, TestDir};

/// (kind, closeout figure label, history label) where the two name one quantity
/// differently.
const ALIASES: [(&str, &str, &str); 11] = [
    ("calibrate", "residual RMS", "calibration residual rms"),
    ("orbit", "residual", "orbit residual rms"),
    ("dipole", "moment x (body)", "dipole x"),
    ("dipole", "moment y (body)", "dipole y"),
    ("dipole", "moment z (body)", "dipole z"),
    ("dipole", "|m|", "|dipole|"),
    ("rod", "moment per ampere", "rod moment per amp"),
    ("rod", "remanence", "rod remanence"),
    ("rod", "time constant", "rod time constant"),
    (
        "rod",
        "linearity (largest deviation)",
        "rod linearity max dev",
    ),
    ("rod", "core gain", "rod core gain"),
];

/// History's label of a quantity (the function its writers call).
fn history_label(kind: &str, quantity: &str, unit: &str) -> String {
    change_label(&Change {
        serial: String::new(),
        kind: kind.into(),
        from_build: String::new(),
        to_build: String::new(),
        quantity: quantity.into(),
        unit: unit.into(),
        delta: None,
        sigma: None,
        flag: Flag::Unchanged,
        from: Value::Null,
        to: Value::Null,
        from_run: RunId(0),
        to_run: RunId(0),
        detail: None,
    })
}

/// The figures of merit of each step of a closeout's terminal text: (step title, label,
/// value), continuation lines joined.
fn figures(text: &str) -> Vec<(String, String, String)> {
    let mut out: Vec<(String, String, String)> = Vec::new();
    let mut title = None;
    for line in text.lines() {
        if let Some(rest) = line.strip_prefix("Step ") {
            // "Step 1 · Title ──── [PASS]"
            title = rest
                .split(" · ")
                .nth(1)
                .map(|t| t.split('─').next().unwrap_or(t).trim().to_string());
            continue;
        }
        if line.trim().is_empty() {
            title = None; // the figures block ends at the first blank line
            continue;
        }
        let Some(t) = &title else { continue };
        let body = line.strip_prefix("  ").unwrap_or(line);
        if body.starts_with(' ') {
            if let Some(last) = out.last_mut() {
                last.2.push(' ');
                last.2.push_str(body.trim());
            }
            continue;
        }
        if let Some(at) = body.find("  ") {
            out.push((
                t.clone(),
                body[..at].to_string(),
                body[at..].trim().to_string(),
            ));
        }
    }
    out
}

/// The closeout step title of each kind.
fn kind_of(title: &str) -> Option<&'static str> {
    match title {
        "Magnetometer calibration" => Some("calibrate"),
        "Magnetometer calibration on orbit" => Some("orbit"),
        "Residual magnetic dipole" => Some("dipole"),
        "Torque-rod polarity" => Some("polarity"),
        t if t.starts_with("Torque rod ") => Some("rod"),
        _ => None,
    }
}

/// Units a figure may carry.
const UNITS: [&str; 9] = [
    "nT/A", "nT/°C", "nT", "A·m²/A", "A·m²", "N·m", "s", "%", "°",
];

/// The unit written right after the figure's first number (`""`: none).
fn unit_after_number(value: &str) -> String {
    let mut words = value.split_whitespace().peekable();
    while let Some(w) = words.next() {
        if w.trim_start_matches(['+', '-', '('])
            .starts_with(|c: char| c.is_ascii_digit())
        {
            // Skip "± σ" and a closing ")eN" of a scaled pair.
            let mut next = words.next().unwrap_or("");
            if next == "±" {
                words.next();
                next = words.next().unwrap_or("");
            }
            let unit = next.trim_end_matches([',', ';']);
            return UNITS
                .iter()
                .find(|u| **u == unit)
                .map_or(String::new(), |u| u.to_string());
        }
    }
    String::new()
}

#[test]
fn the_closeout_summary_and_history_give_each_quantity_one_unit() {
    let d = TestDir::new();
    assert_code(&d.run(&["demo", "--out", "dm"]), 0);
    let ledger = d.join("dm/ledger.db");
    let ledger = ledger.to_str().unwrap();
    // Units as the ledger records them (what history shows), one per quantity.
    let h = d.run(&["history", "--ledger", ledger, "--json"]);
    assert_code(&h, 0);
    let mut units: BTreeMap<(String, String), BTreeSet<String>> = BTreeMap::new();
    for run in json_stdout(&h)["runs"].as_array().unwrap() {
        let kind = run["kind"].as_str().unwrap().to_string();
        for q in run["quantities"].as_array().unwrap() {
            let unit = q["unit"].as_str().unwrap_or("").to_string();
            let label = history_label(&kind, q["name"].as_str().unwrap(), &unit);
            units.entry((kind.clone(), label)).or_default().insert(unit);
        }
    }
    for (q, u) in &units {
        assert_eq!(u.len(), 1, "{q:?} is recorded in several units: {u:?}");
    }
    // Every demo closeout, on the same ledger.
    let mut plans: Vec<String> = Vec::new();
    for dir in [
        "tmr-0207-b1",
        "tmr-0207-b2",
        "tmr-0207-b3",
        "tmr-0207-orbit",
    ] {
        plans.push(format!("dm/sample-logs/{dir}/plan.toml"));
    }
    for rod in ["tmr-tr-x", "tmr-tr-y", "tmr-tr-z"] {
        plans.push(format!("dm/sample-logs/rods/{rod}/plan.toml"));
    }
    let mut compared = BTreeSet::new();
    for plan in &plans {
        let run = d.run(&["closeout", plan, "--ledger", ledger]);
        assert!(run.status.code().is_some_and(|c| c <= 1), "{plan}");
        for (title, label, value) in figures(&stdout(&run)) {
            let Some(kind) = kind_of(&title) else {
                continue;
            };
            let bare = label.split(" (").next().unwrap_or(&label).to_lowercase();
            let history = ALIASES
                .iter()
                .find(|(k, l, _)| *k == kind && *l == label)
                .map_or(bare, |(_, _, h)| h.to_string());
            let Some(unit) = units.get(&(kind.to_string(), history.clone())) else {
                continue;
            };
            let want = unit.iter().next().unwrap();
            let want = if want == "1" { "" } else { want.as_str() };
            assert_eq!(
                unit_after_number(&value),
                want,
                "{plan}: {kind} \"{label}\" shows {value:?}; history shows {history} in {want:?}"
            );
            compared.insert((kind, history));
        }
    }
    // The comparison covers each kind's key numbers.
    for (kind, label) in [
        ("calibrate", "hard iron x"),
        ("calibrate", "calibration residual rms"),
        ("dipole", "dipole x"),
        ("dipole", "|dipole|"),
        ("orbit", "hard iron z"),
        ("orbit", "orbit residual rms"),
        ("rod", "rod remanence"),
        ("rod", "rod moment per amp"),
        ("rod", "rod time constant"),
        ("rod", "rod linearity max dev"),
    ] {
        assert!(
            compared.contains(&(kind, label.to_string())),
            "{kind} {label} was not compared; compared: {compared:?}"
        );
    }
}

#[test]
fn the_unit_after_a_figure_is_read_as_written() {
    assert_eq!(unit_after_number("1194.32 ± 0.61 nT"), "nT");
    assert_eq!(unit_after_number("(4.33 ± 0.30)e-4 A·m²"), "A·m²");
    assert_eq!(unit_after_number("1.500 ± 0.023 A·m²/A"), "A·m²/A");
    assert_eq!(unit_after_number("25.25 nT RMS (robust σ 24.27 nT)"), "nT");
    assert_eq!(unit_after_number("47.14 (predicted 37.49 with N_d)"), "");
}
