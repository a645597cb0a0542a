use nalgebra::{Matrix3, Vector3};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

use super::*;
use crate::fit::wahba::{rotation_from_vector, rotation_vector};

/// Worked example of Poisson's kinematic equation (any rigid-body kinematics text, e.g.
/// Wertz, *Spacecraft Attitude Determination and Control*, 1978, §12; Markley &
/// Crassidis, *Fundamentals of Spacecraft Attitude Determination and Control*, 2014,
/// ch. 3): a body spinning at ω about its z axis sees an inertially constant field
/// `B = (B₀, 0, B_z)` as `B_body(t) = R_z(−ωt) B = (B₀ cos ωt, −B₀ sin ωt, B_z)`.
/// Differentiating by hand: `Ḃ_body = (−ωB₀ sin ωt, −ωB₀ cos ωt, 0)`, and
/// `−ω × B_body = −(0, 0, ω) × (B₀ cos ωt, −B₀ sin ωt, B_z) = (−ωB₀ sin ωt, −ωB₀ cos ωt, 0)`:
/// the same. The check: the hand derivative, a central difference of the rotated field,
/// and the fit's model term `[B]× ω` all agree.
#[test]
fn poisson_worked_example_spin_about_z() {
    let (b0, bz, w) = (30_000.0, -40_000.0, 0.4_f64);
    let b = Vector3::new(b0, 0.0, bz);
    let omega = Vector3::new(0.0, 0.0, w);
    for t in [0.0, 0.7, 2.3, 5.0] {
        let body = |t: f64| rotation_from_vector(&Vector3::new(0.0, 0.0, -w * t)) * b;
        let hand = Vector3::new(-w * b0 * (w * t).sin(), -w * b0 * (w * t).cos(), 0.0);
        let h = 1e-4;
        let numeric = (body(t + h) - body(t - h)) / (2.0 * h);
        let model = skew(&body(t)) * omega;
        let expected_body = Vector3::new(b0 * (w * t).cos(), -b0 * (w * t).sin(), bz);
        assert!((body(t) - expected_body).norm() < 1e-6);
        assert!((numeric - hand).norm() < 1e-3, "{numeric} vs {hand}");
        assert!((model - hand).norm() < 1e-6, "{model} vs {hand}");
    }
}

/// Three spins (about z, x, y in turn) of a constant field, sampled at 20 Hz, the field
/// rate by central differences: the tumble fit recovers the gyro's mapping and a
/// reversed gyro axis as a −1 on the diagonal.
fn tumble(gyro: Matrix3<f64>, bias: Vector3<f64>, noise: f64, seed: u64) -> Vec<TumbleSample> {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let n = Normal::new(0.0, noise).unwrap();
    let field = Vector3::new(30_000.0, 5_000.0, -40_000.0);
    let dt = 0.05;
    let mut out = Vec::new();
    let mut att = Matrix3::identity(); // body → inertial
    for (axis, w) in [(2usize, 0.5), (0, -0.4), (1, 0.6)] {
        // The rate swells and ebbs (a hand never turns evenly): that separates the bias.
        let omega = |k: f64| Vector3::ith(axis, w * (1.0 + 0.6 * (k * dt * 1.3).sin()));
        let mut seg = Vec::new();
        let sub = 20;
        for k in 0..200 {
            seg.push(att.transpose() * field);
            for j in 0..sub {
                let tk = k as f64 + (j as f64 + 0.5) / sub as f64;
                att *= rotation_from_vector(&(omega(tk) * dt / sub as f64));
            }
        }
        for k in 1..seg.len() - 1 {
            let rate = (seg[k + 1] - seg[k - 1]) / (2.0 * dt);
            let g = gyro.transpose() * omega(k as f64)
                + bias
                + Vector3::from_fn(|_, _| n.sample(&mut rng));
            out.push(TumbleSample {
                field_body_nt: seg[k],
                field_rate_body_nt_s: rate,
                gyro_rad_s: g,
            });
        }
    }
    out
}

#[test]
fn the_tumble_fit_recovers_the_mapping_bias_and_a_reversed_axis() {
    let truth = rotation_from_vector(&Vector3::new(0.01, -0.02, 0.015));
    let bias = Vector3::new(0.002, -0.001, 0.003);
    let fit = fit_tumble(&tumble(truth, bias, 1e-3, 1)).unwrap();
    let phi = rotation_vector(&(fit.sensor_to_body * truth.transpose()));
    for i in 0..3 {
        let s = fit.rotation_cov_rad2[(i, i)].sqrt();
        assert!(
            s > 0.0 && phi[i].abs() < 4.0 * s + 1e-4,
            "{i}: {} ± {s}",
            phi[i]
        );
    }
    let body_bias = truth * bias;
    for i in 0..3 {
        assert!(
            (fit.bias_body_rad_s[i] - body_bias[i]).abs() < 4.0 * fit.bias_sigma_rad_s[i] + 1e-4,
            "bias {i}: {} ± {} vs {}",
            fit.bias_body_rad_s[i],
            fit.bias_sigma_rad_s[i],
            body_bias[i]
        );
    }
    let mut flipped = Matrix3::identity();
    flipped[(1, 1)] = -1.0;
    let fit = fit_tumble(&tumble(flipped, Vector3::zeros(), 1e-3, 2)).unwrap();
    assert!((fit.linear[(1, 1)] + 1.0).abs() < 0.02, "{}", fit.linear);
    assert!(fit.sensor_to_body.determinant() < 0.0);
}

