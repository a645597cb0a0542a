//! Turning the orbit fit's answer into the reported estimates and gates: 1σ
//! from the covariance, the regressor biases and the temperature slope (all in
//! the sensor frame S), the element-set age, and the three gates.

use super::{
    OrbitWarning, RegressorBias, Regressors, RESIDUAL_MAX_FRACTION, SAMPLES_USED_MIN,
    TLE_AGE_WARN_DAYS,
};
use crate::check::outcome::{Gate, GateRole};
use crate::fit::orbit::{OrbitFit, SYM};
use crate::physics::orbit::Orbit;

/// 1σ of parameter `k` of the fit, in that parameter's unit (nT for hard iron,
/// dimensionless for soft iron, nT per unit for a regressor bias).
fn sd(fit: &OrbitFit, k: usize) -> f64 {
    fit.covariance[(k, k)].max(0.0).sqrt()
}

/// 1σ of the hard iron, sensor frame, nT, and of the symmetric soft-iron
/// matrix W (dimensionless, mirrored across the diagonal).
pub(super) fn iron_sigmas(fit: &OrbitFit) -> ([f64; 3], [[f64; 3]; 3]) {
    let hard_iron_sigma_nt = [sd(fit, 0), sd(fit, 1), sd(fit, 2)];
    let mut soft_iron_sigma = [[0.0; 3]; 3];
    for (k, &(i, j)) in SYM.iter().enumerate() {
        soft_iron_sigma[i][j] = sd(fit, 3 + k);
        soft_iron_sigma[j][i] = sd(fit, 3 + k);
    }
    (hard_iron_sigma_nt, soft_iron_sigma)
}

/// Bias vector of regressor `q` and its 1σ, sensor frame, nT per unit.
fn regressor_vec3(fit: &OrbitFit, q: usize) -> ([f64; 3], [f64; 3]) {
    let v = fit.regressors[q];
    (
        [v[0], v[1], v[2]],
        [sd(fit, 9 + 3 * q), sd(fit, 10 + 3 * q), sd(fit, 11 + 3 * q)],
    )
}

/// The named regressor biases (sensor frame, nT per unit of each regressor)
/// and, when a temperature slope was fitted, the slope and its 1σ, nT per °C.
pub(super) type Biases = (Vec<RegressorBias>, Option<([f64; 3], [f64; 3])>);

/// Regressor biases and the temperature slope from the fit, in the order the
/// regressors were offered (the slope, when fitted, follows the named ones).
pub(super) fn regressor_biases(fit: &OrbitFit, regs: &Regressors) -> Biases {
    let biases = regs
        .names
        .iter()
        .enumerate()
        .map(|(q, (name, unit))| {
            let (v, s) = regressor_vec3(fit, q);
            RegressorBias {
                name: name.clone(),
                unit: unit.clone(),
                bias_nt_per_unit: v,
                sigma: s,
            }
        })
        .collect();
    let slope = regs
        .has_slope
        .then(|| regressor_vec3(fit, regs.names.len()));
    (biases, slope)
}

/// Age of the element set at the first sample, days (UTC seconds since the
/// epoch differenced), warning when older than [`TLE_AGE_WARN_DAYS`].
pub(super) fn tle_age_days(
    first_t_unix_s: f64,
    orbit_used: Option<&Orbit>,
    warnings: &mut Vec<OrbitWarning>,
) -> Option<f64> {
    let age_days = orbit_used.map(|o| (first_t_unix_s - o.epoch_unix_s) / 86_400.0);
    if let Some(age) = age_days {
        if age.abs() > TLE_AGE_WARN_DAYS {
            warnings.push(OrbitWarning::OldTle { age_days: age });
        }
    }
    age_days
}

/// The three gates: convergence, residual RMS (nT) against a share of the mean
/// model magnitude `mean_model_nt` (nT), and the share of the `offered` rows used.
pub(super) fn gates(fit: &OrbitFit, offered: usize, mean_model_nt: f64) -> Vec<Gate> {
    vec![
        Gate::at_least(
            "converged",
            f64::from(u8::from(fit.converged)),
            1.0,
            GateRole::Data,
        ),
        Gate::at_most(
            "residual_max",
            fit.residual_rms_nt,
            RESIDUAL_MAX_FRACTION * mean_model_nt,
            GateRole::Article,
        ),
        Gate::at_least(
            "samples_used",
            fit.samples_used as f64 / offered.max(1) as f64,
            SAMPLES_USED_MIN,
            GateRole::Data,
        ),
    ]
}
