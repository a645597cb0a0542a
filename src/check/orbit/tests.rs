//! Round trips: simulated telemetry with known truth → `run_orbit` → truth recovered
//! within 3σ of the reported uncertainty, on every position route.

use super::*;
use crate::check::CheckInput;
use crate::log::plan::parse_plan;
use crate::log::telemetry::read_telemetry;
use crate::log::FieldUnit;
use crate::sim::orbit::{simulate_orbit, OrbitSimConfig, SimPositions};

fn run(
    positions: SimPositions,
    ground: impl Into<Option<GroundCalibration>>,
) -> (OrbitResult, crate::sim::orbit::OrbitTruth) {
    let cfg = OrbitSimConfig {
        positions,
        ..OrbitSimConfig::default()
    };
    let sim = simulate_orbit(&cfg, 7).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("orbit.csv");
    std::fs::write(&log, &sim.csv).unwrap();
    let plan_text = format!(
        "[article]\nserial = \"SIM-1\"\nbuild = \"orbit\"\n\n{}",
        sim.plan_orbit
    );
    let plan = parse_plan(&plan_text, &dir.path().join("plan.toml")).unwrap();
    let tele = read_telemetry(&log, FieldUnit::default()).unwrap();
    let input = CheckInput::screen(tele.log, FieldUnit::default(), None).unwrap();
    let options = OrbitOptions {
        columns: &tele.orbit,
        ground: ground
            .into()
            .map_or(GroundLookup::NotAsked, GroundLookup::Found),
        robust: true,
        grid_s: DEFAULT_GRID_S,
        keep_samples: true,
    };
    let r = run_orbit(&CheckRequest::new(&input, Some(&plan), options)).unwrap();
    (r, sim.truth)
}

fn within_3_sigma(what: &str, got: f64, truth: f64, sigma: f64) {
    assert!(sigma > 0.0 && sigma.is_finite(), "{what}: σ {sigma}");
    assert!(
        (got - truth).abs() <= 3.0 * sigma,
        "{what}: {got} against truth {truth} (σ {sigma})"
    );
}

fn check_truth(r: &OrbitResult, t: &crate::sim::orbit::OrbitTruth) {
    assert_eq!(r.verdict, Verdict::Pass, "{:?}", r.gates);
    for a in 0..3 {
        within_3_sigma(
            "hard iron",
            r.hard_iron_nt[a],
            t.hard_iron_nt[a],
            r.hard_iron_sigma_nt[a],
        );
        for b in 0..3 {
            within_3_sigma(
                "soft iron",
                r.soft_iron[a][b],
                t.soft_iron[a][b],
                r.soft_iron_sigma[a][b],
            );
        }
        for (name, k) in &t.regressors {
            let got = r.regressors.iter().find(|g| &g.name == name).unwrap();
            within_3_sigma(name, got.bias_nt_per_unit[a], k[a], got.sigma[a]);
        }
        let (s, ss) = (
            r.temperature_slope_nt_per_c.unwrap(),
            r.temperature_slope_sigma_nt_per_c.unwrap(),
        );
        within_3_sigma(
            "temperature slope",
            s[a],
            t.temperature_slope_nt_per_c.unwrap()[a],
            ss[a],
        );
    }
    // The residual is the noise seen through |·| (about σ per axis), not more.
    assert!(
        r.residual_rms_nt < 1.5 * t.noise_nt,
        "{}",
        r.residual_rms_nt
    );
    assert!(r.model_grid_error_nt < 1.0, "{}", r.model_grid_error_nt);
}

#[test]
fn truth_is_recovered_from_the_element_set() {
    let (r, t) = run(SimPositions::Tle, None);
    assert_eq!(r.reference, Route::TleSgp4);
    assert!(r.tle_age_days.unwrap() > 0.0);
    check_truth(&r, &t);
    assert!(r.ground.is_none());
}

#[test]
fn truth_is_recovered_from_logged_earth_fixed_positions() {
    let (r, t) = run(SimPositions::Ecef, None);
    assert_eq!(r.reference, Route::PositionsEcef);
    check_truth(&r, &t);
}

#[test]
fn truth_is_recovered_from_logged_geodetic_positions() {
    let (r, t) = run(SimPositions::Geodetic, None);
    assert_eq!(r.reference, Route::PositionsGeodetic);
    check_truth(&r, &t);
}

