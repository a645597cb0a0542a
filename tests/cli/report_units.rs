//! What a reviewer reads in every report of the demo (three closeouts, a rod, the orbit
//! pass and the history): each plot's axes carry a unit, each table's unit column is
//! filled (never a bare "1"), no number shows as `-0.000`, the assumptions are echoed,
//! and the page renders in headless Chromium.

use std::path::{Path, PathBuf};

use crate::util::{assert_code, png_ink, screenshot, TestDir};

/// The value of attribute `name` in the tag text `tag`.
fn attr<'a>(tag: &'a str, name: &str) -> Option<&'a str> {
    let start = tag.find(&format!("{name}=\""))? + name.len() + 2;
    let len = tag[start..].find('"')?;
    Some(&tag[start..start + len])
}

/// Every `<table>` of the page as (header cells, rows of cells), tags stripped.
fn tables(html: &str) -> Vec<(Vec<String>, Vec<Vec<String>>)> {
    let cells = |row: &str, tag: &str| -> Vec<String> {
        row.split(&format!("<{tag}"))
            .skip(1)
            .map(|c| {
                let body = &c[c.find('>').unwrap() + 1..];
                body[..body.find(&format!("</{tag}>")).unwrap()]
                    .trim()
                    .to_string()
            })
            .collect()
    };
    html.split("<table>")
        .skip(1)
        .map(|t| {
            let t = &t[..t.find("</table>").unwrap()];
            // `<thead>` is not a header cell.
            let head = cells(&t.replace("<thead>", ""), "th");
            let body = &t[t.find("<tbody>").unwrap()..];
            let rows = body.split("<tr>").skip(1).map(|r| cells(r, "td")).collect();
            (head, rows)
        })
        .collect()
}

/// Whether `text` shows a zero with a minus sign (`-0`, `-0.000`).
fn has_negative_zero(text: &str) -> bool {
    let b = text.as_bytes();
    (0..b.len()).any(|i| {
        if b[i] != b'-' || (i > 0 && (b[i - 1].is_ascii_alphanumeric() || b[i - 1] == b'.')) {
            return false;
        }
        let mut j = i + 1;
        let mut zeros = 0;
        while j < b.len() && (b[j] == b'0' || b[j] == b'.') {
            zeros += usize::from(b[j] == b'0');
            j += 1;
        }
        zeros > 0 && !(j < b.len() && b[j].is_ascii_digit())
    })
}

fn demo(d: &TestDir) -> PathBuf {
    assert_code(&d.run(&["demo", "--out", "demo"]), 0);
    d.join("demo")
}

fn check_page(path: &Path) {
    let html = std::fs::read_to_string(path).unwrap();
    let shown = |s: &str| format!("{}: {s}", path.display());
    // Plots: both axis labels carry a unit in brackets.
    let mut plots = 0;
    for tag in html.split("<svg").skip(1) {
        let tag = &tag[..tag.find('>').unwrap()];
        for axis in ["data-x-label", "data-y-label"] {
            let label = attr(tag, axis).unwrap_or_else(|| panic!("{}", shown(tag)));
            let unit = label
                .rfind('[')
                .and_then(|i| label[i + 1..].strip_suffix(']'))
                .unwrap_or_else(|| panic!("{}", shown(label)));
            assert!(
                !unit.trim().is_empty() && unit.trim() != "1",
                "{}",
                shown(label)
            );
        }
        plots += 1;
    }
    // Tables: a unit column is never empty nor a bare "1"; no key names (snake_case).
    for (head, rows) in tables(&html) {
        if let Some(u) = head.iter().position(|h| h == "unit") {
            for r in &rows {
                let cell = r[u].trim();
                assert!(
                    !cell.is_empty() && cell != "1" && cell != "-",
                    "{}",
                    shown(&r.join(" | "))
                );
            }
        }
        if let Some(q) = head.iter().position(|h| h == "quantity") {
            for r in &rows {
                let words = &r[q];
                let key_like = words.contains('_') && !words.contains(' ');
                assert!(!key_like, "{}", shown(words));
            }
        }
    }
    // Text outside the plots: no `-0.000`.
    let text: String = html
        .split("<svg")
        .map(|p| p.split("</svg>").last().unwrap())
        .collect();
    assert!(!has_negative_zero(&text), "{}", shown("a negative zero"));
    assert!(plots > 0, "{}", shown("no plots"));
}

