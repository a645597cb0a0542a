//! Round trips through `sim::dipole`: known truth → log → check → recovered within the
//! stated uncertainty; refusals and warnings.
#![allow(clippy::needless_range_loop)]

use std::path::Path;

use approx::assert_relative_eq;

use super::*;
use crate::check::CheckInput;
use crate::log::plan::parse_plan;
use crate::log::read_sweep_from;
use crate::log::ReadOptions;
use crate::sim::dipole::{
    simulate_static, simulate_turntable, DipoleSim, StaticConfig, TurntableConfig,
};

fn run(sim: &DipoleSim, position: DipolePosition) -> Result<DipoleResult, Error> {
    run_csv(&sim.log_csv, &sim.plan_toml, position)
}

fn run_csv(csv: &str, plan: &str, position: DipolePosition) -> Result<DipoleResult, Error> {
    let plan = parse_plan(plan, Path::new("plan.toml"))?;
    let log = read_sweep_from(
        csv.as_bytes(),
        Path::new("log.csv"),
        &ReadOptions::default(),
        &mut |_| {},
    )?;
    let input = CheckInput::screen(log, Default::default(), None)?;
    let options = DipoleOptions {
        position,
        inclination_deg: Some(97.4),
        ..Default::default()
    };
    run_dipole(&CheckRequest::new(&input, Some(&plan), options))
}

fn assert_within_sigma(r: &DipoleResult, truth: [f64; 3], k: f64) {
    for i in 0..3 {
        let err = (r.moment_body_am2[i] - truth[i]).abs();
        assert!(
            err < k * r.moment_sigma_am2[i],
            "component {i}: fitted {} ± {}, truth {}",
            r.moment_body_am2[i],
            r.moment_sigma_am2[i],
            truth[i]
        );
    }
}

#[test]
fn turntable_with_two_mounts_recovers_the_moment_within_4_sigma() {
    let sim = simulate_turntable(&TurntableConfig::default(), 11).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert_within_sigma(&r, sim.truth.moment_body_am2, 4.0);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
    assert_eq!(r.method, DipoleMethod::Turntable);
    assert_eq!(r.background_segments, 3);
    assert_eq!(r.pass, Some(true));
    // Residual RMS estimates the simulated 0.5 nT noise (plus the background means' noise).
    assert_relative_eq!(r.residual_rms_nt, 0.5, max_relative = 0.15);
    // Uncertainty is stated and small against the truth (|m| ≈ 0.0166 A·m²).
    assert!(r.magnitude_sigma_am2 > 0.0 && r.magnitude_sigma_am2 < 1e-3);
    assert_eq!(r.points.len(), r.samples_used);
}

#[test]
fn single_mount_warns_that_body_z_is_hidden() {
    let mut cfg = TurntableConfig::default();
    cfg.mounts.truncate(1);
    let sim = simulate_turntable(&cfg, 12).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    let hidden: Vec<_> = r
        .warnings
        .iter()
        .filter_map(|w| match w {
            DipoleWarning::HiddenComponent { component, .. } => Some(component.clone()),
            _ => None,
        })
        .collect();
    assert_eq!(hidden, vec!["z".to_string()]);
    assert_eq!(r.hidden_components, hidden);
    assert!(r.warnings.iter().any(|w| w.to_string().contains("body z")));
}

#[test]
fn on_side_mount_alone_hides_body_y() {
    // body_to_table ["+x","-z","+y"]: body y lies along table +z, the table axis.
    let mut cfg = TurntableConfig::default();
    cfg.mounts.remove(0);
    let sim = simulate_turntable(&cfg, 13).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert!(r.warnings.iter().any(
        |w| matches!(w, DipoleWarning::HiddenComponent { component, .. } if component == "y")
    ));
}

