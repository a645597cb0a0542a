//! The data check before a tumble fit: enough samples, and readings (sensor frame, nT)
//! that span all three directions, else a refusal naming the unobserved axis.

use nalgebra::{Matrix3, Vector3};
use rayon::prelude::*;

use crate::fit::samples::FieldSamples;
use crate::fit::FitError;

/// Samples per task of the data check's sums on long logs.
const CHECK_CHUNK: usize = 65_536;

/// Smallest number of samples a tumble fit accepts.
pub const MIN_SAMPLES: usize = 30;

/// Refuse data a tumble fit cannot use, with the reason: fewer than [`MIN_SAMPLES`],
/// constant readings, readings along one line (collinear) or in one plane (coplanar:
/// the spread across the plane is below 2 % of the spread along it, as when the vehicle
/// was turned about one axis only), naming the unobserved axis.
pub fn check_tumble_data<S: FieldSamples + ?Sized>(samples_nt: &S) -> Result<(), FitError> {
    let n = samples_nt.len();
    if n < MIN_SAMPLES {
        return Err(FitError::Degenerate(format!(
            "a tumble fit needs at least {MIN_SAMPLES} samples, found {n}"
        )));
    }
    // One pass, in parallel chunks on long logs: sums of d = b − b₀ and of d dᵀ about
    // the first sample b₀ (shifted so that the field's offset does not cancel
    // digits), then cov = Σ d dᵀ / n − d̄ d̄ᵀ.
    let origin = samples_nt.at(0);
    let (sum, sum_sq) = (0..n.div_ceil(CHECK_CHUNK))
        .into_par_iter()
        .map(|c| {
            (c * CHECK_CHUNK..((c + 1) * CHECK_CHUNK).min(n)).fold(
                (Vector3::zeros(), Matrix3::zeros()),
                |(s, ss): (Vector3<f64>, Matrix3<f64>), i| {
                    let d = samples_nt.at(i) - origin;
                    (s + d, ss + d * d.transpose())
                },
            )
        })
        .reduce(
            || (Vector3::zeros(), Matrix3::zeros()),
            |a, b| (a.0 + b.0, a.1 + b.1),
        );
    let shift = sum / n as f64;
    let mean = origin + shift;
    let cov = sum_sq / n as f64 - shift * shift.transpose();
    let eig = nalgebra::SymmetricEigen::new(cov);
    let mut idx = [0usize, 1, 2];
    idx.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
    let sd = idx.map(|i| eig.eigenvalues[i].max(0.0).sqrt());
    let scale = mean.norm().max(sd[2]);
    if !(sd[2] > 1e-9 * scale.max(1.0)) {
        return Err(FitError::Degenerate(
            "the readings are constant: the sensor was not turned (or is stuck)".into(),
        ));
    }
    let axis =
        |k: usize| crate::fit::coverage::axis_name(&eig.eigenvectors.column(idx[k]).into_owned());
    if sd[1] < 0.02 * sd[2] {
        return Err(FitError::Degenerate(format!(
            "the readings lie along one line (along sensor {}): the field direction barely \
             changed; tumble the vehicle through all orientations",
            axis(2)
        )));
    }
    if sd[0] < 0.02 * sd[2] {
        return Err(FitError::Degenerate(format!(
            "the readings are coplanar (no spread along sensor {}): the vehicle was turned \
             about one axis only, so the hard iron along that axis cannot be found; tumble \
             it through all orientations",
            axis(0)
        )));
    }
    Ok(())
}
