//! The blocked, tiled pass against a plain sample-by-sample sum.

use super::super::problem::jacobian_row;
use super::*;
use crate::fit::robust::tukey_weight;
use crate::sim::{simulate_tumble, TumbleConfig};

/// Sums of one pass, one sample at a time, and Σ|term| of each for the tolerance.
struct Reference {
    gradient: [f64; MAX_P],
    hessian: [[f64; MAX_P]; MAX_P],
    kept: [[f64; MAX_P]; MAX_P],
    sum_sq_w: f64,
    count: usize,
    gradient_abs: [f64; MAX_P],
    hessian_abs: [[f64; MAX_P]; MAX_P],
    kept_abs: [[f64; MAX_P]; MAX_P],
    residuals: Vec<f64>,
    weights: Vec<f64>,
}

fn reference(ctx: &PassCtx<[Vector3<f64>]>, np: usize) -> Reference {
    let mut o = Reference {
        gradient: [0.0; MAX_P],
        hessian: [[0.0; MAX_P]; MAX_P],
        kept: [[0.0; MAX_P]; MAX_P],
        sum_sq_w: 0.0,
        count: 0,
        gradient_abs: [0.0; MAX_P],
        hessian_abs: [[0.0; MAX_P]; MAX_P],
        kept_abs: [[0.0; MAX_P]; MAX_P],
        residuals: vec![],
        weights: vec![],
    };
    let mut j = [0.0; MAX_P];
    for (i, b) in ctx.samples_nt.iter().enumerate() {
        let tau = ctx.temp_dev_c.map_or(0.0, |t| t[i]);
        let r = jacobian_row(b, tau, &ctx.c, &ctx.w, &ctx.k, &mut j) - ctx.reference_nt;
        let u = r * ctx.inv_scale;
        let wt = tukey_weight(u);
        o.residuals.push(r);
        o.weights.push(wt);
        if wt > 0.0 {
            let slope = (1.0 - u * u) * (1.0 - 5.0 * u * u);
            o.sum_sq_w += wt * r * r;
            o.count += 1;
            for a in 0..np {
                o.gradient[a] += wt * r * j[a];
                o.gradient_abs[a] += (wt * r * j[a]).abs();
                for b in a..np {
                    o.hessian[a][b] += slope * j[a] * j[b];
                    o.hessian_abs[a][b] += (slope * j[a] * j[b]).abs();
                    o.kept[a][b] += j[a] * j[b];
                    o.kept_abs[a][b] += (j[a] * j[b]).abs();
                }
            }
        }
    }
    o
}

fn close(got: f64, want: f64, scale: f64, what: &str) {
    assert!(
        (got - want).abs() <= 1e-12 * scale + 1e-300,
        "{what}: {got} vs {want} (Σ|terms| {scale})"
    );
}

#[test]
fn the_tiled_pass_sums_what_a_plain_loop_sums() {
    for np in [9, 12] {
        let cfg = TumbleConfig {
            samples: 1000,
            outlier_rate: 0.02,
            temp_range_c: (np == 12).then_some((-10.0, 35.0)),
            ..TumbleConfig::default()
        };
        let sim = simulate_tumble(&cfg, 11).unwrap();
        let mut samples = sim.samples_nt.clone();
        // Dropped samples early on (so that short chunks hold some): a far outlier
        // and a NaN, whose Jacobian row is NaN and must not reach the sums.
        samples[2].x += 5_000.0;
        samples[5] = Vector3::new(f64::NAN, 0.0, 0.0);
        let tdev: Option<Vec<f64>> = sim.temp_c.as_ref().map(|t| {
            let m = t.iter().sum::<f64>() / t.len() as f64;
            t.iter().map(|x| x - m).collect()
        });
        let p = start_params(&cfg, np);
        let sigma = 3.0 * cfg.noise_nt;
        for len in [1, 7, 63, 1000] {
            let t = tdev.as_deref().map(|t| &t[..len]);
            let ctx = PassCtx::new(&samples[..len], t, cfg.reference_nt, &p, sigma);
            let want = reference(&ctx, np);
            if len >= 7 {
                assert!(
                    want.count < len && want.count > len / 2,
                    "{len}: {}",
                    want.count
                );
            }
            let mut res = vec![0.0; len];
            let mut wts = vec![0.0; len];
            let got = if np == 12 {
                ctx.chunk::<12, true, true>(0, &mut res, &mut wts)
            } else {
                ctx.chunk::<9, true, true>(0, &mut res, &mut wts)
            };
            let tag = |what: &str| format!("np {np}, {len} samples: {what}");
            assert_sums_match(&got, &want, &res, &wts, np, cfg.reference_nt, &tag);
            // The other instantiations sum the same gradient and their own matrix,
            // bit for bit (same products, same order).
            if np == 9 {
                assert_instantiations_agree(&ctx, &got, &mut res, &mut wts, &tag);
            }
        }
    }
}