#[test]
fn drift_is_removed_by_interpolating_between_background_segments() {
    let mut cfg = TurntableConfig::default();
    // 0.5 nT/s over a ~500 s run: 250 nT of drift against an article field of ~8 nT.
    cfg.article.drift_nt_per_s = nalgebra::Vector3::new(0.5, -0.3, 0.4);
    let sim = simulate_turntable(&cfg, 14).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert_within_sigma(&r, sim.truth.moment_body_am2, 4.0);

    // The same log with only the first background segment: drift cannot be seen and
    // the fit is pulled far off (and the result says why).
    let lines: Vec<&str> = sim.log_csv.lines().collect();
    let keep = lines.len() - 30; // drop the final background segment
    let mut trimmed: String = lines[..keep].join("\n");
    trimmed = trimmed
        .lines()
        .enumerate()
        .filter(|(i, l)| {
            // drop the middle background segment too (rows with mount "none" after the first 32 lines)
            *i < 32 || !l.ends_with(",none")
        })
        .map(|(_, l)| l)
        .collect::<Vec<_>>()
        .join("\n");
    let r1 = run_csv(&trimmed, &sim.plan_toml, DipolePosition::AtTableOrigin).unwrap();
    assert_eq!(r1.background_segments, 1);
    assert!(r1
        .warnings
        .contains(&DipoleWarning::SingleBackgroundSegment));
    // Measured in the σ of the drift-corrected fit: the uncorrected one is far off.
    let err = (0..3)
        .map(|i| {
            ((r1.moment_body_am2[i] - sim.truth.moment_body_am2[i]) / r.moment_sigma_am2[i]).abs()
        })
        .fold(0.0, f64::max);
    assert!(
        err > 10.0,
        "uncorrected drift should bias the fit, worst error {err:.1}σ"
    );
    assert!(r1.residual_rms_nt > 5.0 * r.residual_rms_nt);
}

#[test]
fn log_without_background_is_refused() {
    let sim = simulate_turntable(&TurntableConfig::default(), 15).unwrap();
    let csv: String = sim
        .log_csv
        .lines()
        .filter(|l| !l.ends_with(",none"))
        .collect::<Vec<_>>()
        .join("\n");
    match run_csv(&csv, &sim.plan_toml, DipolePosition::AtTableOrigin) {
        Err(Error::Degenerate(msg)) => assert!(msg.contains("no background segment"), "{msg}"),
        other => panic!("expected refusal, got {other:?}"),
    }
}

#[test]
fn mount_label_not_in_plan_is_refused_with_its_line() {
    let sim = simulate_turntable(&TurntableConfig::default(), 16).unwrap();
    let csv = sim.log_csv.replacen(",on-side", ",sideways", 1);
    match run_csv(&csv, &sim.plan_toml, DipolePosition::AtTableOrigin) {
        Err(Error::Usage(msg)) => {
            assert!(msg.contains("\"sideways\""), "{msg}");
            assert!(msg.contains("log.csv:"), "{msg}");
        }
        other => panic!("expected refusal, got {other:?}"),
    }
}

#[test]
fn missing_angle_column_is_refused() {
    let sim = simulate_turntable(&TurntableConfig::default(), 17).unwrap();
    let csv = sim.log_csv.replace("angle [deg]", "heading [deg]");
    match run_csv(&csv, &sim.plan_toml, DipolePosition::AtTableOrigin) {
        Err(e) => assert!(e.to_string().contains("\"angle\""), "{e}"),
        Ok(_) => panic!("expected refusal"),
    }
}

#[test]
fn static_map_recovers_the_moment_within_4_sigma() {
    let sim = simulate_static(&StaticConfig::default(), 18).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert_eq!(r.method, DipoleMethod::Static);
    assert_within_sigma(&r, sim.truth.moment_body_am2, 4.0);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);
}

