//! Tests of the history section: a crossed limit, an empty ledger, a flagged jump.

use super::trends::{trend_plot, BUILD_AXIS, NAMED_BUILD_AXIS, TRENDS};
use super::*;
use crate::ledger::{changes, ChangeRules, RunId};
use crate::report::plot::draw_xy;
use serde_json::json;

fn run(id: i64, build: &str, kind: &str, pass: bool, result: Value) -> Run {
    Run {
        id: RunId(id),
        serial: "QX-7".into(),
        build: build.into(),
        kind: kind.into(),
        quantities: {
            let mut q = crate::ledger::legacy_quantities(kind, &result);
            q.push(crate::ledger::Quantity::pass(kind, pass));
            q
        },
        recorded_at: format!("2026-11-2{id}T09:00:00.000Z"),
        tool_version: Some("0.1.0".into()),
        pass: Some(pass),
        result,
        inputs: vec![],
    }
}

#[test]
fn crossing_the_dipole_limit_fails_and_is_flagged_in_words() {
    let dip = |m: f64, pass| {
        json!({"moment_body_am2": [m, 0.0, 0.0], "magnitude_am2": m,
               "moment_sigma_am2": [0.001, 0.001, 0.001], "magnitude_sigma_am2": 0.001,
               "residual_dipole_max_am2": 0.05, "pass": pass})
    };
    let cal = |h: f64| {
        json!({"hard_iron_nt": [h, 10.0, -5.0], "hard_iron_sigma_nt": [2.0, 2.0, 2.0],
               "residual_rms_nt": 40.0, "residual_limit_nt": 100.0, "pass": true})
    };
    let runs = vec![
        run(1, "B1", "dipole", true, dip(0.02, true)),
        run(2, "B1", "calibrate", true, cal(100.0)),
        run(3, "B2", "dipole", false, dip(0.09, false)),
        run(4, "B2", "calibrate", true, cal(400.0)),
    ];
    let ch = changes(&runs, &ChangeRules::default());
    let s = history_section(&runs, &ch).unwrap();
    assert_eq!(s.verdict, Verdict::Fail);
    let names: Vec<&str> = s.figures.iter().map(|f| f.file_name.as_str()).collect();
    assert_eq!(
        names,
        [
            "history-dipole.svg",
            "history-hard-iron-x.svg",
            "history-hard-iron-y.svg",
            "history-hard-iron-z.svg",
            "history-calibration-residual.svg"
        ]
    );
    assert!(s.figures[0].svg.contains("limit"));
    let flag_column = s.tables[2].header.iter().position(|h| h == "flag").unwrap();
    let flags: Vec<&Cell> = s.tables[2].rows.iter().map(|r| &r[flag_column]).collect();
    assert!(flags
        .iter()
        .any(|c| c.text == "limit-crossed !" && c.tone == Tone::Bad));
    assert!(!s.warnings.is_empty());
    assert_eq!(s.result["changes"].as_array().unwrap().len(), ch.len());
    let dipole_column = s.tables[0]
        .header
        .iter()
        .position(|h| h == "dipole")
        .unwrap();
    assert_eq!(s.tables[0].rows[1][dipole_column].text, "FAIL");
}

#[test]
fn empty_ledger_gives_a_section_without_plots() {
    let s = history_section(&[], &[]).unwrap();
    assert_eq!(s.verdict, Verdict::NoLimit);
    assert!(s.figures.is_empty());
}

#[test]
fn a_flagged_15_nt_jump_fills_its_own_plot_and_builds_are_named() {
    // Hard iron x 1200 → 1215 nT (σ 2 nT) beside y and z near −750 and 425 nT: on a
    // shared scale the jump would be 0.8 % of the axis; on its own it must be most
    // of it.
    let cal = |h: f64| {
        json!({"hard_iron_nt": [h, -750.0, 425.0], "hard_iron_sigma_nt": [2.0, 2.0, 2.0],
               "residual_rms_nt": 20.0, "residual_limit_nt": 150.0, "pass": true})
    };
    let runs = vec![
        run(1, "B1", "calibrate", true, cal(1200.0)),
        run(2, "B2", "calibrate", true, cal(1215.0)),
    ];
    let rows = build_rows(&runs, &kinds_of(&runs));
    let groups: Vec<&[BuildRow<'_>]> = vec![&rows[..]];
    let plot = trend_plot(&TRENDS[1], &groups).unwrap();
    let (_, (y0, y1)) = crate::report::plot::xy_ranges(&plot);
    assert!(
        15.0 / (y1 - y0) > 0.5,
        "jump is {} of the axis",
        15.0 / (y1 - y0)
    );
    // Error bars of ±2 nT inside the range, names on the axis.
    assert!(y0 <= 1198.0 && y1 >= 1217.0);
    assert_eq!(plot.x_names, ["B1", "B2"]);
    assert_eq!(plot.series[0].sigma, [2.0, 2.0]);
    let svg = draw_xy(&plot).unwrap();
    assert!(
        svg.contains("B1") && svg.contains("B2"),
        "build names on the axis: {svg}"
    );
}

#[test]
fn a_rod_beside_the_vehicle_keeps_the_vehicle_builds_named() {
    // A rod's bench run has no hard iron: the hard-iron plot shows the vehicle alone
    // and names its builds; with a second vehicle calibrated, numbers again.
    let cal = json!({"hard_iron_nt": [1200.0, -750.0, 425.0],
                     "hard_iron_sigma_nt": [2.0, 2.0, 2.0], "pass": true});
    let mut rod = run(3, "R-1", "rod", true, json!({"pass": true}));
    rod.serial = "ROD-1".into();
    let mut runs = vec![
        run(1, "B1", "calibrate", true, cal.clone()),
        run(2, "B2", "calibrate", true, cal.clone()),
        rod,
    ];
    let plot_of = |runs: &[Run]| {
        let rows = build_rows(runs, &kinds_of(runs));
        let groups: Vec<&[BuildRow<'_>]> = rows.chunk_by(|a, b| a.serial == b.serial).collect();
        assert!(groups.len() >= 2);
        trend_plot(&TRENDS[1], &groups).unwrap()
    };
    let plot = plot_of(&runs);
    assert_eq!(plot.x_names, ["B1", "B2"]);
    assert_eq!(plot.x_label, NAMED_BUILD_AXIS);
    let mut other = run(4, "C1", "calibrate", true, cal);
    other.serial = "QX-8".into();
    runs.push(other);
    let plot = plot_of(&runs);
    assert!(plot.x_names.is_empty());
    assert_eq!(plot.x_label, BUILD_AXIS);
}