/// Parameters near the truth of `cfg` (W = soft iron, c = hard iron off by a few nT, k =
/// 0.9 × the slopes when `np` = 12).
fn start_params(cfg: &TumbleConfig, np: usize) -> DVector<f64> {
    let w = cfg.soft_iron;
    let mut p: Vec<f64> = (cfg.hard_iron_nt + Vector3::new(3.0, -2.0, 1.0))
        .iter()
        .copied()
        .collect();
    p.extend(super::super::SYM_INDEX.iter().map(|&(i, j)| w[(i, j)]));
    if np == 12 {
        p.extend(cfg.temp_slope_nt_per_c.iter().map(|k| k * 0.9));
    }
    DVector::from_vec(p)
}

/// The tiled pass's residuals (nT), weights, count, Σwr², gradient and matrices equal
/// the plain loop's within rounding.
fn assert_sums_match(
    got: &PassAcc,
    want: &Reference,
    res: &[f64],
    wts: &[f64],
    np: usize,
    reference_nt: f64,
    tag: &dyn Fn(&str) -> String,
) {
    let len = res.len();
    for i in 0..len {
        let (r, w) = (want.residuals[i], want.weights[i]);
        if r.is_nan() {
            assert!(res[i].is_nan() && wts[i] == 0.0, "{}", tag("NaN sample"));
        } else {
            close(res[i], r, reference_nt, &tag("residual"));
            close(wts[i], w, 1.0, &tag("weight"));
        }
    }
    assert_eq!(got.count, want.count, "{}", tag("count"));
    close(got.sum_sq_w, want.sum_sq_w, want.sum_sq_w, &tag("Σwr²"));
    for a in 0..np {
        close(
            got.gradient[a],
            want.gradient[a],
            want.gradient_abs[a],
            &tag("g"),
        );
        for b in a..np {
            let h = (got.hessian[a][b], want.hessian[a][b]);
            close(h.0, h.1, want.hessian_abs[a][b], &tag("H"));
            let k = (got.jtj_kept[a][b], want.kept[a][b]);
            close(k.0, k.1, want.kept_abs[a][b], &tag("JᵀJ kept"));
        }
    }
}

/// The Newton-only and kept-only instantiations of a pass sum the same gradient and
/// their own matrix as the full one (`got`), bit for bit.
fn assert_instantiations_agree(
    ctx: &PassCtx<[Vector3<f64>]>,
    got: &PassAcc,
    res: &mut [f64],
    wts: &mut [f64],
    tag: &dyn Fn(&str) -> String,
) {
    let bits = |m: &[[f64; MAX_P]; MAX_P]| -> Vec<u64> {
        m.iter().flatten().map(|x| x.to_bits()).collect()
    };
    let g_bits = |g: &[f64; MAX_P]| -> Vec<u64> { g.iter().map(|x| x.to_bits()).collect() };
    let n_only = ctx.chunk::<9, true, false>(0, res, wts);
    let k_only = ctx.chunk::<9, false, true>(0, res, wts);
    assert_eq!(
        bits(&n_only.hessian),
        bits(&got.hessian),
        "{}",
        tag("H alone")
    );
    assert_eq!(
        bits(&k_only.jtj_kept),
        bits(&got.jtj_kept),
        "{}",
        tag("kept")
    );
    assert_eq!(
        g_bits(&k_only.gradient),
        g_bits(&got.gradient),
        "{}",
        tag("g")
    );
}
