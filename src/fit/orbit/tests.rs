//! Tests of the orbit fit: recovery of a known calibration, and the analytic Jacobian
//! against finite differences.

use super::*;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal as Gauss};

/// Readings made from the model itself with known truth; the fit must recover it.
#[test]
fn recovers_a_known_calibration_with_a_regressor() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(3);
    let n = 6000;
    let c = Vector3::new(500.0, -300.0, 800.0);
    let w = Matrix3::new(1.02, 0.01, -0.02, 0.01, 0.97, 0.015, -0.02, 0.015, 1.01);
    let k = Vector3::new(-200.0, 150.0, 90.0);
    let winv = w.try_inverse().unwrap();
    let noise = Gauss::new(0.0, 20.0).unwrap();
    let (mut bx, mut by, mut bz, mut r, mut x) = (vec![], vec![], vec![], vec![], vec![]);
    for i in 0..n {
        let mag = 30_000.0 + 15_000.0 * (i as f64 / 900.0).sin();
        let dir = Vector3::new(
            rng.gen::<f64>() - 0.5,
            rng.gen::<f64>() - 0.5,
            rng.gen::<f64>() - 0.5,
        )
        .normalize();
        let xi = (1.5 * (i as f64 / 300.0).sin()).max(0.0);
        let b = winv * (dir * mag) + c + k * xi;
        bx.push(b[0] + noise.sample(&mut rng));
        by.push(b[1] + noise.sample(&mut rng));
        bz.push(b[2] + noise.sample(&mut rng));
        r.push(mag);
        x.push(xi);
    }
    if n > 0 {
        bx[10] += 5000.0; // one gross outlier
    }
    let regs: [&[f64]; 1] = [&x];
    let d = OrbitFitData {
        b_nt: [&bx, &by, &bz],
        reference_nt: &r,
        regressors: &regs,
        excluded: &[],
    };
    let f = fit_orbit(&d, OrbitFitOptions { robust: true }).unwrap();
    assert!(f.converged);
    for a in 0..3 {
        let s = f.covariance[(a, a)].sqrt();
        assert!((f.hard_iron_nt[a] - c[a]).abs() < 4.0 * s, "c{a}");
        let sk = f.covariance[(9 + a, 9 + a)].sqrt();
        assert!((f.regressors[0][a] - k[a]).abs() < 4.0 * sk, "k{a}");
    }
    assert!((f.soft_iron - w).abs().max() < 2e-3);
    assert!(f.samples_rejected >= 1);
    assert!(
        (f.residual_rms_nt - 20.0).abs() < 3.0,
        "{}",
        f.residual_rms_nt
    );
}

#[test]
fn jacobian_matches_finite_differences() {
    let bx = [30_000.0, -12_000.0, 5_000.0];
    let by = [1_000.0, 20_000.0, -25_000.0];
    let bz = [-8_000.0, 9_000.0, 30_000.0];
    let r = [31_000.0, 25_000.0, 39_000.0];
    let x = [0.3, 1.2, 0.0];
    let regs: [&[f64]; 1] = [&x];
    let d = OrbitFitData {
        b_nt: [&bx, &by, &bz],
        reference_nt: &r,
        regressors: &regs,
        excluded: &[],
    };
    let p = vec![
        100.0, -50.0, 20.0, 1.01, 0.98, 1.02, 0.01, -0.02, 0.03, 40.0, -30.0, 10.0,
    ];
    for i in 0..3 {
        let mut wts = [0.0; 3];
        wts[i] = 1.0;
        let ne = normal(&d, &p, &wts, true);
        // jtr = J_i r_i: recover J_i by dividing by r_i.
        let r0 = ne.cost.sqrt() * residual_sign(&d, &p, i);
        for a in 0..p.len() {
            let h = 1e-6 * p[a].abs().max(1.0);
            let mut q = p.clone();
            q[a] += h;
            let (c, w, ks) = unpack(&q, 1);
            let rp = residual_at(&d, i, &c, &w, &ks);
            let fd = (rp - r0) / h;
            let an = ne.jtr[a] / r0;
            assert!(
                (fd - an).abs() < 1e-4 * an.abs().max(1.0),
                "sample {i} param {a}: {fd} vs {an}"
            );
        }
    }
}

fn residual_sign(d: &OrbitFitData, p: &[f64], i: usize) -> f64 {
    let (c, w, ks) = unpack(p, 1);
    residual_at(d, i, &c, &w, &ks).signum()
}
