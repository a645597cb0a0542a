use nalgebra::{Matrix3, Matrix4, SymmetricEigen, Vector3, Vector4};
use rand::{Rng, SeedableRng};

use super::*;

/// Davenport's q-method, an independent solution of Wahba's problem: the optimal
/// quaternion is the eigenvector of the largest eigenvalue of the symmetric 4×4 matrix
/// `K = [[S − σI, z], [zᵀ, σ]]`, `S = B + Bᵀ`, `σ = tr B`,
/// `z = (B₂₃ − B₃₂, B₃₁ − B₁₃, B₁₂ − B₂₁)`, and the attitude matrix is
/// `A(q) = (q₄² − |q|²) I + 2 q qᵀ − 2 q₄ [q×]` (Markley & Crassidis, *Fundamentals of
/// Spacecraft Attitude Determination and Control*, 2014, §5.4; conventions there).
fn davenport_q_method(b: &Matrix3<f64>) -> Matrix3<f64> {
    let s = b + b.transpose();
    let sigma = b.trace();
    let z = Vector3::new(
        b[(1, 2)] - b[(2, 1)],
        b[(2, 0)] - b[(0, 2)],
        b[(0, 1)] - b[(1, 0)],
    );
    let mut k = Matrix4::zeros();
    k.fixed_view_mut::<3, 3>(0, 0)
        .copy_from(&(s - Matrix3::identity() * sigma));
    k.fixed_view_mut::<3, 1>(0, 3).copy_from(&z);
    k.fixed_view_mut::<1, 3>(3, 0).copy_from(&z.transpose());
    k[(3, 3)] = sigma;
    let eig = SymmetricEigen::new(k);
    let i = eig.eigenvalues.imax();
    let q: Vector4<f64> = eig.eigenvectors.column(i).into();
    let qv = Vector3::new(q[0], q[1], q[2]);
    let q4 = q[3];
    Matrix3::identity() * (q4 * q4 - qv.norm_squared()) + qv * qv.transpose() * 2.0
        - skew(&qv) * (2.0 * q4)
}

fn random_rotation(rng: &mut impl Rng) -> Matrix3<f64> {
    let axis = Vector3::new(
        rng.gen::<f64>() - 0.5,
        rng.gen::<f64>() - 0.5,
        rng.gen::<f64>() - 0.5,
    );
    rotation_from_vector(&(axis.normalize() * rng.gen_range(0.0..3.0)))
}

#[test]
fn svd_solution_matches_davenport_q_method() {
    let mut rng = rand::rngs::StdRng::seed_from_u64(7);
    for _ in 0..20 {
        let a_true = random_rotation(&mut rng);
        let pairs: Vec<(Vector3<f64>, Vector3<f64>)> = (0..6)
            .map(|_| {
                let s = Vector3::new(
                    rng.gen::<f64>() - 0.5,
                    rng.gen::<f64>() - 0.5,
                    rng.gen::<f64>() - 0.5,
                );
                let noise =
                    Vector3::new(rng.gen::<f64>(), rng.gen::<f64>(), rng.gen::<f64>()) * 0.05;
                (a_true * s + noise, s)
            })
            .collect();
        let b = attitude_profile(pairs);
        let svd = wahba_svd(&b, Determinant::Proper);
        let q = davenport_q_method(&b);
        assert!((svd - q).abs().max() < 1e-9, "SVD {svd} vs q-method {q}");
        assert!((svd.determinant() - 1.0).abs() < 1e-12);
    }
}

#[test]
fn the_determinant_fix_decides_between_a_reflection_and_a_rotation() {
    // A sensor with its z axis reversed: b = diag(1, 1, −1) s exactly.
    let mirror = Matrix3::from_diagonal(&Vector3::new(1.0, 1.0, -1.0));
    let ss = [
        Vector3::x(),
        Vector3::y(),
        Vector3::z(),
        Vector3::new(1.0, 2.0, 3.0),
    ];
    let b = attitude_profile(ss.iter().map(|s| (mirror * s, *s)));
    let free = wahba_svd(&b, Determinant::Free);
    assert!((free - mirror).abs().max() < 1e-12, "{free}");
    let proper = wahba_svd(&b, Determinant::Proper);
    assert!((proper.determinant() - 1.0).abs() < 1e-12);
    assert!(
        (proper - mirror).abs().max() > 0.5,
        "no rotation explains a mirror"
    );
}

#[test]
fn a_90_degree_turn_about_z_takes_x_to_y() {
    // Worked example, right-hand rule (common practice in every attitude text, e.g.
    // Wertz, Spacecraft Attitude Determination and Control, 1978): rotating the vector x̂
    // by +90° about ẑ gives ŷ, and ŷ goes to −x̂.
    let r = rotation_from_vector(&Vector3::new(0.0, 0.0, std::f64::consts::FRAC_PI_2));
    assert!((r * Vector3::x() - Vector3::y()).norm() < 1e-12);
    assert!((r * Vector3::y() + Vector3::x()).norm() < 1e-12);
    let phi = rotation_vector(&r);
    assert!((phi - Vector3::new(0.0, 0.0, std::f64::consts::FRAC_PI_2)).norm() < 1e-12);
    // Wahba from the same pairs recovers it.
    let b = attitude_profile([(Vector3::y(), Vector3::x()), (-Vector3::x(), Vector3::y())]);
    assert!((wahba_svd(&b, Determinant::Proper) - r).abs().max() < 1e-12);
}

#[test]
fn rotation_vector_inverts_rodrigues_up_to_pi() {
    for phi in [
        Vector3::new(0.01, -0.02, 0.03),
        Vector3::new(1.0, 2.0, -0.5),
        Vector3::new(0.0, std::f64::consts::PI, 0.0),
    ] {
        let back = rotation_vector(&rotation_from_vector(&phi));
        assert!((back - phi).norm() < 1e-9, "{phi} -> {back}");
    }
}

#[test]
fn there_are_48_signed_permutations_and_the_nearest_is_found() {
    let all = signed_permutations();
    assert_eq!(all.len(), 48);
    assert_eq!(all.iter().filter(|p| p.determinant() > 0.0).count(), 24);
    let swapped = Matrix3::new(0.0, 1.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, -1.0);
    let tilted = rotation_from_vector(&Vector3::new(0.05, 0.0, 0.02)) * swapped;
    assert_eq!(nearest_signed_permutation(&tilted), swapped);
    assert_eq!(signed_axis(&[0.0, 0.0, -1.0]), "-z");
}
