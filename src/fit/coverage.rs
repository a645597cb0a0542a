//! How well a set of field directions covers the sphere, and which axis is poorly seen.
//!
//! Coverage (0..1) is the fraction of 48 equal-area cells of the unit sphere that hold
//! at least one direction. The cells are 6 bands of equal height in z (by Archimedes'
//! hat-box theorem, equal height means equal area) times 8 sectors of 45° in
//! longitude, each 4π/48 ≈ 0.26 sr. Directions spread evenly over the sphere give 1
//! once there are a few hundred samples (with N uniform samples the expected value is
//! 1 − (47/48)^N: 0.47 at N = 30, 0.88 at N = 100, 1.00 at N = 1000); a hemisphere
//! gives at most 0.5 and a single plane about 0.2.
//!
//! The direction scatter matrix M = (1/N) Σ u uᵀ (eigenvalues summing to 1, each 1/3
//! for an even spread) tells which axis is poorly observed: its smallest eigenvalue's
//! eigenvector.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use nalgebra::{Matrix3, SymmetricEigen, Vector3};

/// Number of latitude bands (equal height in z).
pub const BANDS: usize = 6;
/// Number of longitude sectors.
pub const SECTORS: usize = 8;

/// Spread of directions over the sphere.
#[derive(Debug, Clone)]
pub struct DirectionSpread {
    /// Fraction of the 48 equal-area cells hit, 0..1.
    pub coverage: f64,
    /// Eigenvalues of the direction scatter matrix, ascending (sum 1).
    pub scatter_eigenvalues: [f64; 3],
    /// Unit eigenvector of the smallest eigenvalue: the least observed direction.
    pub weakest_direction: Vector3<f64>,
    /// Length of the mean direction (0 for an even spread, 1 if all directions agree).
    pub mean_direction_length: f64,
}

/// Cell index of a unit vector (0..48).
fn cell(u: &Vector3<f64>) -> usize {
    let z = u.z.clamp(-1.0, 1.0);
    let band = (((z + 1.0) * 0.5 * BANDS as f64) as usize).min(BANDS - 1);
    let phi = u.y.atan2(u.x) + std::f64::consts::PI; // 0..2π
    let sector = ((phi / std::f64::consts::TAU * SECTORS as f64) as usize).min(SECTORS - 1);
    band * SECTORS + sector
}

/// Spread of the directions of `vectors` (zero or non-finite vectors are skipped).
/// Returns `None` if no vector has a direction.
pub fn direction_spread<'a>(
    vectors: impl IntoIterator<Item = &'a Vector3<f64>>,
) -> Option<DirectionSpread> {
    let mut hit = [false; BANDS * SECTORS];
    let mut m = Matrix3::zeros();
    let mut mean = Vector3::zeros();
    let mut n = 0usize;
    for v in vectors {
        let norm = v.norm();
        if !(norm.is_finite() && norm > 0.0) {
            continue;
        }
        let u = v / norm;
        hit[cell(&u)] = true;
        m += u * u.transpose();
        mean += u;
        n += 1;
    }
    if n == 0 {
        return None;
    }
    m /= n as f64;
    let eig = SymmetricEigen::new(m);
    let mut idx = [0usize, 1, 2];
    idx.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
    Some(DirectionSpread {
        coverage: hit.iter().filter(|h| **h).count() as f64 / hit.len() as f64,
        scatter_eigenvalues: idx.map(|i| eig.eigenvalues[i]),
        weakest_direction: eig.eigenvectors.column(idx[0]).into_owned(),
        mean_direction_length: (mean / n as f64).norm(),
    })
}

/// Name the axis a direction lies closest to, e.g. `"z"` or `"x/y diagonal"`.
pub fn axis_name(u: &Vector3<f64>) -> String {
    let a = u.abs();
    let names = ["x", "y", "z"];
    let mut order = [0usize, 1, 2];
    order.sort_by(|&i, &j| a[j].total_cmp(&a[i]));
    if a[order[1]] > 0.5 * a[order[0]] {
        format!("{}/{} diagonal", names[order[0]], names[order[1]])
    } else {
        names[order[0]].to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn spiral(n: usize) -> Vec<Vector3<f64>> {
        let golden = std::f64::consts::PI * (3.0 - 5f64.sqrt());
        (0..n)
            .map(|i| {
                let z = 1.0 - 2.0 * (i as f64 + 0.5) / n as f64;
                let r = (1.0 - z * z).sqrt();
                let p = golden * i as f64;
                Vector3::new(r * p.cos(), r * p.sin(), z)
            })
            .collect()
    }

    #[test]
    fn even_spread_covers_everything_and_hemisphere_half() {
        let all = spiral(2000);
        let s = direction_spread(&all).unwrap();
        assert_relative_eq!(s.coverage, 1.0);
        for e in s.scatter_eigenvalues {
            assert_relative_eq!(e, 1.0 / 3.0, epsilon = 1e-2);
        }
        let upper: Vec<_> = all.into_iter().filter(|u| u.z > 0.0).collect();
        let h = direction_spread(&upper).unwrap();
        assert_relative_eq!(h.coverage, 0.5);
    }

    #[test]
    fn a_plane_names_its_normal_as_weakest() {
        let ring: Vec<_> = (0..360)
            .map(|i| {
                let a = (i as f64).to_radians();
                Vector3::new(a.cos(), 0.0, a.sin())
            })
            .collect();
        let s = direction_spread(&ring).unwrap();
        assert!(s.coverage < 0.35, "{}", s.coverage);
        assert_eq!(axis_name(&s.weakest_direction), "y");
        assert!(s.scatter_eigenvalues[0] < 1e-12);
    }
}
