//! Wahba's problem and signed permutations (method: `docs/alignment.md`).
//!
//! Wahba's problem: the orthogonal matrix `A` minimising `Σ wₖ |bₖ − A sₖ|²` for pairs
//! of vectors `sₖ` (sensor frame) and `bₖ` (body frame). With the attitude profile
//! matrix `B = Σ wₖ bₖ sₖᵀ = U Σ Vᵀ`, the solution over all orthogonal matrices is
//! `A = U Vᵀ`; over proper rotations it is `U diag(1, 1, det U · det V) Vᵀ` (Markley,
//! "Attitude determination using vector observations and the singular value
//! decomposition", J. Astronaut. Sci. 36(3), 1988). The first may be a reflection: that is
//! how a mirrored (one-axis-reversed) sensor shows.

use nalgebra::{Matrix3, Vector3};

/// Which orthogonal matrices Wahba's problem may answer with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Determinant {
    /// Proper rotations only (`det = +1`): Markley's determinant fix.
    Proper,
    /// Any orthogonal matrix (`det = ±1`): a reflection is allowed.
    Free,
}

/// The orthogonal matrix `A` (sensor → body) minimising `Σ |bₖ − A sₖ|²` for the
/// attitude profile matrix `b = Σ bₖ sₖᵀ`, by the SVD (Markley 1988).
pub fn wahba_svd(b: &Matrix3<f64>, det: Determinant) -> Matrix3<f64> {
    let svd = b.svd(true, true);
    let (u, v_t) = match (svd.u, svd.v_t) {
        (Some(u), Some(v_t)) => (u, v_t),
        // nalgebra always returns both when asked; identity keeps the caller total.
        _ => return Matrix3::identity(),
    };
    let d = match det {
        Determinant::Free => 1.0,
        Determinant::Proper => (u.determinant() * v_t.determinant()).signum(),
    };
    u * Matrix3::from_diagonal(&Vector3::new(1.0, 1.0, d)) * v_t
}

/// The attitude profile matrix `Σ bₖ sₖᵀ` of paired vectors.
pub fn attitude_profile(
    pairs: impl IntoIterator<Item = (Vector3<f64>, Vector3<f64>)>,
) -> Matrix3<f64> {
    pairs
        .into_iter()
        .fold(Matrix3::zeros(), |acc, (b, s)| acc + b * s.transpose())
}

/// Every 3×3 signed permutation matrix (48: 24 proper rotations and 24 reflections).
pub fn signed_permutations() -> Vec<Matrix3<f64>> {
    const PERMS: [[usize; 3]; 6] = [
        [0, 1, 2],
        [0, 2, 1],
        [1, 0, 2],
        [1, 2, 0],
        [2, 0, 1],
        [2, 1, 0],
    ];
    let mut out = Vec::with_capacity(48);
    for p in PERMS {
        for signs in 0..8u8 {
            let mut m = Matrix3::zeros();
            for (row, col) in p.iter().enumerate() {
                m[(row, *col)] = if signs & (1 << row) == 0 { 1.0 } else { -1.0 };
            }
            out.push(m);
        }
    }
    out
}

/// The signed permutation nearest to `a` in the Frobenius norm (largest `trace(Pᵀ a)`).
pub fn nearest_signed_permutation(a: &Matrix3<f64>) -> Matrix3<f64> {
    signed_permutations()
        .into_iter()
        .max_by(|p, q| {
            let tp = (p.transpose() * a).trace();
            let tq = (q.transpose() * a).trace();
            tp.total_cmp(&tq)
        })
        .unwrap_or_else(Matrix3::identity)
}

/// The signed axis a row of a signed permutation names: `"+x"`, `"-z"`.
pub fn signed_axis(row: &[f64; 3]) -> String {
    let (col, v) = row
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))
        .map(|(c, v)| (c, *v))
        .unwrap_or((0, 1.0));
    format!(
        "{}{}",
        if v < 0.0 { '-' } else { '+' },
        ["x", "y", "z"][col]
    )
}

/// The skew matrix `[v]×` with `[v]× w = v × w`.
pub fn skew(v: &Vector3<f64>) -> Matrix3<f64> {
    Matrix3::new(0.0, -v.z, v.y, v.z, 0.0, -v.x, -v.y, v.x, 0.0)
}

/// The rotation matrix of a rotation vector `φ` (axis × angle, rad), right-hand rule
/// (Rodrigues' formula).
pub fn rotation_from_vector(phi: &Vector3<f64>) -> Matrix3<f64> {
    let angle = phi.norm();
    if angle < 1e-12 {
        return Matrix3::identity() + skew(phi);
    }
    let k = skew(&(phi / angle));
    Matrix3::identity() + k * angle.sin() + k * k * (1.0 - angle.cos())
}

/// The rotation vector (rad) of a proper rotation matrix: its axis times its angle,
/// angle in `[0, π]`.
pub fn rotation_vector(r: &Matrix3<f64>) -> Vector3<f64> {
    let c = ((r.trace() - 1.0) / 2.0).clamp(-1.0, 1.0);
    let angle = c.acos();
    let w = Vector3::new(
        r[(2, 1)] - r[(1, 2)],
        r[(0, 2)] - r[(2, 0)],
        r[(1, 0)] - r[(0, 1)],
    );
    if angle < 1e-6 {
        return w / 2.0;
    }
    if std::f64::consts::PI - angle > 1e-6 {
        return w * (angle / (2.0 * angle.sin()));
    }
    // Near π: the axis from the diagonal of (R + I) / 2 = k kᵀ.
    let s = (r + Matrix3::identity()) / 2.0;
    let i = (0..3)
        .max_by(|a, b| s[(*a, *a)].total_cmp(&s[(*b, *b)]))
        .unwrap_or(0);
    let k = s.column(i) / s[(i, i)].max(1e-300).sqrt();
    k * angle
}

#[cfg(test)]
#[path = "wahba_tests.rs"]
mod tests;
