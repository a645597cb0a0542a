//! Tests of the tumble fit: Jacobian against finite differences, recovery of simulated
//! truth, Monte-Carlo honesty of the reported sigma and efficiency against the
//! Cramér–Rao bound.

use super::*;
use crate::fit::lm::LeastSquaresProblem;
use crate::sim::{simulate_tumble, SimCoverage, TumbleConfig};
use approx::assert_relative_eq;
use argmin::core::{Jacobian, Operator};

fn params(c: Vector3<f64>, w: &Matrix3<f64>, k: Option<Vector3<f64>>) -> DVector<f64> {
    let mut v: Vec<f64> = c.iter().copied().collect();
    v.extend(SYM_INDEX.iter().map(|&(i, j)| w[(i, j)]));
    if let Some(k) = k {
        v.extend(k.iter().copied());
    }
    DVector::from_vec(v)
}

#[test]
fn analytic_jacobian_matches_finite_differences() {
    let cfg = TumbleConfig {
        samples: 40,
        temp_range_c: Some((-5.0, 30.0)),
        temp_slope_nt_per_c: Vector3::new(3.0, -2.0, 1.0),
        ..TumbleConfig::default()
    };
    let sim = simulate_tumble(&cfg, 3).unwrap();
    let t = sim.temp_c.as_ref().unwrap();
    let mean = t.iter().sum::<f64>() / t.len() as f64;
    let tdev: Vec<f64> = t.iter().map(|x| x - mean).collect();
    let weights: Vec<f64> = (0..40).map(|i| 0.5 + (i % 3) as f64 * 0.25).collect();
    let prob = TumbleProblem {
        samples_nt: &sim.samples_nt,
        temp_dev_c: Some(&tdev),
        weights: Some(&weights),
        reference_nt: 48_000.0,
    };
    let p = params(
        Vector3::new(1000.0, -700.0, 300.0),
        &Matrix3::new(1.02, 0.01, 0.0, 0.01, 0.99, -0.01, 0.0, -0.01, 1.0),
        Some(Vector3::new(1.0, 1.0, -1.0)),
    );
    let jac = prob.jacobian(&p).unwrap();
    for k in 0..12 {
        let h = if k < 3 {
            1e-2
        } else if k < 9 {
            1e-6
        } else {
            1e-3
        };
        let (mut pp, mut pm) = (p.clone(), p.clone());
        pp[k] += h;
        pm[k] -= h;
        let fd = (prob.apply(&pp).unwrap() - prob.apply(&pm).unwrap()) / (2.0 * h);
        for i in 0..40 {
            assert_relative_eq!(jac[(i, k)], fd[i], epsilon = 1e-5, max_relative = 1e-5);
        }
    }
    // The streamed normal equations agree with the dense Jacobian's.
    let ne = prob.normal_equations(&p).unwrap();
    let r = prob.apply(&p).unwrap();
    assert_relative_eq!(ne.jtj, jac.tr_mul(&jac), max_relative = 1e-10);
    assert_relative_eq!(ne.jtr, jac.tr_mul(&r), max_relative = 1e-10);
}

#[test]
fn recovers_truth_and_rejects_torque_rod_firings() {
    let cfg = TumbleConfig {
        outlier_rate: 0.03,
        ..TumbleConfig::default()
    };
    let (sim, fit) = simulate_and_fit(&cfg, 11);
    for a in 0..3 {
        let err = (fit.hard_iron_nt[a] - cfg.hard_iron_nt[a]).abs();
        assert!(
            err < 3.0 * fit.hard_iron_sigma_nt[a],
            "axis {a}: error {err:.1} nT, σ {:.1}",
            fit.hard_iron_sigma_nt[a]
        );
    }
    assert_relative_eq!(fit.soft_iron, cfg.soft_iron, epsilon = 5e-3);
    // Every injected outlier (3000 nT) is rejected; few good samples are.
    for (i, out) in sim.is_outlier.iter().enumerate() {
        if *out {
            assert!(
                fit.weights[i] <= 0.0 || fit.residuals_nt[i].abs() < 4.685 * fit.robust_sigma_nt
            );
        }
    }
    assert!(fit.samples_rejected >= sim.truth.outliers * 8 / 10);
    assert!(fit.samples_rejected <= sim.truth.outliers + 10);
    assert!(fit.solver_problems.is_empty());
    assert_relative_eq!(fit.residual_rms_nt, 50.0, max_relative = 0.15);
}

