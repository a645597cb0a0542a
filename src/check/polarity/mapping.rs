//! Which magnetometer mapping the rods' responses fit best. Each decidable rod's
//! measured coupling (sensor frame) is compared with its expected direction under every
//! signed permutation of the sensor axes (48, reflections allowed); when another mapping
//! than the plan's explains every response and the plan's does not, the check says so
//! ("the responses fit a magnetometer whose z reads −z").

use nalgebra::{Matrix3, Vector3};

/// A signed permutation that explains the responses better than the plan's mapping.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct BetterMapping {
    /// Sensor axes as they read against the plan's, in words ("z reads −z").
    pub description: String,
    /// Largest angle between a measured and an expected direction under it, deg.
    pub worst_angle_deg: f64,
}

/// Every 3×3 signed permutation matrix (48 of them).
fn signed_permutations() -> Vec<Matrix3<f64>> {
    let perms = [
        [0, 1, 2],
        [0, 2, 1],
        [1, 0, 2],
        [1, 2, 0],
        [2, 0, 1],
        [2, 1, 0],
    ];
    let mut out = Vec::with_capacity(48);
    for p in perms {
        for signs in 0..8u8 {
            let mut m = Matrix3::zeros();
            for (row, &col) in p.iter().enumerate() {
                m[(row, col)] = if signs & (1 << row) != 0 { -1.0 } else { 1.0 };
            }
            out.push(m);
        }
    }
    out
}

fn angle_deg(a: &Vector3<f64>, b: &Vector3<f64>) -> f64 {
    let d = a.norm() * b.norm();
    if d > 0.0 {
        (a.dot(b) / d).clamp(-1.0, 1.0).acos().to_degrees()
    } else {
        f64::NAN
    }
}

/// The mapping that explains `rods` — (measured coupling, expected direction, the
/// largest angle consistent with the model and the measurement, deg) for each decidable
/// rod, sensor frame — when it is not the plan's, every rod lies within its consistent
/// angle under it, and some rod does not under the plan's. Needs two rods or more.
pub(super) fn better_mapping(rods: &[(Vector3<f64>, Vector3<f64>, f64)]) -> Option<BetterMapping> {
    if rods.len() < 2 {
        return None;
    }
    let worst = |p: &Matrix3<f64>| {
        rods.iter()
            .map(|(c, e, limit)| angle_deg(c, &(p * e)) - limit)
            .fold(f64::NEG_INFINITY, f64::max)
    };
    if worst(&Matrix3::identity()) <= 0.0 {
        return None;
    }
    let best = signed_permutations()
        .into_iter()
        .map(|p| (worst(&p), p))
        .filter(|(w, _)| w.is_finite())
        .min_by(|a, b| a.0.total_cmp(&b.0))?;
    if best.0 > 0.0 || best.1 == Matrix3::identity() {
        return None;
    }
    let worst_angle_deg = rods
        .iter()
        .map(|(c, e, _)| angle_deg(c, &(best.1 * e)))
        .fold(0.0, f64::max);
    Some(BetterMapping {
        description: describe(&best.1),
        worst_angle_deg,
    })
}

/// "z reads −z", "x reads +y, y reads +x": each sensor axis that differs from the plan.
fn describe(p: &Matrix3<f64>) -> String {
    const AXES: [&str; 3] = ["x", "y", "z"];
    (0..3)
        .filter_map(|i| {
            let j = (0..3).find(|&j| p[(i, j)] != 0.0)?;
            let sign = if p[(i, j)] < 0.0 { "−" } else { "+" };
            (i != j || p[(i, j)] < 0.0).then(|| format!("{} reads {sign}{}", AXES[i], AXES[j]))
        })
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_flipped_z_axis_is_found_and_named() {
        // Three rods' expected directions (sensor frame); the sensor's z is reversed, so
        // each measured coupling is the expected one with z negated.
        let expected = [
            Vector3::new(1.0, 0.2, 0.35),
            Vector3::new(0.1, 1.0, 0.4),
            Vector3::new(0.3, 0.2, 1.0),
        ];
        let rods: Vec<_> = expected
            .iter()
            .map(|e| (Vector3::new(e.x, e.y, -e.z), *e, 3.5))
            .collect();
        let m = better_mapping(&rods).unwrap();
        assert_eq!(m.description, "z reads −z");
        // acos near 1 resolves angles to about 1e-6° in f64.
        assert!(m.worst_angle_deg < 1e-5, "{}", m.worst_angle_deg);
        // Responses as planned: nothing to say.
        let good: Vec<_> = expected.iter().map(|e| (*e, *e, 3.5)).collect();
        assert!(better_mapping(&good).is_none());
        assert_eq!(signed_permutations().len(), 48);
    }
}
