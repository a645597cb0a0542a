//! `magproof calibrate`: JSON keys of `docs/calibration.md`, exit codes, degenerate refusals, and the
//! outside check against scipy / numpy reference fits stored in tests/data/.

use magproof::sim::{
    simulate_cage, simulate_tumble, write_cage_csv, write_tumble_csv, CageConfig, CageGrid,
    SimCoverage, TumbleConfig,
};
use nalgebra::Vector3;
use serde_json::Value;

use crate::util::{data, json_stdout, TestDir};

/// The main `--json` keys listed in `docs/calibration.md` (Output keys).
const MAIN_KEYS: [&str; 11] = [
    "method",
    "hard_iron_nt",
    "soft_iron",
    "reference_nt",
    "residual_rms_nt",
    "samples_used",
    "samples_rejected",
    "hard_iron_sigma_nt",
    "coverage",
    "warnings",
    "pass",
];

fn refs() -> Value {
    let text = std::fs::read_to_string(data("calib_refs.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn tumble_log(dir: &TestDir, name: &str, cfg: &TumbleConfig, seed: u64) -> std::path::PathBuf {
    let sim = simulate_tumble(cfg, seed).unwrap();
    let mut buf = Vec::new();
    write_tumble_csv(&sim, &mut buf).unwrap();
    dir.write(name, String::from_utf8(buf).unwrap())
}

#[test]
fn tumble_json_has_every_main_key_and_matches_scipy_least_squares() {
    let dir = TestDir::new();
    // Reference: scipy.optimize.least_squares (method "lm"); library and version are
    // stored beside the numbers in tests/data/calib_refs.json ("tumble"."library").
    let r = refs();
    let t = &r["tumble"];
    let out = dir
        .magproof()
        .args([
            "calibrate",
            "--json",
            "--robust",
            "none",
            "--reference-nt",
            "49000",
        ])
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let j = json_stdout(&out);
    for k in MAIN_KEYS {
        assert!(j.get(k).is_some(), "key {k} missing");
    }
    assert_eq!(j["method"], "tumble");
    let lib = t["library"].as_str().unwrap();
    let fit = &t["fit"];
    for a in 0..3 {
        let (ours, theirs) = (f(&j["hard_iron_nt"][a]), f(&fit["hard_iron_nt"][a]));
        assert!(
            (ours - theirs).abs() < 0.01,
            "hard iron {a}: {ours} vs {theirs} ({lib})"
        );
        let (s1, s2) = (
            f(&j["hard_iron_sigma_nt"][a]),
            f(&fit["hard_iron_sigma_nt"][a]),
        );
        assert!(
            (s1 / s2 - 1.0).abs() < 1e-3,
            "sigma {a}: {s1} vs {s2} ({lib})"
        );
        for b in 0..3 {
            let (o, t) = (f(&j["soft_iron"][a][b]), f(&fit["soft_iron"][a][b]));
            assert!((o - t).abs() < 1e-7, "W[{a}][{b}]: {o} vs {t} ({lib})");
        }
    }
    let (o, t) = (f(&j["residual_rms_nt"]), f(&fit["residual_rms_nt"]));
    assert!((o - t).abs() < 1e-4, "rms {o} vs {t} ({lib})");
    assert_eq!(j["samples_used"], 600);
}

#[test]
fn robust_tumble_stays_within_one_sigma_of_scipy_on_clean_data() {
    let dir = TestDir::new();
    // Tukey reweighting is a different estimator from scipy's plain least squares
    // (scipy version in tests/data/calib_refs.json); on clean Gaussian data the two
    // differ by about 0.23σ (1/0.95 − 1 efficiency), so 1σ is a wide margin.
    let r = refs();
    let fit = &r["tumble"]["fit"];
    let out = dir
        .magproof()
        .args(["calibrate", "--json", "--reference-nt", "49000"])
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    let j = json_stdout(&out);
    for a in 0..3 {
        let d = (f(&j["hard_iron_nt"][a]) - f(&fit["hard_iron_nt"][a])).abs();
        assert!(d < f(&j["hard_iron_sigma_nt"][a]), "axis {a}: {d} nT");
    }
}

#[test]
fn cage_fit_matches_numpy_lstsq() {
    let dir = TestDir::new();
    // Reference: numpy.linalg.lstsq (version in tests/data/calib_refs.json "cage"."library").
    let r = refs();
    let c = &r["cage"];
    let lib = c["library"].as_str().unwrap();
    let fit = &c["fit"];
    let out = dir
        .magproof()
        .args(["calibrate", "--json"])
        .arg(data("calib_cage.csv"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let j = json_stdout(&out);
    for k in MAIN_KEYS {
        assert!(j.get(k).is_some(), "key {k} missing");
    }
    assert_eq!(j["method"], "cage");
    for a in 0..3 {
        let (o, t) = (f(&j["hard_iron_nt"][a]), f(&fit["hard_iron_nt"][a]));
        assert!((o - t).abs() < 1e-6, "b0[{a}] {o} vs {t} ({lib})");
        let (o, t) = (
            f(&j["hard_iron_sigma_nt"][a]),
            f(&fit["hard_iron_sigma_nt"][a]),
        );
        assert!((o / t - 1.0).abs() < 1e-9, "σ[{a}] {o} vs {t} ({lib})");
        for b in 0..3 {
            let (o, t) = (f(&j["cage"]["response"][a][b]), f(&fit["response"][a][b]));
            assert!((o - t).abs() < 1e-10, "A[{a}][{b}] {o} vs {t} ({lib})");
            let (o, t) = (f(&j["soft_iron"][a][b]), f(&fit["soft_iron_cage"][a][b]));
            assert!((o - t).abs() < 1e-10, "W[{a}][{b}] {o} vs {t} ({lib})");
        }
    }
    let (o, t) = (f(&j["residual_rms_nt"]), f(&fit["residual_rms_nt"]));
    assert!((o - t).abs() < 1e-6, "rms {o} vs {t} ({lib})");
}

#[test]
fn failed_residual_limit_prints_whole_result_and_exits_1() {
    let dir = TestDir::new();
    let plan = dir.write(
        "plan.toml",
        "[limits]\ncalibration_residual_max_nt = 10.0\n",
    );
    let out = dir
        .magproof()
        .args(["calibrate", "--json", "--reference-nt", "49000", "--plan"])
        .arg(&plan)
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let j = json_stdout(&out);
    assert_eq!(j["pass"], false);
    assert!(f(&j["residual_rms_nt"]) > 10.0);

    let plan = dir.write(
        "plan2.toml",
        "[site]\nlat_deg = 47.0\nlon_deg = 8.0\nreference_nt = 49000.0\n\
         [limits]\ncalibration_residual_max_nt = 150.0\n",
    );
    let out = dir
        .magproof()
        .args(["calibrate", "--json", "--plan"])
        .arg(&plan)
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let j = json_stdout(&out);
    assert_eq!(j["pass"], true);
    assert_eq!(j["reference_source"], "plan");
    assert_eq!(f(&j["reference_nt"]), 49000.0);
}

#[test]
fn no_reference_gives_unanchored_scale_with_a_warning() {
    let dir = TestDir::new();
    let out = dir
        .magproof()
        .args(["calibrate", "--json"])
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let j = json_stdout(&out);
    assert!(j["reference_nt"].is_null());
    let w = j["warnings"].to_string();
    assert!(w.contains("unanchored"), "{w}");
    // Judged by its gates alone: without a reference there is no residual gate.
    assert_eq!(j["verdict"], "pass");
    assert_eq!(j["pass"], true);
    let gates: Vec<&str> = j["gates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|g| g["name"].as_str().unwrap())
        .collect();
    assert!(
        gates.contains(&"coverage") && !gates.contains(&"residual"),
        "{gates:?}"
    );
}

#[test]
fn coplanar_tumble_is_refused_with_exit_2_naming_the_axis() {
    let dir = TestDir::new();
    let cfg = TumbleConfig {
        coverage: SimCoverage::Plane,
        soft_iron: nalgebra::Matrix3::identity(),
        ..TumbleConfig::default()
    };
    let log = tumble_log(&dir, "plane.csv", &cfg, 4);
    let out = dir
        .magproof()
        .args(["calibrate", "--json", "--reference-nt", "48000"])
        .arg(&log)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(out.stdout.is_empty());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("coplanar") && err.contains("sensor z"),
        "{err}"
    );
}

#[test]
fn too_few_and_constant_samples_are_refused() {
    let dir = TestDir::new();
    let mut few = String::from("bx,by,bz\n");
    for i in 0..12 {
        few += &format!("{},{},{}\n", 40000.0 + i as f64, 100.0, -5.0);
    }
    let p = dir.write("few.csv", &few);
    let out = dir.magproof().args(["calibrate"]).arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("at least 30 samples"));

    let constant = format!("bx,by,bz\n{}", "41000,-2000,15000\n".repeat(50));
    let p = dir.write("constant.csv", &constant);
    let out = dir.magproof().args(["calibrate"]).arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("constant"));
}

#[test]
fn rank_deficient_cage_grid_is_refused() {
    let dir = TestDir::new();
    let cfg = CageConfig {
        grid: CageGrid::PlaneXy {
            per_axis: 4,
            max_nt: 40_000.0,
        },
        ..CageConfig::default()
    };
    let sim = simulate_cage(&cfg, 2).unwrap();
    let mut buf = Vec::new();
    write_cage_csv(&sim, &mut buf).unwrap();
    let p = dir.write("flat.csv", String::from_utf8(buf).unwrap());
    let out = dir.magproof().args(["calibrate"]).arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("rank-deficient") && err.contains("cage z"),
        "{err}"
    );
}

#[test]
fn params_out_writes_json_and_c_header_and_refuses_other_names() {
    let dir = TestDir::new();
    let js = dir.path().join("magcal.json");
    dir.magproof()
        .args(["calibrate", "--reference-nt", "49000", "--params-out"])
        .arg(&js)
        .arg(data("calib_tumble.csv"))
        .assert()
        .code(0);
    let v: Value = serde_json::from_str(&std::fs::read_to_string(&js).unwrap()).unwrap();
    let cal = &v["magnetometers"][0]["calibration"];
    assert_eq!(cal["soft_iron"].as_array().unwrap().len(), 3);
    // No plan: the mounting is assumed, and the file says so.
    assert_eq!(v["magnetometers"][0]["sensor_to_body_source"], "assumed");
    // The header is written beside the JSON, from the same numbers.
    let h = dir.path().join("magcal.h");
    let text = std::fs::read_to_string(&h).unwrap();
    assert!(text.contains("MAGPROOF_MAG_HARD_IRON_NT[1][3]") && text.contains("nT"));
    assert!(text.contains("MAGPROOF_MAG_SOFT_IRON[1][3][3]"));
    assert!(text.contains("MAGPROOF_MAG_SOFT_IRON_F[1][3][3]"));
    let hx = cal["hard_iron_nt"][0].as_f64().unwrap();
    assert!(text.contains(&format!("{{ {{ {hx:e},")), "{text}");
    // Existing file without --force is refused.
    dir.magproof()
        .args(["calibrate", "--reference-nt", "49000", "--params-out"])
        .arg(&h)
        .arg(data("calib_tumble.csv"))
        .assert()
        .code(2);
    let bad = dir.path().join("magcal.txt");
    let out = dir
        .magproof()
        .args(["calibrate", "--params-out"])
        .arg(&bad)
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains(".json or .h"));
}

