use nalgebra::{Matrix3, Vector3};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

use super::*;
use crate::fit::wahba::{rotation_from_vector, rotation_vector};

/// Rotation about table +z by `deg`, right-hand rule.
fn rz(deg: f64) -> Matrix3<f64> {
    rotation_from_vector(&Vector3::new(0.0, 0.0, deg.to_radians()))
}

/// Body z up, and body x up.
fn mounts() -> Vec<Matrix3<f64>> {
    vec![
        Matrix3::identity(),
        Matrix3::new(0.0, 0.0, -1.0, 0.0, 1.0, 0.0, 1.0, 0.0, 0.0),
    ]
}

fn samples(
    mounts: &[Matrix3<f64>],
    a: &Matrix3<f64>,
    h: Vector3<f64>,
    noise_nt: f64,
    seed: u64,
) -> Vec<AlignSample> {
    let f = Vector3::new(18_000.0, 2_000.0, -42_000.0);
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let n = Normal::new(0.0, noise_nt.max(1e-300)).unwrap();
    let mut out = Vec::new();
    for m in mounts {
        for k in 0..12 {
            let t = rz(30.0 * k as f64) * m;
            let noise = Vector3::from_fn(|_, _| {
                if noise_nt > 0.0 {
                    n.sample(&mut rng)
                } else {
                    0.0
                }
            });
            out.push(AlignSample {
                body_to_table: t,
                sensor_nt: a.transpose() * t.transpose() * f + h + noise,
            });
        }
    }
    out
}

#[test]
fn exact_data_give_back_the_mapping_field_and_hard_iron() {
    let a = rotation_from_vector(&Vector3::new(0.02, -0.03, 0.04));
    let h = Vector3::new(300.0, -150.0, 80.0);
    let fit = fit_alignment(&samples(&mounts(), &a, h, 0.0, 1), true).unwrap();
    // (A, F) and (−A, −F) fit equally; compare up to that sign.
    let sign = (fit.sensor_to_body.determinant()).signum();
    assert!(
        (fit.sensor_to_body * sign - a).abs().max() < 1e-8,
        "{}",
        fit.sensor_to_body
    );
    assert!((fit.field_table_nt * sign - Vector3::new(18_000.0, 2_000.0, -42_000.0)).norm() < 1e-4);
    assert!((fit.hard_iron_nt.unwrap() - h).norm() < 1e-4);
    assert!(fit.unobservable.is_empty());
}

#[test]
fn a_reversed_axis_is_found_as_a_reflection_not_a_rotation() {
    let mirror = Matrix3::from_diagonal(&Vector3::new(1.0, -1.0, 1.0));
    let a = rotation_from_vector(&Vector3::new(0.01, 0.0, -0.02)) * mirror;
    let fit = fit_alignment(&samples(&mounts(), &a, Vector3::zeros(), 5.0, 2), false).unwrap();
    // The field's sign (down here, F_z < 0) picks the branch of (A, F) ~ (−A, −F).
    let sign = -fit.field_table_nt.z.signum();
    let measured = fit.sensor_to_body * sign;
    assert!(measured.determinant() < 0.0);
    assert!((measured - a).abs().max() < 0.01, "{measured}");
    assert!(fit.residual_rms_nt < 15.0, "{}", fit.residual_rms_nt);
}

#[test]
fn the_rotation_sigma_is_honest_over_a_monte_carlo() {
    // 120 noisy runs: the spread of the fitted rotation vector against the predicted σ
    // (QUEST-type covariance) must lie within 0.8–1.25 on each axis.
    let a = rotation_from_vector(&Vector3::new(0.03, 0.01, -0.02));
    let mut sum2 = Vector3::zeros();
    let mut pred2 = Vector3::zeros();
    let runs = 120;
    for seed in 0..runs {
        let fit = fit_alignment(
            &samples(&mounts(), &a, Vector3::new(100.0, 0.0, 0.0), 20.0, seed),
            true,
        )
        .unwrap();
        let sign = fit.sensor_to_body.determinant().signum();
        let err = rotation_vector(&(fit.sensor_to_body * sign * a.transpose()));
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
fn one_mount_leaves_the_rotation_about_its_vertical_axis_unseen() {
    let a = rotation_from_vector(&Vector3::new(0.02, 0.0, 0.0));
    let one = &mounts()[1..]; // body x up
    for fit_h in [false, true] {
        let fit = fit_alignment(&samples(one, &a, Vector3::zeros(), 2.0, 3), fit_h).unwrap();
        assert_eq!(fit.unobservable.len(), 1, "hard iron fitted: {fit_h}");
        assert!(
            fit.unobservable[0].x.abs() > 0.999,
            "{}",
            fit.unobservable[0]
        );
        // The other two directions keep a finite σ, the null one none.
        assert!(fit.rotation_cov_rad2[(0, 0)].abs() < 1e-20);
        assert!(fit.rotation_cov_rad2[(1, 1)] > 0.0 && fit.rotation_cov_rad2[(2, 2)] > 0.0);
    }
}
