//! Tests of the sweep-log reader as a whole (`sweep.rs`): columns, units and line numbers
//! kept, quoted fields, the default unit, mixed time formats, every row bad, overflow.
// Unit conversion must be exact (powers of ten applied to exactly representable values),
// so these tests compare floats exactly on purpose.
#![allow(clippy::float_cmp)]

use std::path::Path;

use super::error::LogError;
use super::sweep::{read_sweep_from, ReadOptions};
use super::sweep_log::SweepLog;
use super::units::FieldUnit;

fn read(text: &str, opts: &ReadOptions) -> Result<SweepLog, LogError> {
    read_sweep_from(text.as_bytes(), Path::new("mem.csv"), opts, &mut |_| {})
}

#[test]
fn columns_units_and_lines_are_kept() {
    let log = read(
        "# rig 3\nt [ms],bx [uT],by [uT],bz [uT],hx,hy,hz,temp,cmd_X,angle,mount,px [mm],py,pz\n\
         0,1,2,3,10,20,30,21.5,0.5,90,upright,100,0,0\n\
         # comment between rows\n\
         500,4,5,6,10,20,30,21.6,-0.5,180,,200,0,0\n",
        &ReadOptions::default(),
    )
    .unwrap();
    assert_eq!(log.len(), 2);
    assert_eq!(log.lines.to_vec(), vec![3, 5]);
    assert_eq!(log.t_s.as_ref().unwrap()[1], 0.5);
    assert_eq!(log.b_nt.as_ref().unwrap()[2][1], 6000.0);
    assert_eq!(log.h_nt.as_ref().unwrap()[1][0], 20.0);
    assert_eq!(log.commands[0].rod, "x");
    assert_eq!(log.commands[0].header, "cmd_X");
    assert!((log.angle_rad.as_ref().unwrap()[0] - std::f64::consts::FRAC_PI_2).abs() < 1e-15);
    assert_eq!(log.mount.as_ref().unwrap(), &vec![Some(0), None]);
    assert_eq!(log.mount_labels, vec!["upright".to_string()]);
    assert!((log.probe_m.as_ref().unwrap()[0][1] - 0.2).abs() < 1e-15);
}

#[test]
fn quoted_fields_may_hold_the_delimiter() {
    let log = read(
        "bx,by,bz,mount\n1,2,3,\"side, left\"\n",
        &ReadOptions::default(),
    )
    .unwrap();
    assert_eq!(log.mount_labels, vec!["side, left".to_string()]);
}

#[test]
fn default_unit_applies_only_without_a_bracket() {
    let opts = ReadOptions {
        default_unit: FieldUnit::Gauss,
        ..ReadOptions::default()
    };
    let log = read("bx,by [nT],bz\n1,1,1\n", &opts).unwrap();
    let b = log.b_nt.unwrap();
    assert_eq!((b[0][0], b[1][0]), (100_000.0, 1.0));
}

#[test]
fn mixed_time_formats_are_refused() {
    let e = read(
        "t,bx,by,bz\n2026-01-01T00:00:00Z,1,2,3\n5,1,2,3\n",
        &ReadOptions::default(),
    )
    .unwrap_err();
    assert_eq!(e.line(), Some(3));
}

#[test]
fn every_row_bad_is_an_error_even_when_skipping() {
    let opts = ReadOptions {
        skip_bad_rows: true,
        ..ReadOptions::default()
    };
    let e = read("bx,by,bz\nx,1,1\ny,1,1\n", &opts).unwrap_err();
    assert!(e.to_string().contains("all 2 data rows were bad"), "{e}");
}

#[test]
fn overflow_after_conversion_is_refused() {
    let e = read("bx [T],by,bz\n1e300,1,1\n", &ReadOptions::default()).unwrap_err();
    assert!(e.to_string().contains("overflows"), "{e}");
}