#[test]
fn a_spin_about_one_axis_only_is_degenerate_for_the_tumble() {
    let s: Vec<TumbleSample> = tumble(Matrix3::identity(), Vector3::zeros(), 1e-3, 3)
        .into_iter()
        .take(150)
        .collect();
    assert!(matches!(fit_tumble(&s), Err(FitError::Degenerate(_))));
}

#[test]
fn the_rate_mapping_finds_a_small_rotation_and_a_reflection() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(4);
    let n = Normal::new(0.0, 1e-3).unwrap();
    let truth = rotation_from_vector(&Vector3::new(0.01, 0.02, -0.01));
    let pairs = |a: Matrix3<f64>, axes: &[usize], rng: &mut rand::rngs::StdRng| {
        let mut p = Vec::new();
        for &axis in axes {
            for k in 0..100 {
                let w = Vector3::ith(axis, if k % 2 == 0 { 0.17 } else { -0.17 });
                p.push((
                    w,
                    a.transpose() * w + Vector3::from_fn(|_, _| n.sample(rng)),
                ));
            }
        }
        p
    };
    // Two spun axes fix a rotation completely (two non-parallel vector pairs).
    let fit = fit_rate_mapping(&pairs(truth, &[2, 0], &mut rng)).unwrap();
    assert!(fit.unobservable.is_empty());
    let phi = rotation_vector(&(fit.sensor_to_body * truth.transpose()));
    for i in 0..3 {
        let s = fit.rotation_cov_rad2[(i, i)].sqrt();
        assert!(phi[i].abs() < 3.0 * s, "{i}: {} ± {s}", phi[i]);
    }
    // A reversed x: with all three axes spun the fit is a reflection (det −1).
    let mut flip = Matrix3::identity();
    flip[(0, 0)] = -1.0;
    let fit = fit_rate_mapping(&pairs(flip, &[0, 1, 2], &mut rng)).unwrap();
    assert_eq!(fit.spun, [true; 3]);
    assert!(fit.sensor_to_body.determinant() < 0.0);
    assert!((fit.sensor_to_body - flip).abs().max() < 1e-3);
    // With y never spun, a reflection through the spun plane fits as well as a rotation,
    // so the fit keeps to proper rotations: x still reads reversed, y's sign is unseen.
    let fit = fit_rate_mapping(&pairs(flip, &[2, 0], &mut rng)).unwrap();
    assert_eq!(fit.spun, [true, false, true]);
    assert!(fit.sensor_to_body.determinant() > 0.0);
    assert!((fit.sensor_to_body[(0, 0)] + 1.0).abs() < 1e-3);
    assert!((fit.sensor_to_body[(2, 2)] - 1.0).abs() < 1e-3);
}

#[test]
fn the_rate_mapping_sigma_is_honest_over_a_monte_carlo() {
    // 150 noisy turntable runs (each body axis spun both ways, unequal rates, a 2 %
    // scale error on y): the spread of the fitted rotation vector against the predicted
    // σ (QUEST-type covariance) must lie within 0.8–1.25 on each axis, as for the
    // magnetometer's fit.
    let truth = rotation_from_vector(&Vector3::new(0.02, -0.01, 0.015));
    let scale = Vector3::new(1.0, 1.02, 1.0);
    let n = Normal::new(0.0, 2e-3).unwrap();
    let mut sum2 = Vector3::zeros();
    let mut pred2 = Vector3::zeros();
    let runs = 150;
    for seed in 0..runs {
        let mut rng = rand::rngs::StdRng::seed_from_u64(100 + seed);
        let mut pairs = Vec::new();
        for (axis, rate) in [(0usize, 0.17), (1, 0.12), (2, 0.2)] {
            for k in 0..60 {
                let w = Vector3::ith(axis, if k % 2 == 0 { rate } else { -rate });
                let g = truth.transpose() * scale.component_mul(&w)
                    + Vector3::from_fn(|_, _| n.sample(&mut rng));
                pairs.push((w, g));
            }
        }
        let fit = fit_rate_mapping(&pairs).unwrap();
        let err = rotation_vector(&(fit.sensor_to_body * truth.transpose()));
        sum2 += err.component_mul(&err);
        pred2 += fit.rotation_cov_rad2.diagonal();
    }
    for i in 0..3 {
        let ratio = (sum2[i] / pred2[i]).sqrt();
        assert!(
            (0.8..=1.25).contains(&ratio),
            "axis {i}: empirical/predicted σ = {ratio}"
        );
    }
}

#[test]
fn the_slope_through_the_origin_matches_the_textbook_form() {
    // y = 2x exactly: slope 2, σ 0 (Σxy / Σx², any regression text).
    let (s, sigma) = slope_through_origin([(1.0, 2.0), (2.0, 4.0), (-3.0, -6.0)]).unwrap();
    assert!((s - 2.0).abs() < 1e-12 && sigma < 1e-12);
    assert!(slope_through_origin([(0.0, 1.0), (0.0, 2.0), (0.0, 3.0)]).is_none());
}