#[test]
fn terminal_summary_fits_80_columns_and_names_units() {
    let dir = TestDir::new();
    for log in ["calib_tumble.csv", "calib_cage.csv"] {
        let out = dir
            .magproof()
            .args(["calibrate", "--reference-nt", "49000"])
            .arg(data(log))
            .output()
            .unwrap();
        let text = String::from_utf8(out.stdout).unwrap();
        for line in text.lines() {
            assert!(line.chars().count() <= 80, "too wide: {line}");
        }
        assert!(text.contains("± ") && text.contains(" nT"), "{text}");
    }
}

#[test]
fn outliers_are_rejected_and_counted_and_temperature_slope_reported() {
    let dir = TestDir::new();
    let cfg = TumbleConfig {
        outlier_rate: 0.02,
        temp_range_c: Some((-15.0, 35.0)),
        temp_slope_nt_per_c: Vector3::new(3.0, -1.5, 0.8),
        ..TumbleConfig::default()
    };
    let log = tumble_log(&dir, "t.csv", &cfg, 9);
    let out = dir
        .magproof()
        .args(["calibrate", "--json", "--reference-nt", "48000"])
        .arg(&log)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let j = json_stdout(&out);
    let rejected = j["samples_rejected"].as_u64().unwrap();
    assert!((10..=40).contains(&rejected), "rejected {rejected}");
    let slope = &j["temperature"]["slope_nt_per_c"];
    let sd = &j["temperature"]["slope_sigma_nt_per_c"];
    for a in 0..3 {
        let d = (f(&slope[a]) - cfg.temp_slope_nt_per_c[a]).abs();
        assert!(d < 4.0 * f(&sd[a]), "slope {a}: {}", slope[a]);
        let e = (f(&j["hard_iron_nt"][a]) - cfg.hard_iron_nt[a]).abs();
        assert!(e < 4.0 * f(&j["hard_iron_sigma_nt"][a]), "hard iron {a}");
    }
}