#[test]
fn static_map_with_offset_recovers_position() {
    let mut cfg = StaticConfig::default();
    cfg.article.moment_body_am2 = nalgebra::Vector3::new(0.8, -0.5, 0.6);
    cfg.article.offset_body_m = nalgebra::Vector3::new(0.05, -0.03, 0.04);
    cfg.positions_m = (0..14)
        .map(|k| {
            let th = k as f64 * 0.9;
            let z = -0.5 + k as f64 / 13.0;
            nalgebra::Vector3::new(0.6 * th.cos(), 0.6 * th.sin(), 0.5 * z)
        })
        .collect();
    let sim = simulate_static(&cfg, 19).unwrap();
    let r = run(&sim, DipolePosition::Fitted).unwrap();
    let (o, s) = (r.offset_m.unwrap(), r.offset_sigma_m.unwrap());
    for i in 0..3 {
        assert!(
            (o[i] - sim.truth.offset_body_m[i]).abs() < 4.0 * s[i],
            "{i}: {o:?} ± {s:?}"
        );
    }
    assert_within_sigma(&r, sim.truth.moment_body_am2, 4.0);
}

#[test]
fn turntable_with_offset_fit_recovers_position() {
    let mut cfg = TurntableConfig::default();
    cfg.article.moment_body_am2 = nalgebra::Vector3::new(0.9, -0.4, 0.7);
    cfg.article.offset_body_m = nalgebra::Vector3::new(0.06, 0.02, -0.03);
    cfg.probe_position_m = nalgebra::Vector3::new(0.5, 0.0, 0.1);
    let sim = simulate_turntable(&cfg, 20).unwrap();
    let r = run(&sim, DipolePosition::Fitted).unwrap();
    let (o, s) = (r.offset_m.unwrap(), r.offset_sigma_m.unwrap());
    for i in 0..3 {
        assert!(
            (o[i] - sim.truth.offset_body_m[i]).abs() < 4.0 * s[i],
            "{i}: {o:?} ± {s:?}"
        );
    }
    assert_within_sigma(&r, sim.truth.moment_body_am2, 4.0);
    // Without the offset the point-dipole-at-origin model leaves structure behind.
    let r0 = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert!(r0.residual_rms_nt > 2.0 * r.residual_rms_nt);
}

#[test]
fn moment_over_the_limit_fails_and_rod_fraction_is_reported() {
    let mut cfg = TurntableConfig::default();
    cfg.article.limit_am2 = Some(0.01);
    let sim = simulate_turntable(&cfg, 21).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert_eq!(r.pass, Some(false));
    assert_eq!(r.rods.len(), 1);
    assert_relative_eq!(
        r.rods[0].residual_fraction,
        r.magnitude_am2 / 0.2,
        max_relative = 1e-12
    );
    // τmax = |m|·Bmax with B in tesla.
    assert_relative_eq!(
        r.orbit_torque_max_n_m,
        r.magnitude_am2 * r.orbit_field_max_nt * 1e-9,
        max_relative = 1e-12
    );
}

/// Over many noise draws, the scatter of each fitted component matches the stated 1σ
/// (the residual part plus the background-mean part). With one mount, body z rests on
/// the background level alone, so the background part carries most of its σ.
fn scatter_over_reported_sigma(mounts: usize, seeds: u64) -> [f64; 3] {
    let mut cfg = TurntableConfig::default();
    cfg.mounts.truncate(mounts);
    cfg.article.background_samples = 10;
    let (mut sq, mut sig) = ([0.0; 3], [0.0; 3]);
    for seed in 0..seeds {
        let sim = simulate_turntable(&cfg, 1000 + seed).unwrap();
        let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
        for i in 0..3 {
            sq[i] += (r.moment_body_am2[i] - sim.truth.moment_body_am2[i]).powi(2);
            sig[i] += r.moment_sigma_am2[i];
        }
    }
    let n = seeds as f64;
    [0, 1, 2].map(|i| (sq[i] / n).sqrt() / (sig[i] / n))
}

#[test]
fn stated_sigma_matches_the_scatter_over_noise_draws() {
    for mounts in [1, 2] {
        let ratio = scatter_over_reported_sigma(mounts, 60);
        eprintln!("{mounts} mount(s): scatter / σ = {ratio:?}");
        for r in ratio {
            // 60 draws: the RMS scatter itself is uncertain by about 1/√120 ≈ 9 %.
            assert!((0.7..1.35).contains(&r), "{mounts} mount(s): {ratio:?}");
        }
    }
}

