//! Tests of the plan reader: a full example, and each refusal naming its key.

use std::path::{Path, PathBuf};

use nalgebra::Vector3;

use super::*;
use crate::log::error::PlanError;
use crate::log::units::FieldUnit;

fn parse(text: &str) -> Result<Plan, PlanError> {
    parse_plan(text, Path::new("plan.toml"))
}

#[test]
fn full_example_parses() {
    let p = parse(
        r#"
[article]
serial = "QX-7"
build = "B1"
[magnetometer]
sensor_to_body = ["+x", "-z", "+y"]
position_m = [0.02, 0.015, 0.21]
unit = "uT"
[site]
lat_deg = 47.0
lon_deg = 8.0
alt_m = 400.0
date = "2026-11-20"
[[rod]]
name = "x"
axis_body = [2.0, 0.0, 0.0]
position_m = [0.0, 0.04, 0.0]
dipole_per_command_am2 = 0.2
[dipole_test]
probe_position_m = [0.6, 0.0, 0.0]
[[dipole_test.mount]]
label = "upright"
body_to_table = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]
[[step]]
kind = "calibrate"
log = "tumble.csv"
[limits]
residual_dipole_max_am2 = 0.005
"#,
    )
    .unwrap();
    assert_eq!(p.rods[0].axis_body, Vector3::x());
    assert_eq!(p.magnetometer.unwrap().unit, Some(FieldUnit::Microtesla));
    assert_eq!(p.steps[0].log, PathBuf::from("./tumble.csv"));
}

#[test]
fn unknown_key_is_named() {
    let e = parse("[article]\nserial = \"A\"\nbuild = \"B\"\nbuidl = \"C\"\n").unwrap_err();
    let msg = e.to_string();
    assert!(msg.contains("buidl"), "{msg}");
    assert!(msg.contains("line 4"), "{msg}");
}

#[test]
fn reflection_is_refused_with_its_key() {
    let e = parse("[cage]\narticle_to_cage = [\"+x\", \"+y\", \"-z\"]\n").unwrap_err();
    assert!(e.to_string().contains("cage.article_to_cage"), "{e}");
}

#[test]
fn skewed_matrix_is_refused() {
    let e = parse("[cage]\narticle_to_cage = [[1, 0.01, 0], [0, 1, 0], [0, 0, 1]]\n").unwrap_err();
    assert!(e.to_string().contains("orthonormal"), "{e}");
}

#[test]
fn syntax_error_names_line() {
    let e = parse("[article]\nserial = \"A\nbuild = \"B\"\n").unwrap_err();
    assert!(e.to_string().contains("line 2"), "{e}");
}

#[test]
fn people_places_notes_and_part_serials_are_read_and_trimmed() {
    let p = parse(
        "[article]\nserial = \"QX-7\"\nbuild = \"B1\"\noperator = \" A. Rivera \"\n\
         facility = \"Cage hall 2\"\nnotes = \"\"\"Harness v3.\nHeater off.\"\"\"\n\
         [magnetometer]\nserial = \"MAG-0042\"\n[gyro]\nserial = \"GY-7\"\n\
         [[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\n\
         serial = \"ROD-11\"\n",
    )
    .unwrap();
    let a = p.article.unwrap();
    assert_eq!(a.operator.as_deref(), Some("A. Rivera"));
    assert_eq!(a.facility.as_deref(), Some("Cage hall 2"));
    assert_eq!(a.notes.as_deref(), Some("Harness v3.\nHeater off."));
    assert_eq!(p.magnetometer.unwrap().serial.as_deref(), Some("MAG-0042"));
    assert_eq!(p.gyro.unwrap().serial.as_deref(), Some("GY-7"));
    assert_eq!(p.rods[0].serial.as_deref(), Some("ROD-11"));
    // A control character in a serial is refused by its key.
    let e = parse("[magnetometer]\nserial = \"M\\u001b[31m\"\n").unwrap_err();
    assert!(e.to_string().contains("magnetometer.serial"), "{e}");
}