#[test]
fn site_without_date_or_reference_is_refused() {
    // The geomagnetic model needs the date of the test; without it (and without
    // reference_nt) the plan cannot give a reference, and says which key is missing.
    let dir = TestDir::new();
    let plan = dir.write("p.toml", "[site]\nlat_deg = 47.0\nlon_deg = 8.0\n");
    let out = dir
        .magproof()
        .args(["calibrate", "--plan"])
        .arg(&plan)
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("date"));
}

#[test]
fn site_reference_comes_from_the_geomagnetic_model() {
    // The plan's [site] gives the reference magnitude through IGRF-14: it must equal the
    // total field `magproof field` reports for the same site and date (IGRF itself is
    // checked against ppigrf in tests/cli/field.rs and src/physics/igrf_tests.rs).
    let dir = TestDir::new();
    let plan = dir.write(
        "p.toml",
        "[site]\nlat_deg = 47.0\nlon_deg = 8.0\nalt_m = 400.0\ndate = \"2026-11-20\"\n",
    );
    let out = dir
        .magproof()
        .args(["calibrate", "--json", "--plan"])
        .arg(&plan)
        .arg(data("calib_tumble.csv"))
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let cal = json_stdout(&out);
    let field = dir
        .magproof()
        .args(["field", "--lat", "47", "--lon", "8", "--alt-m", "400"])
        .args(["--date", "2026-11-20", "--json"])
        .output()
        .unwrap();
    let total = json_stdout(&field)["total_nt"].as_f64().unwrap();
    let reference = cal["reference_nt"].as_f64().unwrap();
    assert!((reference - total).abs() < 1e-6, "{reference} vs {total}");
    assert_eq!(cal["reference_source"], "model");
}