#[test]
fn every_plot_axis_and_every_unit_column_of_the_demo_reports_carries_a_unit() {
    let d = TestDir::new();
    let out = demo(&d);
    let reports = out.join("reports");
    for b in [
        "tmr-0207-b1",
        "tmr-0207-b2",
        "tmr-0207-b3",
        "tmr-0207-orbit",
        "rods/tmr-tr-x",
        "history",
    ] {
        check_page(&reports.join(b).join("report.html"));
    }
    // The orbit report's regressor plot puts the current's unit on its axis.
    let orbit = std::fs::read_to_string(reports.join("tmr-0207-orbit/report.html")).unwrap();
    assert!(orbit.contains("data-x-label=\"i_solar [A]\""));
    // The history names quantities in words, with units, never by their keys.
    let hist = std::fs::read_to_string(reports.join("history/report.html")).unwrap();
    assert!(hist.contains("|dipole|") && hist.contains(" A·m²"));
    assert!(!hist.contains("dipole_magnitude_am2") && !hist.contains("_pass "));
}

#[test]
fn a_closeout_report_echoes_its_assumptions_and_renders() {
    let d = TestDir::new();
    let out = demo(&d);
    let page = out.join("reports/tmr-0207-b3/report.html");
    let html = std::fs::read_to_string(&page).unwrap();
    for part in [
        "Assumptions",
        "mounting (sensor axes along body x, y, z)",
        "[-y, +x, +z]",
        "centre, body frame",
        "turntable probe",
        "latitude",
        "inclination",
        "Calibration applied to the readings",
        "as a direction error",
    ] {
        assert!(html.contains(part), "report lacks {part:?}");
    }
    // The plan gives its orbit: the dipole torque is judged in it, and nothing is
    // assumed (neither in the result nor on the page).
    let json = std::fs::read_to_string(out.join("reports/tmr-0207-b3/closeout.json")).unwrap();
    assert!(json.contains("97.52") && !json.contains("inclination not given"));
    assert!(!html.contains("inclination not given") && html.contains("525 km"));
    // The terminal summary leaves them to the HTML page.
    let text = std::fs::read_to_string(out.join("reports/tmr-0207-b3/closeout.txt")).unwrap();
    assert!(!text.contains("Assumptions"));
    let png = d.join("b3.png");
    if screenshot(&page, &png, (1280, 2400)) {
        let (ink, _) = png_ink(&png);
        assert!(ink > 0.01, "the page rendered blank ({ink})");
    }
}

#[test]
fn negative_zero_detection_is_itself_right() {
    assert!(has_negative_zero("Δ -0.0000 nT"));
    assert!(!has_negative_zero("-0.0001 nT, x-0, 1e-0"));
}

#[test]
fn a_cage_report_has_captions_of_its_own_and_units_on_every_axis() {
    let d = TestDir::new();
    let out = d
        .magproof()
        .args(["calibrate", "--report", "rep"])
        .arg(crate::util::data("calib_cage.csv"))
        .output()
        .unwrap();
    assert!(
        matches!(out.status.code(), Some(0 | 1)),
        "{}",
        crate::util::stderr(&out)
    );
    let page = d.join("rep/report.html");
    check_page(&page);
    let html = std::fs::read_to_string(&page).unwrap();
    assert!(html.contains("during the cage sweep") && html.contains("the coils applied"));
    assert!(!html.contains("tumble should spread") && !html.contains("reference circle"));
}