#[test]
fn log_without_mount_column_is_refused() {
    let sim = simulate_turntable(&TurntableConfig::default(), 22).unwrap();
    let csv = sim.log_csv.replace(",mount\n", ",where\n");
    match run_csv(&csv, &sim.plan_toml, DipolePosition::AtTableOrigin) {
        Err(e) => assert!(e.to_string().contains("\"mount\""), "{e}"),
        Ok(_) => panic!("expected refusal"),
    }
}

#[test]
fn turntable_plan_without_probe_position_is_refused_by_key() {
    let sim = simulate_turntable(&TurntableConfig::default(), 23).unwrap();
    let plan = sim
        .plan_toml
        .replace("probe_position_m = [0.6, 0, 0]\n", "");
    assert_ne!(plan, sim.plan_toml);
    match run_csv(&sim.log_csv, &plan, DipolePosition::AtTableOrigin) {
        Err(e) => assert!(
            e.to_string().contains("dipole_test.probe_position_m"),
            "{e}"
        ),
        Ok(_) => panic!("expected refusal"),
    }
}

#[test]
fn default_inclination_is_said() {
    let sim = simulate_turntable(&TurntableConfig::default(), 24).unwrap();
    let plan = parse_plan(&sim.plan_toml, Path::new("plan.toml")).unwrap();
    let log = read_sweep_from(
        sim.log_csv.as_bytes(),
        Path::new("log.csv"),
        &ReadOptions::default(),
        &mut |_| {},
    )
    .unwrap();
    let input = CheckInput::screen(log, Default::default(), None).unwrap();
    let r = run_dipole(&CheckRequest::new(
        &input,
        Some(&plan),
        DipoleOptions::default(),
    ))
    .unwrap();
    assert!((r.inclination_deg - 97.4).abs() < 1e-12);
    assert!(r.warnings.contains(&DipoleWarning::DefaultInclination));
}

#[test]
fn static_map_cancels_room_gradients_with_per_position_background() {
    // 300 nT/m: at 0.7 m from the centre that is ~200 nT against a ~5 nT article field.
    // Positions on one side of the article (opposite pairs would cancel a linear
    // gradient by symmetry: the dipole field is even in r, the gradient's odd).
    let mut cfg = StaticConfig {
        ambient_gradient_nt_per_m: nalgebra::Matrix3::new(
            300.0, 40.0, 0.0, 40.0, -120.0, 25.0, 0.0, 25.0, -180.0,
        ),
        positions_m: (0..8)
            .map(|k| {
                let th = -0.8 + 0.25 * k as f64;
                nalgebra::Vector3::new(0.7 * th.cos(), 0.7 * th.sin(), 0.1 * (k % 3) as f64)
            })
            .collect(),
        ..StaticConfig::default()
    };
    let sim = simulate_static(&cfg, 25).unwrap();
    let r = run(&sim, DipolePosition::AtTableOrigin).unwrap();
    assert_within_sigma(&r, sim.truth.moment_body_am2, 4.0);
    assert!(r.warnings.is_empty(), "{:?}", r.warnings);

    // Background at the first position only: the gradient goes into the moment, and
    // the result says the ambient was assumed uniform.
    cfg.background_at_each_position = false;
    let sim1 = simulate_static(&cfg, 25).unwrap();
    let r1 = run(&sim1, DipolePosition::AtTableOrigin).unwrap();
    assert!(r1
        .warnings
        .iter()
        .any(|w| matches!(w, DipoleWarning::UniformAmbientAssumed { rows } if *rows == 7 * 20)));
    let err = (0..3)
        .map(|i| {
            ((r1.moment_body_am2[i] - sim1.truth.moment_body_am2[i]) / r.moment_sigma_am2[i]).abs()
        })
        .fold(0.0, f64::max);
    assert!(
        err > 10.0,
        "gradient should bias the uniform-ambient fit: {err:.1}σ"
    );
}
