//! Reader tests for the forms labs and flight software write (`docs/formats.md`, "Logs
//! as labs and flight software write them"): each form must give exactly the columns of
//! the equivalent plain log, or be refused by name.

// Unit factors are exact powers of ten or exactly representable counts scales, so
// values are compared exactly on purpose.
#![allow(clippy::float_cmp)]

use std::path::Path;

use super::layout::LogLayout;
use super::{read_sweep_from, LogError, ReadOptions, SweepLog};

fn read_with(text: &[u8], layout: LogLayout) -> Result<SweepLog, LogError> {
    let opts = ReadOptions {
        layout,
        ..ReadOptions::default()
    };
    read_sweep_from(text, Path::new("mem.csv"), &opts, &mut |_| {})
}

fn read(text: &str) -> Result<SweepLog, LogError> {
    read_with(text.as_bytes(), LogLayout::default())
}

const PLAIN: &str = "t,bx [uT],by [uT],bz [uT]\n0,1.5,-2,3\n0.1,4,5.25,-6\n";

fn same_columns(a: &SweepLog, b: &SweepLog) {
    assert_eq!(a.t_s, b.t_s);
    assert_eq!(a.b_nt, b.b_nt);
    assert_eq!(a.len(), b.len());
}

#[test]
fn units_in_parentheses_and_suffixes_read_as_brackets() {
    let plain = read(PLAIN).unwrap();
    for header in ["t (s),bx (uT),by (uT),bz (uT)", "t_s,bx_uT,by_uT,bz_uT"] {
        let text = PLAIN.replacen("t,bx [uT],by [uT],bz [uT]", header, 1);
        same_columns(&read(&text).unwrap(), &plain);
    }
}

#[test]
fn flight_software_names_and_raw_counts_read_as_the_plain_log() {
    // 1 count = 0.5 nT on x, 0.25 nT on y, 2 nT on z (exact binary fractions).
    let plain = read("t,bx,by,bz,cmd_x\n0,1.5,-2,3,0.5\n0.1,4,5.25,-6,0\n").unwrap();
    let fsw = "TIME,MAG_X [LSB],MAG_Y [LSB],MAG_Z [LSB],MTQ1_CMD,RSSI\n\
               0,3,-8,1.5,0.5,-70\n0.1,8,21,-3,0,-71\n";
    let layout = LogLayout {
        columns: vec![
            ("t".into(), "TIME".into()),
            ("bx".into(), "MAG_X".into()),
            ("by".into(), "MAG_Y".into()),
            ("bz".into(), "MAG_Z".into()),
            ("cmd_x".into(), "MTQ1_CMD".into()),
        ],
        nt_per_count: Some([0.5, 0.25, 2.0]),
        ..LogLayout::default()
    };
    let log = read_with(fsw.as_bytes(), layout).unwrap();
    same_columns(&log, &plain);
    assert_eq!(log.commands[0].values, plain.commands[0].values);
    assert_eq!(log.commands[0].rod, "x");
    assert_eq!(log.ignored_columns, vec!["RSSI".to_string()]);
    assert!(log
        .columns_used
        .iter()
        .any(|c| c.quantity == "bx" && c.header == "MAG_X [LSB]" && c.scale == 0.5));
}

#[test]
fn counts_without_a_scale_and_a_mapping_to_a_missing_column_are_refused_by_name() {
    let e = read("bx [counts],by [counts],bz [counts]\n1,2,3\n").unwrap_err();
    assert!(e.to_string().contains("nt_per_count"), "{e}");
    assert!(e.to_string().contains("bx [counts]"), "{e}");
    let layout = LogLayout {
        columns: vec![("bx".into(), "MAG_X".into())],
        ..LogLayout::default()
    };
    let e = read_with(b"bx,by,bz\n1,2,3\n", layout).unwrap_err();
    let msg = e.to_string();
    assert!(
        msg.contains("\"MAG_X\"") && msg.contains("no such column"),
        "{msg}"
    );
}

