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
use rayon::prelude::*;

use super::samples::FieldSamples;

/// Number of latitude bands (equal height in z).
pub const BANDS: usize = 6;
/// Number of longitude sectors.
pub const SECTORS: usize = 8;
// The cells hit are kept as the bits of one u64.
const _: () = assert!(BANDS * SECTORS <= 64);

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

/// Bits of all cells (see [`DirectionSums::from_parts`]).
pub const ALL_CELLS: u64 = (1 << (BANDS * SECTORS)) - 1;

/// Cell index of the unit vector (x, y, z), 0..48: band from z (6 of equal height), then
/// longitude sector (8 of 45°), as described at the top of this module.
#[inline(always)]
pub fn cell_index(x: f64, y: f64, z: f64) -> usize {
    cell(&Vector3::new(x, y, z))
}

/// Cell index of a unit vector (0..48): band from z, sector from the longitude
/// φ = atan2(y, x), sector k covering φ + π in [k·45°, (k+1)·45°).
#[inline(always)]
fn cell(u: &Vector3<f64>) -> usize {
    let z = u.z.clamp(-1.0, 1.0);
    let band = (((z + 1.0) * 0.5 * BANDS as f64) as usize).min(BANDS - 1);
    band * SECTORS + sector(u.x, u.y)
}

/// Longitude sector 0..8 of (x, y) by comparisons alone (no `atan2`; this runs once per
/// sample of a million-sample log): the signs of x and y give the quadrant and |x|
/// against |y| the half of it. Equal to the `atan2` definition except exactly on a
/// sector boundary, where either neighbour is a fair answer.
fn sector(x: f64, y: f64) -> usize {
    let (ax, ay) = (x.abs(), y.abs());
    // Quadrant 0..4 counter-clockwise from φ = −180°; then the upper half of it when
    // the point is on the far side of the diagonal |x| = |y|. Written with comparisons
    // turned into integers so that random directions cost no mispredicted branch.
    let quadrant = if y < 0.0 {
        usize::from(x >= 0.0)
    } else {
        2 + usize::from(x <= 0.0)
    };
    let upper = if quadrant % 2 == 0 {
        ay >= ax
    } else {
        ay <= ax
    };
    2 * quadrant + usize::from(upper)
}

/// Running sums of [`direction_spread`]; two of them merge by adding.
#[derive(Clone, Copy)]
struct SpreadSums {
    /// Bit `c` set when cell `c` (0..48) holds a direction.
    hit: u64,
    /// Σ u uᵀ, unique elements: xx yy zz xy xz yz.
    scatter: [f64; 6],
    /// Σ u.
    sum: [f64; 3],
    n: usize,
}

impl SpreadSums {
    fn new() -> Self {
        SpreadSums {
            hit: 0,
            scatter: [0.0; 6],
            sum: [0.0; 3],
            n: 0,
        }
    }

    /// Sums over the directions of `vectors` (zero or non-finite vectors are skipped).
    /// The running sums are plain locals inside the loop, so they stay in registers
    /// (this runs once per sample of a million-sample log).
    #[inline]
    fn over(vectors: impl Iterator<Item = Vector3<f64>>) -> Self {
        let mut hit = 0u64;
        let (mut xx, mut yy, mut zz, mut xy, mut xz, mut yz) = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0);
        let (mut sx, mut sy, mut sz) = (0.0, 0.0, 0.0);
        let mut n = 0usize;
        for v in vectors {
            let n2 = v.x * v.x + v.y * v.y + v.z * v.z;
            if !(n2.is_finite() && n2 > 0.0) {
                continue;
            }
            let inv = 1.0 / n2.sqrt();
            let u = Vector3::new(v.x * inv, v.y * inv, v.z * inv);
            hit |= 1u64 << cell(&u);
            xx += u.x * u.x;
            yy += u.y * u.y;
            zz += u.z * u.z;
            xy += u.x * u.y;
            xz += u.x * u.z;
            yz += u.y * u.z;
            sx += u.x;
            sy += u.y;
            sz += u.z;
            n += 1;
        }
        SpreadSums {
            hit,
            scatter: [xx, yy, zz, xy, xz, yz],
            sum: [sx, sy, sz],
            n,
        }
    }

    fn merge(mut self, o: SpreadSums) -> SpreadSums {
        self.hit |= o.hit;
        for (a, b) in self.scatter.iter_mut().zip(o.scatter) {
            *a += b;
        }
        for (a, b) in self.sum.iter_mut().zip(o.sum) {
            *a += b;
        }
        self.n += o.n;
        self
    }

    fn finish(self) -> Option<DirectionSpread> {
        if self.n == 0 {
            return None;
        }
        let n = self.n as f64;
        let s = self.scatter;
        let m = Matrix3::new(s[0], s[3], s[4], s[3], s[1], s[5], s[4], s[5], s[2]) / n;
        let eig = SymmetricEigen::new(m);
        let mut idx = [0usize, 1, 2];
        idx.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
        Some(DirectionSpread {
            coverage: f64::from(self.hit.count_ones()) / (BANDS * SECTORS) as f64,
            scatter_eigenvalues: idx.map(|i| eig.eigenvalues[i]),
            weakest_direction: eig.eigenvectors.column(idx[0]).into_owned(),
            mean_direction_length: (Vector3::from(self.sum) / n).norm(),
        })
    }
}

