//! Reliability battery, numbers: every numeric flag of every command and every numeric
//! plan field refuses `inf`, `NaN` and values outside its domain with a message naming
//! the flag (or the plan's file, line and key), before anything runs or is written
//! (docs/reliability.md, "Numeric flags and plan fields"). Common practice: each case
//! drives the binary.

use crate::battery_outputs::{names, sample};
use crate::util::{assert_code, stderr, stdout, TestDir};

/// Each numeric flag, the command line it is tried on (the flag and its value are
/// appended) and the values that must be refused: always `inf`, `-inf`, `NaN`, then
/// values just outside the flag's domain.
const FLAGS: &[(&str, &[&str], &[&str])] = &[
    (
        "--range",
        &["calibrate", "tumble.csv"],
        &["0", "-5", "2e12"],
    ),
    (
        "--reference-nt",
        &["calibrate", "tumble.csv"],
        &["0", "1e13"],
    ),
    ("--range", &["inspect", "tumble.csv"], &["0"]),
    (
        "--range",
        &["polarity", "rod-pulses.csv", "--plan", "plan.toml"],
        &["-1"],
    ),
    (
        "--snr-min",
        &["polarity", "rod-pulses.csv", "--plan", "plan.toml"],
        &["-1", "2e6"],
    ),
    (
        "--max-lag-s",
        &["polarity", "rod-pulses.csv", "--plan", "plan.toml"],
        &["0", "61"],
    ),
    (
        "--drift",
        &["polarity", "rod-pulses.csv", "--plan", "plan.toml"],
        &["knots:0", "knots:-3", "knots:1e300"],
    ),
    (
        "--range",
        &["dipole", "turntable.csv", "--plan", "plan.toml"],
        &["0"],
    ),
    (
        "--altitude-km",
        &["dipole", "turntable.csv", "--plan", "plan.toml"],
        &["0.5", "4.1e5"],
    ),
    (
        "--inclination-deg",
        &["dipole", "turntable.csv", "--plan", "plan.toml"],
        &["-1", "181"],
    ),
    ("--lat", &["field", "--lon", "7"], &["90.5", "-91"]),
    (
        "--grid-s",
        &["orbit", "telemetry.csv", "--plan", "plan.toml"],
        &["-1", "601"],
    ),
    (
        "--range",
        &["orbit", "telemetry.csv", "--plan", "plan.toml"],
        &["0"],
    ),
    ("--lon", &["field", "--lat", "46"], &["361", "-400"]),
    (
        "--alt-m",
        &["field", "--lat", "46", "--lon", "7"],
        &["-1001", "1e300"],
    ),
    ("--significance-sigma", &["history"], &["0", "-3", "101"]),
    (
        "--seed",
        &["simulate", "tumble", "--out", "sim"],
        &["-1", "1.5"],
    ),
    (
        "--noise-nt",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["-1", "2e12"],
    ),
    (
        "--hard-iron-nt",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["1,2", "1,nan,3", "0,0,2e12"],
    ),
    (
        "--soft-iron",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["1,1,inf", "1,1,1,0,0,nan", "1,1,1000"],
    ),
    (
        "--soft-iron-scale",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["0", "1000"],
    ),
    (
        "--outlier-rate",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["-0.1", "1.5"],
    ),
    (
        "--samples",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["0", "1e3", "200000000"],
    ),
    (
        "--reference-nt",
        &["simulate", "tumble", "--seed", "1", "--out", "sim"],
        &["0", "2e12"],
    ),
    (
        "--misalign-deg",
        &["simulate", "align", "--seed", "1", "--out", "sim"],
        &["1,2", "1,nan,3", "0,0,90"],
    ),
    (
        "--gyro-scale",
        &["simulate", "align", "--seed", "1", "--out", "sim"],
        &["1,1", "1,nan,1", "1,1,2", "0.4,1,1"],
    ),
    (
        "--gyro-bias-deg-s",
        &["simulate", "align", "--seed", "1", "--out", "sim"],
        &["0,0", "0,inf,0", "0,0,11"],
    ),
    (
        "--mounts",
        &["simulate", "align", "--seed", "1", "--out", "sim"],
        &["0", "4"],
    ),
    (
        "--lag-s",
        &["simulate", "polarity", "--seed", "1", "--out", "sim"],
        &["-0.1", "61"],
    ),
    (
        "--drift-nt-per-s",
        &["simulate", "polarity", "--seed", "1", "--out", "sim"],
        &["0,0,inf", "0,0,2e6"],
    ),
    (
        "--moment-am2",
        &["simulate", "dipole", "--seed", "1", "--out", "sim"],
        &["0,0,nan", "2e6,0,0"],
    ),
    (
        "--mounts",
        &["simulate", "dipole", "--seed", "1", "--out", "sim"],
        &["0", "3"],
    ),
    (
        "--hysteresis-a",
        &["simulate", "rod", "--seed", "1", "--out", "sim"],
        &["-0.001", "0.06"],
    ),
    (
        "--range",
        &["rod", "rod.csv", "--plan", "plan.toml"],
        &["0"],
    ),
    (
        "--rate-deg-s",
        &["simulate", "loop", "--seed", "1", "--out", "sim"],
        &["0,0,inf", "400,0,0"],
    ),
    (
        "--smooth-s",
        &["loop", "loop.csv", "--plan", "plan.toml"],
        &["0", "-1", "601"],
    ),
    (
        "--range",
        &["loop", "loop.csv", "--plan", "plan.toml"],
        &["0"],
    ),
];

