//! Robust statistics for reweighting: Tukey's biweight (Beaton & Tukey 1974) and the
//! median absolute deviation as a Gaussian-consistent scale (Huber 1981).

use rayon::prelude::*;

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

/// [`robust_sigma`] and the median, found by first trying a bracket around a guess
/// (`guess_median`, `guess_sigma`, e.g. those of the previous reweighting round): one
/// scan counts the values below the bracket and copies the few inside it, and the order
/// statistics are selected among those. The result is exactly that of
/// [`robust_sigma`] (the same order statistics); when a bracket misses its rank, it
/// falls back to selecting among all values. Returns `(median, σ̂)`; `(0, 0)` for no
/// finite value.
pub fn median_and_sigma_near(values: &[f64], guess_median: f64, guess_sigma: f64) -> (f64, f64) {
    let full = || {
        let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
        if v.is_empty() {
            return (0.0, 0.0);
        }
        let med = median_in_place(&mut v);
        for x in v.iter_mut() {
            *x = (*x - med).abs();
        }
        (med, 1.4826 * median_in_place(&mut v))
    };
    if !(guess_sigma.is_finite() && guess_sigma > 0.0 && guess_median.is_finite()) {
        return full();
    }
    // Half-widths: a quarter of σ̂ around the median holds about 20 % of Gaussian data,
    // a quarter of the MAD around the MAD about 15 %.
    let half = 0.25 * guess_sigma;
    let (n, below, mut inside) =
        bracket_scan(values, |x| x, guess_median - half, guess_median + half);
    let Some(med) = median_from_bracket(&mut inside, below, n) else {
        return full();
    };
    let mad_guess = guess_sigma / 1.4826;
    let (_, below, mut inside) = bracket_scan(
        values,
        |x| (x - med).abs(),
        0.75 * mad_guess,
        1.25 * mad_guess,
    );
    match median_from_bracket(&mut inside, below, n) {
        Some(mad) => (med, 1.4826 * mad),
        None => full(),
    }
}

/// Over the finite `values`, with `f` applied: how many there are, how many fall below
/// `lo`, and those in `[lo, hi]` (in no particular order). Parallel chunks on long
/// inputs; within a chunk the counting and the copying into a small buffer take no
/// data-dependent branch (random residuals would mispredict about every other one).
fn bracket_scan(
    values: &[f64],
    f: impl Fn(f64) -> f64 + Sync,
    lo: f64,
    hi: f64,
) -> (usize, usize, Vec<f64>) {
    const CHUNK: usize = 65_536;
    const BUF: usize = 256;
    let scan = |part: &[f64]| {
        let (mut n, mut below) = (0usize, 0usize);
        let mut inside = Vec::new();
        let mut buf = [0.0f64; BUF];
        for block in part.chunks(BUF - 1) {
            let mut k = 0;
            for &x in block {
                let finite = x.is_finite();
                let d = f(x);
                n += usize::from(finite);
                below += usize::from(finite & (d < lo));
                buf[k] = d;
                k += usize::from(finite & (d >= lo) & (d <= hi));
            }
            inside.extend_from_slice(&buf[..k]);
        }
        (n, below, inside)
    };
    if values.len() > 2 * CHUNK {
        values.par_chunks(CHUNK).map(scan).reduce(
            || (0, 0, Vec::new()),
            |mut a, b| {
                a.2.extend_from_slice(&b.2);
                (a.0 + b.0, a.1 + b.1, a.2)
            },
        )
    } else {
        scan(values)
    }
}

/// The median of `n` values of which `below` lie under the bracket and `inside` (all
/// other values in it, any order) in it; `None` if the middle rank(s) are not inside.
fn median_from_bracket(inside: &mut [f64], below: usize, n: usize) -> Option<f64> {
    if n == 0 {
        return None;
    }
    let mid = n / 2;
    let first_rank = if n % 2 == 1 { mid } else { mid.checked_sub(1)? };
    if below > first_rank || below + inside.len() <= mid {
        return None;
    }
    let k = mid - below;
    let (lower, m, _) = inside.select_nth_unstable_by(k, f64::total_cmp);
    let m = *m;
    if n % 2 == 1 {
        Some(m)
    } else {
        let prev = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        Some(0.5 * (m + prev))
    }
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
    fn bracketed_median_and_sigma_equal_the_full_selection() {
        // Deterministic pseudo-random data (odd and even counts, ties, outliers, NaN);
        // guesses that hit, that are off, and that miss. The reference is the full
        // selection of `robust_sigma`, bit for bit.
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        for n in [1usize, 2, 3, 10, 11, 1000, 1001, 20_000, 150_001] {
            let mut v: Vec<f64> = (0..n)
                .map(|_| {
                    let g = (0..6).map(|_| next()).sum::<f64>() - 3.0; // ≈ N(0, 0.5)
                    (g * 40.0 * 8.0).round() / 8.0 + 3.0 // ties from rounding
                })
                .collect();
            if n > 10 {
                v[3] = 5e4;
                v[7] = f64::NAN;
            }
            let want = robust_sigma(&v);
            let mut sorted: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
            let want_med = median_in_place(&mut sorted);
            for (gm, gs) in [
                (3.0, 28.0),
                (0.0, 28.0),
                (3.0, 10.0),
                (50.0, 28.0),
                (3.0, 1e-3),
                (f64::NAN, 1.0),
            ] {
                let (med, sigma) = median_and_sigma_near(&v, gm, gs);
                assert_eq!(sigma.to_bits(), want.to_bits(), "n {n} guess ({gm}, {gs})");
                assert_eq!(
                    med.to_bits(),
                    want_med.to_bits(),
                    "n {n} guess ({gm}, {gs})"
                );
            }
        }
        assert_eq!(median_and_sigma_near(&[], 0.0, 1.0), (0.0, 0.0));
    }

    #[test]
    fn mad_of_a_known_set_and_biweight_edges() {
        // |x − 3| = 2,1,0,1,97 → median 1 → σ̂ = 1.4826.
        assert_relative_eq!(robust_sigma(&[1.0, 2.0, 3.0, 4.0, 100.0]), 1.4826);
        assert_relative_eq!(tukey_weight(0.0), 1.0);
        assert_relative_eq!(tukey_weight(0.5), 0.5625);
        assert_relative_eq!(tukey_weight(1.0), 0.0);
    }
}