#[test]
fn decimal_commas_with_semicolons_or_tabs_read_as_the_plain_log() {
    let plain = read(PLAIN).unwrap();
    let layout = LogLayout {
        decimal_comma: true,
        ..LogLayout::default()
    };
    let semi = "t;bx [uT];by [uT];bz [uT]\n0;1,5;-2;3\n0,1;4;5,25;-6\n";
    same_columns(&read_with(semi.as_bytes(), layout.clone()).unwrap(), &plain);
    let tab = semi.replace(';', "\t");
    same_columns(&read_with(tab.as_bytes(), layout.clone()).unwrap(), &plain);
    // A decimal comma cannot share the comma delimiter.
    let e = read_with(PLAIN.as_bytes(), layout.clone()).unwrap_err();
    assert!(e.to_string().contains("delimiter"), "{e}");
    // A point in a decimal-comma log is refused with its line.
    let e = read_with(b"bx;by;bz\n1,5;2.5;3\n", layout).unwrap_err();
    assert_eq!(e.line(), Some(2));
    // Without the option, the message says what the cell looks like and what to add.
    let e = read(semi).unwrap_err();
    let msg = e.to_string();
    assert!(
        msg.contains("mem.csv:2") && msg.contains("--decimal-comma"),
        "{msg}"
    );
}

#[test]
fn unix_time_is_kept_as_seconds_after_the_first_row() {
    let log = read("t [unix],bx,by,bz\n1764842400.25,1,2,3\n1764842400.75,1,2,3\n").unwrap();
    assert_eq!(log.t_s.as_deref(), Some(&[0.0, 0.5][..]));
    assert_eq!(log.t0_iso.as_deref(), Some("2025-12-04T10:00:00.25Z"));
}

#[test]
fn held_commands_repeat_the_value_above_and_need_one_first() {
    let layout = LogLayout {
        hold_commands: true,
        ..LogLayout::default()
    };
    let log = read_with(
        b"t,bx,by,bz,cmd_x\n0,1,2,3,0.5\n1,1,2,3,\n2,1,2,3,-1\n3,1,2,3,\n",
        layout.clone(),
    )
    .unwrap();
    assert_eq!(log.commands[0].values, vec![0.5, 0.5, -1.0, -1.0]);
    let e = read_with(b"t,bx,by,bz,cmd_x\n0,1,2,3,\n", layout).unwrap_err();
    assert_eq!(e.line(), Some(2));
    assert!(e.to_string().contains("carry forward"), "{e}");
    // Without hold_commands an empty command is an error, as before.
    assert!(read("t,bx,by,bz,cmd_x\n0,1,2,3,1\n1,1,2,3,\n").is_err());
}

#[test]
fn currents_and_rates_are_read_in_internal_units() {
    let log =
        read("t,bx,by,bz,ix [mA],iy [mA],iz [A],gx,gy,gz [rad/s]\n0,1,2,3,500,-250,2,90,0,1\n")
            .unwrap();
    let i = log.i_a.unwrap();
    assert_eq!((i[0][0], i[1][0], i[2][0]), (0.5, -0.25, 2.0));
    let g = log.gyro_rad_s.unwrap();
    assert!((g[0][0] - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
    assert_eq!(g[2][0], 1.0);
    assert!(log.ignored_columns.is_empty());
    // A current in a unit we cannot use is an error, never an ignored column.
    let e = read("bx,by,bz,ix [V],iy,iz\n1,2,3,1,1,1\n").unwrap_err();
    assert!(e.to_string().contains("ix [V]"), "{e}");
}

fn utf16(text: &str, le: bool, bom: bool) -> Vec<u8> {
    let mut out = Vec::new();
    if bom {
        out.extend(if le { [0xFF, 0xFE] } else { [0xFE, 0xFF] });
    }
    for u in text.encode_utf16() {
        out.extend(if le { u.to_le_bytes() } else { u.to_be_bytes() });
    }
    out
}

#[test]
fn other_text_encodings_are_refused_by_name() {
    for (le, bom, want) in [
        (true, true, "UTF-16 little-endian (with"),
        (true, false, "UTF-16 little-endian (without"),
        (false, true, "UTF-16 big-endian (with"),
        (false, false, "UTF-16 big-endian (without"),
    ] {
        let e = read_with(&utf16(PLAIN, le, bom), LogLayout::default()).unwrap_err();
        assert!(e.to_string().contains(want), "{e}");
        assert_eq!(e.line(), Some(1));
    }
    let latin1 = b"t,bx,by,bz,temp [\xB0C]\n0,1,2,3,20\n";
    let e = read_with(latin1, LogLayout::default()).unwrap_err();
    assert!(e.to_string().contains("Latin-1"), "{e}");
    let e = read_with(b"\x00\x01\x02\x03\n", LogLayout::default()).unwrap_err();
    assert!(e.to_string().contains("binary"), "{e}");
}