/// Flags that take a value that is not a number (paths, names, choices, dates), per
/// command: with [`FLAGS`] they must cover every flag `--help` lists with a value.
const NOT_NUMBERS: &[&str] = &[
    "--positions",
    "--plan",
    "--calibration",
    "--axis-fault",
    "--gyro-fault",
    "--params-out",
    "--robust",
    "--unit",
    "--report",
    "--ledger",
    "--sensor",
    "--out",
    "--coverage",
    "--reverse",
    "--swap",
    "--method",
    "--date",
    "--serial",
    "--kind",
    "--export",
    "--law",
    "--fault",
];

const COMMANDS: &[&str] = &[
    "calibrate",
    "polarity",
    "dipole",
    "rod",
    "closeout",
    "simulate",
    "field",
    "inspect",
    "history",
    "demo",
    "orbit",
    "loop",
];

#[test]
fn every_numeric_flag_refuses_non_finite_and_out_of_domain_values() {
    let d = TestDir::new();
    sample(&d, "b2");
    let before = names(d.path());
    let mut tried = 0;
    for (flag, base, bad) in FLAGS {
        let values = ["inf", "-inf", "NaN"].iter().chain(bad.iter());
        for value in values {
            let mut args: Vec<&str> = base.to_vec();
            // `--drift` takes `knots:SECONDS`: its non-finite forms are `knots:inf` …
            let v = if *flag == "--drift" && !value.contains(':') {
                format!("knots:{value}")
            } else {
                value.to_string()
            };
            args.extend([flag, v.as_str()]);
            let out = d.run(&args);
            let err = stderr(&out);
            assert_code(&out, 2);
            assert!(stdout(&out).is_empty(), "{args:?}: {}", stdout(&out));
            assert!(err.contains(&format!("for '{flag} <")), "{args:?}: {err}");
            assert!(
                err.contains("expected") || err.contains("invalid") || err.contains("need"),
                "{args:?}: {err}"
            );
            assert!(!err.contains("panicked"), "{args:?}: {err}");
            tried += 1;
        }
    }
    assert!(tried > 100, "{tried} cases");
    // Nothing was written: no ledger, no simulation folder, no report.
    assert_eq!(names(d.path()), before);
}

/// The flags `magproof CMD --help` lists with a value (`--name <VALUE>`).
fn flags_with_values(cmd: &str) -> Vec<String> {
    let d = TestDir::new();
    let help = stdout(&d.run(&[cmd, "--help"]));
    help.lines()
        .filter_map(|l| {
            let l = l.trim_start();
            let l = l.split_once(", ").map_or(l, |(short, rest)| {
                if short.len() == 2 && short.starts_with('-') {
                    rest
                } else {
                    l
                }
            });
            let mut words = l.split_whitespace();
            let flag = words.next()?;
            let value = words.next()?;
            (flag.starts_with("--") && value.starts_with('<')).then(|| flag.to_string())
        })
        .collect()
}

#[test]
fn the_numeric_flag_table_covers_every_flag_of_every_command() {
    let mut seen = 0;
    for cmd in COMMANDS {
        for flag in flags_with_values(cmd) {
            seen += 1;
            let numeric = FLAGS
                .iter()
                .any(|(f, base, _)| *f == flag && base[0] == *cmd);
            assert!(
                numeric || NOT_NUMBERS.contains(&flag.as_str()),
                "`magproof {cmd} {flag}` takes a value that is neither in FLAGS (numbers, \
                 tried with inf/NaN/out of domain) nor in NOT_NUMBERS"
            );
        }
    }
    assert!(
        seen > 40,
        "only {seen} flags found in --help: has its layout changed?"
    );
}

/// A plan with `[article]`, then `body` from line 4.
fn plan_with(body: &str) -> String {
    format!("[article]\nserial = \"S-1\"\nbuild = \"B1\"\n{body}\n")
}

const ROD: &str = "[[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0.1]\n";
const ROT: &str = "[[1, 0, 0], [0, 1, 0], [0, 0, X]]";

