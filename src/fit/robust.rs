//! Robust statistics for reweighting: Tukey's biweight (Beaton & Tukey 1974) and the
//! median absolute deviation as a Gaussian-consistent scale (Huber 1981).

/// Tukey biweight w(u) = (1 − u²)² for |u| < 1, else 0.
pub fn tukey_weight(u: f64) -> f64 {
    if u.abs() < 1.0 {
        let t = 1.0 - u * u;
        t * t
    } else {
        0.0
    }
}

/// 1.4826 × median absolute deviation from the median (a Gaussian-consistent σ).
pub fn robust_sigma(values: &[f64]) -> f64 {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return 0.0;
    }
    let med = median_in_place(&mut v);
    for x in v.iter_mut() {
        *x = (*x - med).abs();
    }
    1.4826 * median_in_place(&mut v)
}

fn median_in_place(v: &mut [f64]) -> f64 {
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    let m = *m;
    if v.len() % 2 == 1 {
        m
    } else {
        let below = v[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (m + below)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn mad_of_a_known_set_and_biweight_edges() {
        // |x − 3| = 2,1,0,1,97 → median 1 → σ̂ = 1.4826.
        assert_relative_eq!(robust_sigma(&[1.0, 2.0, 3.0, 4.0, 100.0]), 1.4826);
        assert_relative_eq!(tukey_weight(0.0), 1.0);
        assert_relative_eq!(tukey_weight(0.5), 0.5625);
        assert_relative_eq!(tukey_weight(1.0), 0.0);
    }
}
