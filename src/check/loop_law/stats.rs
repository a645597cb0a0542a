//! The mean of a correlated series and the σ of that mean.
//!
//! Samples of a loop test are not independent: the power follows the rotation, so
//! neighbours are alike. Two estimates of the σ of the mean are made and the larger is
//! kept, so that neither hides correlation the other misses:
//!
//! - the effective number of samples from the lag-1 autocorrelation ρ of an AR(1)
//!   process, n_eff = n (1 − ρ)/(1 + ρ) (Bayley & Hammersley 1946; also Bretherton et al.
//!   1999, eq. 30 — cited from memory), σ = s/√n_eff;
//! - batch means: the series cut into [`BATCHES`] consecutive batches, σ = sd of the batch
//!   means / √batches (Schmeiser 1982, from memory), which holds for any correlation
//!   shorter than a batch (a rotation's periodic power included).

use serde::Serialize;

/// Batches of the batch-means estimate.
pub const BATCHES: usize = 10;

/// A mean and its σ allowing for correlated samples.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct MeanSigma {
    /// The mean.
    pub mean: f64,
    /// 1σ of the mean.
    pub sigma: f64,
    /// Samples.
    pub n: usize,
    /// Effective independent samples (from whichever σ was kept: n (s/√n / σ)²).
    pub n_eff: f64,
}

/// Lag-1 autocorrelation of `x` about its mean (0 for fewer than 3 samples or a
/// constant series).
pub fn lag1(x: &[f64]) -> f64 {
    if x.len() < 3 {
        return 0.0;
    }
    let m = x.iter().sum::<f64>() / x.len() as f64;
    let den: f64 = x.iter().map(|v| (v - m) * (v - m)).sum();
    if den <= 0.0 {
        return 0.0;
    }
    let num: f64 = x.windows(2).map(|w| (w[0] - m) * (w[1] - m)).sum();
    (num / den).clamp(-0.99, 0.99)
}

/// Mean of `x` and the σ of the mean, the larger of the lag-1 and batch-means estimates
/// (module doc). Fewer than two samples give a NaN σ.
pub fn mean_sigma(x: &[f64]) -> MeanSigma {
    let n = x.len();
    if n < 2 {
        return MeanSigma {
            mean: x.first().copied().unwrap_or(f64::NAN),
            sigma: f64::NAN,
            n,
            n_eff: n as f64,
        };
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let var = x.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / (n - 1) as f64;
    let rho = lag1(x).max(0.0);
    let n_eff_ar = (n as f64 * (1.0 - rho) / (1.0 + rho)).max(1.0);
    let sigma_ar = (var / n_eff_ar).sqrt();
    let sigma_batch = batch_sigma(x).unwrap_or(0.0);
    let sigma = sigma_ar.max(sigma_batch);
    let n_eff = if sigma > 0.0 {
        (var / (sigma * sigma)).min(n as f64)
    } else {
        n as f64
    };
    MeanSigma {
        mean,
        sigma,
        n,
        n_eff,
    }
}

/// σ of the mean by batch means; `None` when there are too few samples for the batches.
fn batch_sigma(x: &[f64]) -> Option<f64> {
    let per = x.len() / BATCHES;
    if per < 2 {
        return None;
    }
    let means: Vec<f64> = x
        .chunks_exact(per)
        .take(BATCHES)
        .map(|c| c.iter().sum::<f64>() / c.len() as f64)
        .collect();
    let m = means.iter().sum::<f64>() / means.len() as f64;
    let var = means.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / (means.len() - 1) as f64;
    Some((var / means.len() as f64).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// Independent samples: σ of the mean is s/√n (textbook), within the scatter of the
    /// estimate.
    #[test]
    fn white_noise_gives_the_textbook_sigma_of_the_mean() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(5);
        let d = Normal::new(0.0, 2.0).unwrap();
        let x: Vec<f64> = (0..10_000).map(|_| d.sample(&mut rng)).collect();
        let r = mean_sigma(&x);
        let textbook = 2.0 / 100.0;
        assert!((r.sigma / textbook - 1.0).abs() < 0.5, "{r:?}");
        assert!(r.mean.abs() < 4.0 * textbook);
    }

    /// AR(1) with φ = 0.9: the σ of the mean is about √((1+φ)/(1−φ)) ≈ 4.4 times the
    /// naive s/√n (Bayley & Hammersley 1946, from memory); the estimate must see most of it,
    /// and over many series the mean's scatter must match the reported σ.
    #[test]
    fn correlated_samples_widen_the_sigma_as_an_ar1_process_predicts() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(9);
        let d = Normal::new(0.0, 1.0).unwrap();
        let phi: f64 = 0.9;
        let mut means = Vec::new();
        let mut sigmas = Vec::new();
        for _ in 0..200 {
            let mut v = 0.0;
            let x: Vec<f64> = (0..4000)
                .map(|_| {
                    v = phi * v + d.sample(&mut rng);
                    v
                })
                .collect();
            let r = mean_sigma(&x);
            means.push(r.mean);
            sigmas.push(r.sigma);
        }
        let scatter = (means.iter().map(|m| m * m).sum::<f64>() / means.len() as f64).sqrt();
        let typical = sigmas.iter().sum::<f64>() / sigmas.len() as f64;
        assert!(
            (typical / scatter - 1.0).abs() < 0.35,
            "reported {typical}, scatter {scatter}"
        );
    }

    #[test]
    fn a_periodic_series_is_not_taken_for_independent_samples() {
        // A slow sine plus an offset: batch means see the slow swing the lag-1 estimate
        // (ρ ≈ 1, clamped) sees too; the σ must exceed the naive s/√n by far.
        let x: Vec<f64> = (0..5000)
            .map(|i| 1.0 + (i as f64 * 2.0 * std::f64::consts::PI / 1700.0).sin())
            .collect();
        let r = mean_sigma(&x);
        let naive = (0.5f64).sqrt() / (5000f64).sqrt();
        assert!(r.sigma > 5.0 * naive, "{r:?}");
    }
}