/// The sums behind a [`DirectionSpread`], gathered by a pass over the samples that has
/// the directions at hand already (the long-log tumble fit's last pass); two merge by
/// adding. Equal to [`direction_spread`] of the same directions up to rounding.
#[derive(Clone, Copy)]
pub struct DirectionSums(SpreadSums);

impl Default for DirectionSums {
    fn default() -> Self {
        DirectionSums(SpreadSums::new())
    }
}

impl DirectionSums {
    /// Sums gathered elsewhere: `hit` has bit `c` set for each cell `c` (see
    /// [`cell_index`]) that holds a direction; `scatter` is Σ u uᵀ as xx yy zz xy xz
    /// yz; `sum` is Σ u; `n` the number of directions.
    pub fn from_parts(hit: u64, scatter: [f64; 6], sum: [f64; 3], n: usize) -> Self {
        DirectionSums(SpreadSums {
            hit,
            scatter,
            sum,
            n,
        })
    }

    /// Both sets of sums together.
    pub fn merge(self, o: DirectionSums) -> DirectionSums {
        DirectionSums(self.0.merge(o.0))
    }

    /// The spread; `None` when no direction was added.
    pub fn finish(self) -> Option<DirectionSpread> {
        self.0.finish()
    }
}

/// Spread of the directions of `vectors` (zero or non-finite vectors are skipped).
/// Returns `None` if no vector has a direction.
pub fn direction_spread<'a>(
    vectors: impl IntoIterator<Item = &'a Vector3<f64>>,
) -> Option<DirectionSpread> {
    SpreadSums::over(vectors.into_iter().copied()).finish()
}

/// [`direction_spread`] of the `vectors[i]` with `keep[i]` true (pairs beyond the
/// shorter slice are ignored), in parallel chunks for long logs. Equal to the serial
/// form up to the order of the sums.
pub fn direction_spread_of_kept(
    vectors: &[Vector3<f64>],
    keep: &[bool],
) -> Option<DirectionSpread> {
    direction_spread_mapped(vectors, keep, |_, v| *v)
}

/// As [`direction_spread_of_kept`] for the vectors `map(i, &inputs[i])`, computed on the
/// fly (nothing stored): e.g. the corrected field of each raw sample.
pub fn direction_spread_mapped<S, F>(inputs: &S, keep: &[bool], map: F) -> Option<DirectionSpread>
where
    S: FieldSamples + ?Sized,
    F: Fn(usize, &Vector3<f64>) -> Vector3<f64> + Sync,
{
    const CHUNK: usize = 16_384;
    let n = inputs.len().min(keep.len());
    let part = |lo: usize, hi: usize| {
        SpreadSums::over((lo..hi).filter(|&i| keep[i]).map(|i| map(i, &inputs.at(i))))
    };
    let sums = if n > 4 * CHUNK {
        (0..n.div_ceil(CHUNK))
            .into_par_iter()
            .map(|ch| part(ch * CHUNK, ((ch + 1) * CHUNK).min(n)))
            .reduce(SpreadSums::new, SpreadSums::merge)
    } else {
        part(0, n)
    };
    sums.finish()
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

    /// The sector by its definition, through `atan2` (the reference for [`sector`]).
    fn sector_by_atan2(x: f64, y: f64) -> usize {
        let phi = y.atan2(x) + std::f64::consts::PI;
        ((phi / std::f64::consts::TAU * SECTORS as f64) as usize).min(SECTORS - 1)
    }

    #[test]
    fn sector_by_comparison_equals_the_atan2_definition() {
        // A fixed-seed grid of directions, plus the axes; boundary rays (|x| = |y| or a
        // zero coordinate) are checked only where atan2 is exact.
        let mut checked = 0;
        for i in 0..20_000 {
            let a = (i as f64) * 0.000_314_159 * 1.000_1 - std::f64::consts::PI;
            let (x, y) = (
                a.cos() * (1.0 + (i % 7) as f64),
                a.sin() * (1.0 + (i % 7) as f64),
            );
            let off_boundary = (x.abs() - y.abs()).abs() > 1e-9 && x.abs() > 1e-9 && y.abs() > 1e-9;
            if off_boundary {
                assert_eq!(sector(x, y), sector_by_atan2(x, y), "({x}, {y})");
                checked += 1;
            }
        }
        assert!(checked > 19_000);
        for (x, y) in [
            (1.0, 0.0),
            (0.0, 1.0),
            (-1.0, 0.5),
            (0.0, -1.0),
            (0.3, -0.1),
        ] {
            assert_eq!(sector(x, y), sector_by_atan2(x, y), "({x}, {y})");
        }
    }

    #[test]
    fn parallel_spread_of_kept_equals_the_serial_form() {
        // Long enough to be split over threads; every third vector dropped.
        let all = spiral(100_000);
        let keep: Vec<bool> = (0..all.len()).map(|i| i % 3 != 0).collect();
        let serial =
            direction_spread(all.iter().zip(&keep).filter(|(_, k)| **k).map(|(v, _)| v)).unwrap();
        let par = direction_spread_of_kept(&all, &keep).unwrap();
        assert_relative_eq!(par.coverage, serial.coverage);
        assert_relative_eq!(
            par.mean_direction_length,
            serial.mean_direction_length,
            epsilon = 1e-12
        );
        for k in 0..3 {
            assert_relative_eq!(
                par.scatter_eigenvalues[k],
                serial.scatter_eigenvalues[k],
                epsilon = 1e-12
            );
        }
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
