//! Tests of the long-log route of the tumble fit: the subsample seed, the one-pass
//! Newton iterations and their agreement with the damped reweighting rounds.

use super::*;

/// The Tukey M-estimate's fixed point (Beaton & Tukey 1974; Huber 1981): weights and σ̂
/// from the residuals at p, weighted gradient zero. Reached here by the damped
/// reweighting rounds run to a weight tolerance of 1e-10 instead of 2e-3.
fn tight_fixed_point(
    samples: &[Vector3<f64>],
    tdev: Option<&[f64]>,
    r: f64,
    p0: DVector<f64>,
) -> (DVector<f64>, f64) {
    let mut st = Irls {
        iterations: 0,
        solver_problems: Vec::new(),
        rounds: 0,
        converged: false,
        sigma: 0.0,
        weight_tol: 1e-10,
    };
    let opts = TumbleOptions {
        reference_nt: Some(r),
        robust: Robust::Tukey,
        max_iterations: 200,
    };
    let mut w = vec![1.0; samples.len()];
    let (p, _) = irls(samples, tdev, r, p0, &mut w, &opts, &mut st).unwrap();
    (p, st.sigma)
}

#[test]
fn one_pass_newton_settles_on_the_reweighting_fixed_point() {
    for with_temp in [false, true] {
        let cfg = TumbleConfig {
            samples: 20_000,
            outlier_rate: 0.01,
            temp_range_c: with_temp.then_some((-10.0, 35.0)),
            temp_slope_nt_per_c: Vector3::new(2.0, -1.5, 0.8),
            ..TumbleConfig::default()
        };
        let sim = simulate_tumble(&cfg, 5).unwrap();
        let r = cfg.reference_nt;
        let tdev: Option<Vec<f64>> = sim.temp_c.as_ref().map(|t| {
            let m = t.iter().sum::<f64>() / t.len() as f64;
            t.iter().map(|x| x - m).collect()
        });
        let ell = fit_ellipsoid(&sim.samples_nt).unwrap();
        let mut p0 = params(
            ell.centre_nt,
            &(ell.shape_per_nt * r),
            with_temp.then(Vector3::zeros),
        );
        let (p_fixed, sigma_fixed) =
            tight_fixed_point(&sim.samples_nt, tdev.as_deref(), r, p0.clone());
        // Start as the long-log route does: from a fit to every 10th sample.
        let sub: Vec<Vector3<f64>> = sim.samples_nt.iter().step_by(10).copied().collect();
        let sub_t: Option<Vec<f64>> = tdev
            .as_ref()
            .map(|t| t.iter().step_by(10).copied().collect());
        let (p_sub, sigma_sub) = tight_fixed_point(&sub, sub_t.as_deref(), r, p0.clone());
        p0 = p_sub;
        let s = large::newton_passes(&sim.samples_nt, tdev.as_deref(), r, p0, sigma_sub)
            .expect("the passes settle");
        assert!(s.passes <= 4, "{} passes", s.passes);
        // Standard errors of the parameters at the fixed point (the damped route's fit).
        let reference = fit_tumble(
            &sim.samples_nt,
            sim.temp_c.as_deref(),
            &TumbleOptions {
                reference_nt: Some(r),
                robust: Robust::Tukey,
                ..TumbleOptions::default()
            },
        )
        .unwrap();
        for k in 0..p_fixed.len() {
            let sd = reference.covariance[(k, k)].sqrt();
            let off = (s.p[k] - p_fixed[k]).abs() / sd;
            assert!(
                off < 0.03,
                "temp {with_temp} parameter {k}: {off:.4} σ from the fixed point"
            );
        }
        assert_relative_eq!(s.sigma_nt, sigma_fixed, max_relative = 2e-3);
        assert_settled_point_is_consistent(&s, &sim.samples_nt, tdev.as_deref(), r);
    }
}

#[test]
fn a_long_log_takes_the_one_pass_route_and_recovers_truth() {
    let cfg = TumbleConfig {
        samples: SEED_MIN_SAMPLES,
        outlier_rate: 0.01,
        ..TumbleConfig::default()
    };
    let (sim, fit) = simulate_and_fit(&cfg, 23);
    assert!(fit.irls_converged && fit.solver_problems.is_empty());
    // The one-pass route reports its passes as rounds: a handful, not the damped
    // route's several solves.
    assert!(fit.irls_rounds <= 4, "{} rounds", fit.irls_rounds);
    for a in 0..3 {
        let err = (fit.hard_iron_nt[a] - cfg.hard_iron_nt[a]).abs();
        assert!(err < 4.0 * fit.hard_iron_sigma_nt[a], "axis {a}: {err} nT");
    }
    // σ of the hard iron against the Cramér–Rao bound for this geometry (within 10 %).
    let crb = crb_hard_iron(&sim.samples_nt, &cfg);
    for a in 0..3 {
        assert_relative_eq!(fit.hard_iron_sigma_nt[a], crb[a], max_relative = 0.1);
    }
    assert!(fit.samples_rejected >= sim.truth.outliers * 8 / 10);
    assert!(fit.samples_rejected <= sim.truth.outliers + 50);
}