#[test]
fn a_planted_300_nt_change_from_ground_is_flagged() {
    let truth = OrbitSimConfig::default().hard_iron_nt;
    let g = |dy: f64| GroundCalibration {
        build: "B3".into(),
        recorded_at: "2026-06-01T10:00:00.000Z".into(),
        hard_iron_nt: [truth[0], truth[1] - dy, truth[2]],
        hard_iron_sigma_nt: [15.0, 15.0, 15.0],
    };
    let (moved, _) = run(SimPositions::Tle, g(300.0));
    let c = moved.ground.as_ref().unwrap();
    assert!(c.flag, "{c:?}");
    assert!((c.hard_iron_delta_nt[1] - 300.0).abs() < 3.0 * c.sigma_nt[1]);
    assert!(moved
        .warnings
        .iter()
        .any(|w| matches!(w, OrbitWarning::GroundShift { .. })));
    // The flag is a warning, not a failed verdict.
    assert_eq!(moved.verdict, Verdict::Pass);
    let (same, _) = run(SimPositions::Tle, g(0.0));
    assert!(!same.ground.unwrap().flag);
}

#[test]
fn a_missing_ground_calibration_is_said_and_a_late_one_is_compared() {
    let (mut r, _) = run(SimPositions::Geodetic, None);
    assert!(r.ground.is_none());
    let none = GroundLookup::Missing(NoGround::NoneRecorded {
        ledger: "l.sqlite".into(),
        serial: "SIM-1".into(),
        sensor: Some("MAG-B".into()),
    });
    r.compare_with_ground(&none);
    assert!(r.ground.is_none());
    let said: Vec<String> = r.warnings.iter().map(|w| w.to_string()).collect();
    assert!(
        said.iter().any(
            |w| w.contains("no calibrate run of serial SIM-1 with magnetometer MAG-B")
                && w.contains("--sensor MAG-B")
        ),
        "{said:?}"
    );
    // A closeout step compares after the fit: the same numbers as a comparison made in it.
    let truth = OrbitSimConfig::default().hard_iron_nt;
    let g = GroundCalibration {
        build: "B3".into(),
        recorded_at: "2026-06-01T10:00:00.000Z".into(),
        hard_iron_nt: truth.into(),
        hard_iron_sigma_nt: [15.0, 15.0, 15.0],
    };
    let (direct, _) = run(SimPositions::Geodetic, g.clone());
    let (mut late, _) = run(SimPositions::Geodetic, None);
    late.compare_with_ground(&GroundLookup::Found(g));
    let (a, b) = (direct.ground.unwrap(), late.ground.unwrap());
    // The same arithmetic on the same numbers: equal to the bit.
    let bits = |v: [f64; 3]| v.map(f64::to_bits);
    assert_eq!(bits(a.hard_iron_delta_nt), bits(b.hard_iron_delta_nt));
    assert_eq!(bits(a.sigma_nt), bits(b.sigma_nt));
}

#[test]
fn the_regressor_fit_plot_puts_the_bias_back_into_the_plotted_residual() {
    // The dots of a regressor's fit plot are the along-orbit residual (the same samples)
    // plus the magnitude the fitted bias accounts for; the simulated solar-array bias
    // (hundreds of nT per ampere) accounts for far more than the noise, so the plot shows
    // a trend, not a cloud.
    let (r, t) = run(SimPositions::Ecef, None);
    let s = &r.samples;
    assert!(!t.regressors.is_empty());
    assert_eq!(s.regressor_partial.len(), t.regressors.len());
    for (q, partial) in s.regressor_partial.iter().enumerate() {
        assert_eq!(partial.len(), s.residual_nt.len());
        for (p, res) in partial.iter().zip(&s.residual_nt) {
            assert!(
                (p.2 - p.1 - res).abs() < 1e-6,
                "regressor {q}: {p:?} vs {res}"
            );
        }
        let n = partial.len() as f64;
        let mean = partial.iter().map(|p| p.1).sum::<f64>() / n;
        let spread = (partial.iter().map(|p| (p.1 - mean).powi(2)).sum::<f64>() / n).sqrt();
        assert!(
            spread > 5.0 * t.noise_nt,
            "regressor {q}: spread {spread} nT"
        );
    }
}