#[test]
fn temperature_slope_is_recovered() {
    let cfg = TumbleConfig {
        temp_range_c: Some((-10.0, 40.0)),
        temp_slope_nt_per_c: Vector3::new(4.0, -2.5, 1.5),
        ..TumbleConfig::default()
    };
    let sim = simulate_tumble(&cfg, 5).unwrap();
    let fit = fit_tumble(
        &sim.samples_nt,
        sim.temp_c.as_deref(),
        &TumbleOptions {
            reference_nt: Some(cfg.reference_nt),
            robust: Robust::Tukey,
            ..TumbleOptions::default()
        },
    )
    .unwrap();
    let k = fit.temp_slope_nt_per_c.unwrap();
    let ks = fit.temp_slope_sigma_nt_per_c.unwrap();
    for a in 0..3 {
        assert!(
            (k[a] - cfg.temp_slope_nt_per_c[a]).abs() < 4.0 * ks[a],
            "axis {a}: {k}"
        );
    }
}

#[test]
fn degenerate_data_are_refused_with_the_reason() {
    let few = vec![Vector3::new(1.0, 2.0, 3.0); 10];
    assert!(check_tumble_data(&few)
        .unwrap_err()
        .to_string()
        .contains("at least 30"));
    let constant = vec![Vector3::new(1.0, 2.0, 3.0); 100];
    assert!(check_tumble_data(&constant)
        .unwrap_err()
        .to_string()
        .contains("constant"));
    let cfg = TumbleConfig {
        coverage: SimCoverage::Plane,
        soft_iron: Matrix3::identity(),
        ..TumbleConfig::default()
    };
    let sim = simulate_tumble(&cfg, 2).unwrap();
    let e = fit_tumble(&sim.samples_nt, None, &TumbleOptions::default()).unwrap_err();
    assert!(
        e.to_string().contains("coplanar") && e.to_string().contains("sensor z"),
        "{e}"
    );
    let line: Vec<_> = (0..100)
        .map(|i| Vector3::new(i as f64, 2.0 * i as f64, 0.5))
        .collect();
    assert!(check_tumble_data(&line)
        .unwrap_err()
        .to_string()
        .contains("one line"));
}

/// Cramér–Rao bound on the hard iron for the magnitude model at the truth: the Fisher
/// information is Σ Jᵢᵀ Jᵢ / σᵢ², where Jᵢ is the model Jacobian row and σᵢ = σ |W v̂ᵢ|
/// the standard deviation of the magnitude residual for isotropic vector noise σ.
fn crb_hard_iron(samples: &[Vector3<f64>], cfg: &TumbleConfig) -> Vector3<f64> {
    let prob = TumbleProblem {
        samples_nt: samples,
        temp_dev_c: None,
        weights: None,
        reference_nt: cfg.reference_nt,
    };
    let p = params(cfg.hard_iron_nt, &cfg.soft_iron, None);
    let jac = prob.jacobian(&p).unwrap();
    let mut fisher = DMatrix::zeros(9, 9);
    for (i, b) in samples.iter().enumerate() {
        let v = cfg.soft_iron * (b - cfg.hard_iron_nt);
        let s = cfg.noise_nt * (cfg.soft_iron * v.normalize()).norm();
        let row = jac.row(i);
        fisher += row.transpose() * row / (s * s);
    }
    let cov = fisher.try_inverse().unwrap();
    Vector3::new(cov[(0, 0)].sqrt(), cov[(1, 1)].sqrt(), cov[(2, 2)].sqrt())
}