/// The settled point's weights, σ̂ and residuals (nT) belong together, and its kept
/// samples' JᵀJ equals the one the damped route builds for the covariance.
fn assert_settled_point_is_consistent(
    s: &large::Settled,
    samples_nt: &[Vector3<f64>],
    tdev: Option<&[f64]>,
    r: f64,
) {
    // The settled point's weights, σ̂ and residuals belong together.
    for (i, (res, w)) in s
        .residuals_nt
        .iter()
        .zip(&s.weights)
        .enumerate()
        .step_by(97)
    {
        assert_relative_eq!(
            *w,
            tukey_weight(res / (TUKEY_C * s.sigma_nt)),
            epsilon = 1e-15
        );
        let c = Vector3::new(s.p[0], s.p[1], s.p[2]);
        let wm = sym_from_params(&s.p.as_slice()[3..9]);
        let k = if s.p.len() == 12 {
            Vector3::new(s.p[9], s.p[10], s.p[11])
        } else {
            Vector3::zeros()
        };
        let tau = tdev.map_or(0.0, |t| t[i]);
        let expect = (wm * (samples_nt[i] - c - k * tau)).norm() - r;
        assert_relative_eq!(*res, expect, epsilon = 1e-9);
    }
    // The kept samples' JᵀJ equals the one the damped route builds for the covariance.
    let kept: Vec<f64> = s
        .weights
        .iter()
        .map(|&w| if w > 0.0 { 1.0 } else { 0.0 })
        .collect();
    let dense = TumbleProblem {
        samples_nt,
        temp_dev_c: tdev,
        weights: Some(&kept),
        reference_nt: r,
    }
    .normal_equations(&s.p)
    .unwrap();
    assert_relative_eq!(s.jtj_kept, dense.jtj, max_relative = 1e-9);
}

/// The log's field columns read in place give the fit of the same readings as a vector
/// of 3-vectors, on the one-pass route (long log, given reference) and on the damped
/// route (short log, scale from the algebraic fit). Only the order of parallel sums may
/// differ.
#[test]
fn field_columns_give_the_fit_of_the_vectors() {
    use crate::fit::samples::FieldColumns;
    for (samples, reference) in [(SEED_MIN_SAMPLES, true), (2_000, false)] {
        let cfg = TumbleConfig {
            samples,
            outlier_rate: 0.01,
            ..TumbleConfig::default()
        };
        let sim = simulate_tumble(&cfg, 5).unwrap();
        let opts = TumbleOptions {
            reference_nt: reference.then_some(cfg.reference_nt),
            ..TumbleOptions::default()
        };
        let col = |a: usize| -> Vec<f64> { sim.samples_nt.iter().map(|b| b[a]).collect() };
        let (x, y, z) = (col(0), col(1), col(2));
        let columns = FieldColumns::new([&x, &y, &z]).unwrap();
        let by_vectors = fit_tumble(&sim.samples_nt, None, &opts).unwrap();
        let by_columns = fit_tumble(&columns, None, &opts).unwrap();
        assert_eq!(by_columns.irls_rounds, by_vectors.irls_rounds, "{samples}");
        assert_eq!(by_columns.samples_used, by_vectors.samples_used);
        assert_relative_eq!(
            by_columns.hard_iron_nt,
            by_vectors.hard_iron_nt,
            max_relative = 1e-9
        );
        assert_relative_eq!(
            by_columns.soft_iron,
            by_vectors.soft_iron,
            max_relative = 1e-9
        );
        assert_relative_eq!(
            by_columns.covariance,
            by_vectors.covariance,
            max_relative = 1e-6
        );
    }
}

/// The direction spread the one-pass route sums in its last pass equals the one
/// computed afterwards from the fitted correction, with and without a temperature
/// slope; the damped route leaves it to the caller.
#[test]
fn the_last_pass_sums_the_spread_of_the_corrected_directions() {
    use crate::fit::coverage::direction_spread_mapped;
    for temp in [false, true] {
        let cfg = TumbleConfig {
            samples: SEED_MIN_SAMPLES,
            outlier_rate: 0.01,
            coverage: SimCoverage::Hemisphere,
            temp_range_c: temp.then_some((-10.0, 40.0)),
            temp_slope_nt_per_c: Vector3::new(4.0, -2.5, 1.5),
            ..TumbleConfig::default()
        };
        let sim = simulate_tumble(&cfg, 9).unwrap();
        let opts = TumbleOptions {
            reference_nt: Some(cfg.reference_nt),
            ..TumbleOptions::default()
        };
        let fit = fit_tumble(&sim.samples_nt, sim.temp_c.as_deref(), &opts).unwrap();
        let summed = fit.kept_direction_spread.clone().expect("one-pass route");
        let kept: Vec<bool> = fit.weights.iter().map(|&w| w > 0.0).collect();
        let k = fit.temp_slope_nt_per_c.unwrap_or_else(Vector3::zeros);
        let t = sim.temp_c.clone().unwrap_or_default();
        let tmean = t.iter().sum::<f64>() / t.len().max(1) as f64;
        let after = direction_spread_mapped(&sim.samples_nt, &kept, |i, b| {
            let tau = t.get(i).map_or(0.0, |t| t - tmean);
            fit.soft_iron * (b - fit.hard_iron_nt - k * tau)
        })
        .unwrap();
        // Half the sphere: about half the cells, and a mean direction far from zero.
        assert!(
            summed.coverage > 0.4 && summed.coverage < 0.7,
            "{}",
            summed.coverage
        );
        // The same cells hit (coverage is a count of cells over 48).
        assert_relative_eq!(summed.coverage, after.coverage, epsilon = 0.0);
        for a in 0..3 {
            assert_relative_eq!(
                summed.scatter_eigenvalues[a],
                after.scatter_eigenvalues[a],
                epsilon = 1e-12
            );
        }
        assert_relative_eq!(
            summed.mean_direction_length,
            after.mean_direction_length,
            epsilon = 1e-12
        );
        assert_relative_eq!(
            summed.weakest_direction.dot(&after.weakest_direction).abs(),
            1.0,
            epsilon = 1e-9
        );
    }
    // A short log takes the damped route, which does not sum it.
    let (_, fit) = simulate_and_fit(&TumbleConfig::default(), 3);
    assert!(fit.kept_direction_spread.is_none());
}