/// Every numeric plan field: the text before the bad line, the line (`X` stands for the
/// bad value), the key the error must name, and the out-of-domain values tried besides
/// `nan`, `inf` and `-inf`.
const FIELDS: &[(&str, &str, &str, &[&str])] = &[
    (
        "[magnetometer]",
        "sensor_to_body = ROT",
        "magnetometer.sensor_to_body",
        &["2"],
    ),
    (
        "[magnetometer]",
        "position_m = [0, X, 0]",
        "magnetometer.position_m",
        &["101"],
    ),
    (
        "[magnetometer]",
        "range_nt = X",
        "magnetometer.range_nt",
        &["0", "-1", "2e12"],
    ),
    (
        "[probe]\nposition_m = [0.4, 0, 0]",
        "sensor_to_body = ROT",
        "probe.sensor_to_body",
        &["-1"],
    ),
    (
        "[probe]",
        "position_m = [X, 0, 0]",
        "probe.position_m",
        &["1e300"],
    ),
    (
        "[site]\nlat_deg = 46\nlon_deg = 7",
        "alt_m = X",
        "site.alt_m",
        &["-2000", "1e300"],
    ),
    (
        "[site]\nlon_deg = 7",
        "lat_deg = X",
        "site.lat_deg",
        &["91"],
    ),
    (
        "[site]\nlat_deg = 46",
        "lon_deg = X",
        "site.lon_deg",
        &["400"],
    ),
    (
        "[site]\nlat_deg = 46\nlon_deg = 7",
        "reference_nt = X",
        "site.reference_nt",
        &["0", "1e300"],
    ),
    (
        "[cage]",
        "article_to_cage = ROT",
        "cage.article_to_cage",
        &["0"],
    ),
    (
        "[[rod]]\nname = \"x\"\nposition_m = [0, 0, 0.1]",
        "axis_body = [X, 0, 0]",
        "rod[0].axis_body",
        &["0", "1e300"],
    ),
    (
        "[[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]",
        "position_m = [0, 0, X]",
        "rod[0].position_m",
        &["200"],
    ),
    (
        ROD,
        "dipole_per_command_am2 = X",
        "rod[0].dipole_per_command_am2",
        &["0", "1e300"],
    ),
    (ROD, "length_m = X", "rod[0].length_m", &["-0.1", "1e300"]),
    (ROD, "settle_s = X", "rod[0].settle_s", &["0", "1e300"]),
    (
        "[dipole_test]",
        "probe_position_m = [X, 0, 0]",
        "dipole_test.probe_position_m",
        &["1e300"],
    ),
    (
        "[[dipole_test.mount]]\nlabel = \"up\"",
        "body_to_table = ROT",
        "dipole_test.mount[0].body_to_table",
        &["3"],
    ),
    (
        "[limits]",
        "residual_dipole_max_am2 = X",
        "limits.residual_dipole_max_am2",
        &["0", "1e300"],
    ),
    (
        "[limits]",
        "calibration_residual_max_nt = X",
        "limits.calibration_residual_max_nt",
        &["-1", "1e300"],
    ),
    (
        "[limits]",
        "polarity_angle_max_deg = X",
        "limits.polarity_angle_max_deg",
        &["0", "90"],
    ),
    (
        "[limits]",
        "coverage_min = X",
        "limits.coverage_min",
        &["-0.1", "1.1"],
    ),
    (
        "[limits]",
        "hard_iron_max_nt = X",
        "limits.hard_iron_max_nt",
        &["0", "1e300"],
    ),
    (
        "[limits]",
        "soft_iron_min = X",
        "limits.soft_iron_min",
        &["0", "1e300"],
    ),
    (
        "[limits]",
        "soft_iron_max = X",
        "limits.soft_iron_max",
        &["-2", "1e300"],
    ),
    (
        "[limits]",
        "residual_max_fraction = X",
        "limits.residual_max_fraction",
        &["2"],
    ),
    (
        "[limits]",
        "samples_used_min = X",
        "limits.samples_used_min",
        &["-1"],
    ),
    (
        "[limits]",
        "rods_on_share_max = X",
        "limits.rods_on_share_max",
        &["1.01"],
    ),
    (
        "[limits]",
        "design_condition_max = X",
        "limits.design_condition_max",
        &["0", "1e300"],
    ),
    (
        "[limits]",
        "alignment_max_deg = X",
        "limits.alignment_max_deg",
        &["0", "181"],
    ),
];

#[test]
fn every_numeric_plan_field_refuses_non_finite_and_out_of_domain_values_by_line() {
    let d = TestDir::new();
    sample(&d, "b2");
    for (before, line, key, bad) in FIELDS {
        for value in ["nan", "inf", "-inf"].iter().chain(bad.iter()) {
            let bad_line = line.replace("ROT", ROT).replace('X', value);
            let text = plan_with(&format!("{before}\n{bad_line}"));
            let line_no = text.lines().position(|l| l == bad_line).unwrap() + 1;
            d.write("bad.toml", &text);
            let out = d.run(&["inspect", "tumble.csv", "--plan", "bad.toml"]);
            let err = stderr(&out);
            assert_code(&out, 2);
            assert!(stdout(&out).is_empty(), "{key} = {value}: {}", stdout(&out));
            let place = format!("bad.toml:{line_no}: key \"{key}\"");
            assert!(
                err.contains(&place),
                "{key} = {value}: want {place:?}, got {err}"
            );
            assert!(!err.contains("panicked"), "{err}");
        }
    }
}