#[test]
fn monte_carlo_sigma_is_honest_and_efficiency_near_cramer_rao() {
    let cfg = TumbleConfig {
        samples: 1000,
        noise_nt: 50.0,
        ..TumbleConfig::default()
    };
    let runs = 200;
    let (mut sq_err, mut sum_sigma, mut crb_var) =
        (Vector3::zeros(), Vector3::zeros(), Vector3::zeros());
    for seed in 0..runs {
        let (sim, fit) = simulate_and_fit(&cfg, 1000 + seed);
        let e = fit.hard_iron_nt - cfg.hard_iron_nt;
        sq_err += e.component_mul(&e);
        sum_sigma += fit.hard_iron_sigma_nt;
        let crb = crb_hard_iron(&sim.samples_nt, &cfg);
        crb_var += crb.component_mul(&crb);
    }
    let n = runs as f64;
    let rms = (sq_err / n).map(f64::sqrt);
    let mean_sigma = sum_sigma / n;
    let crb = (crb_var / n).map(f64::sqrt);
    let pooled_rms = (sq_err.sum() / (3.0 * n)).sqrt();
    let pooled_sigma = mean_sigma.sum() / 3.0;
    let pooled_crb = (crb_var.sum() / (3.0 * n)).sqrt();
    eprintln!(
        "MC {runs} runs, N=1000, σ=50 nT: RMS error {rms:?} nT, mean σ {mean_sigma:?} nT, \
         CRB {crb:?} nT; pooled RMS/σ = {:.3}, RMS/CRB = {:.3}",
        pooled_rms / pooled_sigma,
        pooled_rms / pooled_crb
    );
    let honesty = pooled_rms / pooled_sigma;
    assert!((0.8..=1.25).contains(&honesty), "RMS/σ = {honesty}");
    let eff = pooled_rms / pooled_crb;
    assert!(eff <= 1.2, "RMS/CRB = {eff}");
    for a in 0..3 {
        assert!((0.7..=1.4).contains(&(rms[a] / mean_sigma[a])), "axis {a}");
    }
}

#[test]
#[ignore = "diagnostic: prints work done on a large log"]
fn work_done_on_a_large_log() {
    let cfg = TumbleConfig {
        samples: 200_000,
        outlier_rate: 0.01,
        ..TumbleConfig::default()
    };
    let sim = simulate_tumble(&cfg, 42).unwrap();
    let t = std::time::Instant::now();
    let fit = fit_tumble(
        &sim.samples_nt,
        None,
        &TumbleOptions {
            reference_nt: Some(cfg.reference_nt),
            robust: Robust::Tukey,
            ..TumbleOptions::default()
        },
    )
    .unwrap();
    eprintln!(
        "rounds {} iterations {} converged {} in {:?}",
        fit.irls_rounds,
        fit.iterations,
        fit.irls_converged,
        t.elapsed()
    );
}

#[test]
fn iteration_limit_is_reported_not_passed_silently() {
    let sim = simulate_tumble(&TumbleConfig::default(), 77).unwrap();
    let fit = fit_tumble(
        &sim.samples_nt,
        None,
        &TumbleOptions {
            reference_nt: Some(48_000.0),
            robust: Robust::Off,
            max_iterations: 1,
        },
    )
    .unwrap();
    assert!(
        fit.solver_problems
            .iter()
            .any(|t| matches!(t, LmTermination::MaxIterations(1))),
        "{:?}",
        fit.solver_problems
    );
}

#[test]
fn noise_free_data_fit_exactly_with_the_robust_default() {
    let cfg = TumbleConfig {
        noise_nt: 0.0,
        ..TumbleConfig::default()
    };
    let (_, fit) = simulate_and_fit(&cfg, 6);
    assert_relative_eq!(fit.hard_iron_nt, cfg.hard_iron_nt, epsilon = 1e-6);
    assert_relative_eq!(fit.soft_iron, cfg.soft_iron, epsilon = 1e-10);
    assert_eq!(fit.samples_rejected, 0);
}

/// Simulate `cfg` with `seed` and fit it with the true reference and the defaults
/// (Tukey reweighting).
fn simulate_and_fit(cfg: &TumbleConfig, seed: u64) -> (crate::sim::tumble::TumbleSim, TumbleFit) {
    let sim = simulate_tumble(cfg, seed).unwrap();
    let fit = fit_tumble(
        &sim.samples_nt,
        None,
        &TumbleOptions {
            reference_nt: Some(cfg.reference_nt),
            ..TumbleOptions::default()
        },
    )
    .unwrap();
    (sim, fit)
}

mod long_log;
