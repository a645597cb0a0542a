//! `orbit` against outside references:
//! - SGP4 positions against the published verification set of Vallado, Crawford, Hujsak &
//!   Kelso (2006), "Revisiting Spacetrack Report #3" (tests/data/sgp4_vallado.json);
//! - positions turned Earth-fixed and IGRF-14 magnitudes along an orbit against the PyPI
//!   packages sgp4 2.27 and ppigrf 2.1.0 (tests/data/orbit_reference.json, made by
//!   tests/data/gen/orbit_reference.py);
//! - the fit against scipy 1.17.1 `least_squares` on a stored log
//!   (tests/data/orbit_fit_log.csv and orbit_fit_reference.json, made by
//!   tests/data/gen/orbit_fit_reference.py).

use magproof::check::orbit::{run_orbit, GroundLookup, OrbitOptions};
use magproof::check::{CheckInput, CheckRequest};
use magproof::log::plan::parse_plan;
use magproof::log::telemetry::read_telemetry;
use magproof::log::FieldUnit;
use magproof::physics::orbit::{coefficients_for, igrf_magnitude_ecef, Orbit};
use serde_json::Value;

fn data(name: &str) -> Value {
    let p = format!("{}/tests/data/{name}", env!("CARGO_MANIFEST_DIR"));
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn v3(v: &Value) -> [f64; 3] {
    let a = v.as_array().unwrap();
    [0, 1, 2].map(|k| a[k].as_f64().unwrap())
}

#[test]
fn sgp4_matches_the_vallado_2006_verification_states() {
    let r = data("sgp4_vallado.json");
    assert!(r["source"]
        .as_str()
        .unwrap()
        .contains("Revisiting Spacetrack Report #3"));
    let mut n = 0;
    for case in r["cases"].as_array().unwrap() {
        let orbit = Orbit::from_tle(
            case["line1"].as_str().unwrap(),
            case["line2"].as_str().unwrap(),
        )
        .unwrap();
        for s in case["states"].as_array().unwrap() {
            let got = orbit.teme_km(s["minutes"].as_f64().unwrap()).unwrap();
            let want = v3(&s["position_km"]);
            for a in 0..3 {
                // The published states to 1 cm (they are printed to 1e-8 km).
                assert!(
                    (got[a] - want[a]).abs() < 1e-5,
                    "{} at {} min: {got:?} against {want:?}",
                    case["name"],
                    s["minutes"]
                );
            }
            n += 1;
        }
    }
    assert!(n >= 9);
}

#[test]
fn earth_fixed_positions_and_igrf_magnitudes_match_sgp4_and_ppigrf() {
    let r = data("orbit_reference.json");
    assert_eq!(r["library"]["ppigrf"], "2.1.0");
    let tle = r["tle"].as_array().unwrap();
    let orbit = Orbit::from_tle(tle[0].as_str().unwrap(), tle[1].as_str().unwrap()).unwrap();
    for s in r["samples"].as_array().unwrap() {
        let t = s["unix_s"].as_f64().unwrap();
        let got = orbit.ecef_km(t).unwrap();
        let want = v3(&s["ecef_km"]);
        for a in 0..3 {
            // Two SGP4 implementations and the same GMST: agreement to a few metres.
            assert!(
                (got[a] - want[a]).abs() < 5e-3,
                "{t}: {got:?} against {want:?}"
            );
        }
        // The magnitude at the reference's own position: the synthesis alone.
        let coeffs = coefficients_for(t).unwrap();
        let f = igrf_magnitude_ecef(&coeffs, want);
        let f_ref = s["igrf_total_nt"].as_f64().unwrap();
        assert!(
            (f - f_ref).abs() < 1.0,
            "{t}: {f} nT against ppigrf {f_ref} nT"
        );
    }
}

#[test]
fn the_fit_matches_scipy_least_squares_on_a_stored_log() {
    let r = data("orbit_fit_reference.json");
    let log = format!(
        "{}/tests/data/orbit_fit_log.csv",
        env!("CARGO_MANIFEST_DIR")
    );
    let tele = read_telemetry(log.as_ref(), FieldUnit::default()).unwrap();
    let input = CheckInput::screen(tele.log, FieldUnit::default(), None).unwrap();
    let plan = parse_plan(
        "[article]\nserial = \"REF\"\nbuild = \"orbit\"\n",
        "p.toml".as_ref(),
    )
    .unwrap();
    let options = OrbitOptions {
        columns: &tele.orbit,
        ground: GroundLookup::NotAsked,
        robust: false,
        grid_s: 0.0,
        keep_samples: false,
    };
    let got = run_orbit(&CheckRequest::new(&input, Some(&plan), options)).unwrap();
    let (c, sc) = (v3(&r["hard_iron_nt"]), v3(&r["hard_iron_sigma_nt"]));
    let (k, sk) = (v3(&r["i_solar_nt_per_a"]), v3(&r["i_solar_sigma"]));
    let reg = &got.regressors[0];
    assert_eq!(reg.name, "i_solar");
    for a in 0..3 {
        // Same data, same model, different IGRF code (ours vs ppigrf, < 1 nT apart): the
        // answers agree to a small fraction of their σ, and so do the σ.
        assert!(
            (got.hard_iron_nt[a] - c[a]).abs() < 0.1 * sc[a],
            "c{a}: {} vs {}",
            got.hard_iron_nt[a],
            c[a]
        );
        assert!((got.hard_iron_sigma_nt[a] / sc[a] - 1.0).abs() < 0.02);
        assert!((reg.bias_nt_per_unit[a] - k[a]).abs() < 0.1 * sk[a], "k{a}");
        assert!((reg.sigma[a] / sk[a] - 1.0).abs() < 0.02);
        let w = r["soft_iron"][a].as_array().unwrap();
        for (b, wb) in w.iter().enumerate() {
            assert!(
                (got.soft_iron[a][b] - wb.as_f64().unwrap()).abs() < 2e-5,
                "W{a}{b}"
            );
        }
    }
    assert!((got.residual_rms_nt - r["residual_rms_nt"].as_f64().unwrap()).abs() < 0.1);
}
