//! `magproof field`: the IGRF-14 reference at a site, JSON keys of `docs/geomagnetic.md`, refusals.

use serde::Deserialize;

use crate::util::{json_stdout, TestDir};

/// The documented `field` keys (docs/geomagnetic.md), read back strictly (a missing key fails the parse).
#[derive(Deserialize)]
struct FieldJson {
    north_nt: f64,
    east_nt: f64,
    down_nt: f64,
    horizontal_nt: f64,
    total_nt: f64,
    declination_deg: f64,
    inclination_deg: f64,
    model: String,
}

#[derive(Deserialize)]
struct Reference {
    library: String,
    sites: Vec<RefSite>,
}

#[derive(Deserialize)]
struct RefSite {
    lat_deg: f64,
    lon_deg: f64,
    alt_m: f64,
    date: String,
    north_nt: f64,
    east_nt: f64,
    down_nt: f64,
}

fn run_json(args: &[&str]) -> FieldJson {
    let t = TestDir::new();
    let out = t
        .magproof()
        .arg("field")
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_value(json_stdout(&out)).unwrap()
}

#[test]
fn json_has_the_design_keys_and_consistent_values() {
    let f = run_json(&[
        "--lat",
        "47",
        "--lon",
        "8",
        "--alt-m",
        "400",
        "--date",
        "2026-11-20",
    ]);
    assert_eq!(f.model, "IGRF-14");
    let h = f.north_nt.hypot(f.east_nt);
    assert!((h - f.horizontal_nt).abs() < 1e-6);
    assert!((h.hypot(f.down_nt) - f.total_nt).abs() < 1e-6);
    assert!((f.east_nt.atan2(f.north_nt).to_degrees() - f.declination_deg).abs() < 1e-9);
    assert!((f.down_nt.atan2(h).to_degrees() - f.inclination_deg).abs() < 1e-9);
    // Central Europe: about 48 µT, dipping ~63° (order-of-magnitude sanity only; the
    // accurate check is the ppigrf comparison below).
    assert!((45_000.0..52_000.0).contains(&f.total_nt));
}

/// The binary agrees with ppigrf (tests/data/igrf_reference.json, ppigrf 2.1.0) within
/// 1 nT per component at southern-hemisphere and date-line sites with negative flags.
#[test]
fn binary_matches_ppigrf_with_negative_coordinates() {
    let text = include_str!("../data/igrf_reference.json");
    let r: Reference = serde_json::from_str(text).unwrap();
    assert!(r.library.starts_with("ppigrf"));
    let picked: Vec<&RefSite> = r
        .sites
        .iter()
        .filter(|s| s.lat_deg < 0.0 || s.lon_deg < 0.0 || s.alt_m < 0.0)
        .collect();
    assert!(picked.len() >= 3);
    for s in picked {
        let (lat, lon, alt) = (
            s.lat_deg.to_string(),
            s.lon_deg.to_string(),
            s.alt_m.to_string(),
        );
        let f = run_json(&[
            "--lat", &lat, "--lon", &lon, "--alt-m", &alt, "--date", &s.date,
        ]);
        assert!(
            (f.north_nt - s.north_nt).abs() < 1.0,
            "{} {lat} {lon}",
            s.date
        );
        assert!(
            (f.east_nt - s.east_nt).abs() < 1.0,
            "{} {lat} {lon}",
            s.date
        );
        assert!(
            (f.down_nt - s.down_nt).abs() < 1.0,
            "{} {lat} {lon}",
            s.date
        );
    }
}

#[test]
fn terminal_output_names_units() {
    let t = TestDir::new();
    let out = t
        .magproof()
        .args([
            "field",
            "--lat",
            "-26",
            "--lon",
            "-45",
            "--date",
            "2019-07-04",
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8_lossy(&out.stdout);
    for word in [
        "IGRF-14",
        "north",
        "east",
        "down",
        "total",
        "nT",
        "declination",
        "deg",
    ] {
        assert!(text.contains(word), "missing {word:?} in\n{text}");
    }
}

fn refused(args: &[&str], reason: &str) {
    let t = TestDir::new();
    let out = t
        .magproof()
        .arg("field")
        .args(args)
        .arg("--json")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{args:?}");
    assert!(out.stdout.is_empty(), "nothing on stdout when refused");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains(reason),
        "{args:?}: expected {reason:?} in {err}"
    );
}

#[test]
fn latitude_beyond_90_exits_2_with_the_reason() {
    refused(
        &["--lat", "90.5", "--lon", "0", "--date", "2020-01-01"],
        "invalid value '90.5' for '--lat <LAT>': expected a finite number from -90 deg to 90 deg",
    );
    refused(
        &["--lat", "-91", "--lon", "0", "--date", "2020-01-01"],
        "invalid value '-91' for '--lat <LAT>'",
    );
}

#[test]
fn date_outside_2015_2030_exits_2_with_the_reason() {
    refused(
        &["--lat", "0", "--lon", "0", "--date", "2014-12-31"],
        "2014-12-31 is outside",
    );
    refused(
        &["--lat", "0", "--lon", "0", "--date", "2030-01-02"],
        "2030-01-02 is outside",
    );
    refused(
        &["--lat", "0", "--lon", "0", "--date", "2020-02-30"],
        "YYYY-MM-DD",
    );
}

#[test]
fn altitude_below_minus_1_km_exits_2_with_the_reason() {
    refused(
        &[
            "--lat",
            "0",
            "--lon",
            "0",
            "--alt-m",
            "-1500",
            "--date",
            "2020-01-01",
        ],
        "invalid value '-1500' for '--alt-m <ALT_M>': expected a finite number from -1000 m to 1e8 m",
    );
}

#[test]
fn missing_latitude_is_a_usage_error() {
    refused(&["--lon", "0", "--date", "2020-01-01"], "--lat");
}
