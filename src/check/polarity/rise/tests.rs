//! The modelled command against its closed form, and the delay and rise time recovered
//! from simulated logs (`sim::polarity`, whose rods rise first-order after a delay).

use std::path::Path;

use super::*;
use crate::check::polarity::{run_polarity, PolarityResult};
use crate::log::plan::parse_plan;
use crate::log::read_sweep_from;
use crate::sim::polarity::{simulate_polarity, PolarityConfig};

// Closed form of a first-order lag after a delay, summed over the command's steps:
// x(t) = u₀ + Σⱼ Δuⱼ (1 − exp(−(t − tⱼ − lag)/τ)) for t − tⱼ ≥ lag, on an uneven clock.
#[test]
fn first_order_equals_the_sum_of_step_responses() {
    let t: Vec<f64> = (0..300)
        .map(|i| i as f64 * 0.01 + 0.003 * ((i * 7) % 5) as f64)
        .collect();
    let u: Vec<f64> = (0..300)
        .map(|i| match (i / 37) % 4 {
            0 => 0.5,
            1 => 1.0,
            2 => 0.0,
            _ => -0.7,
        })
        .collect();
    for (lag, tau) in [(0.0, 0.0), (0.034, 0.0), (0.034, 0.021), (-0.05, 0.08)] {
        let x = first_order(&t, &u, lag, tau);
        for i in 0..t.len() {
            let mut want = u[0];
            for j in 1..t.len() {
                let s = t[i] - lag - t[j];
                if s >= 0.0 {
                    let h = if tau > 0.0 {
                        1.0 - (-s / tau).exp()
                    } else {
                        1.0
                    };
                    want += (u[j] - u[j - 1]) * h;
                }
            }
            assert!(
                (x[i] - want).abs() < 1e-12,
                "lag {lag} τ {tau} row {i}: {} vs {want}",
                x[i]
            );
        }
    }
}

fn check(cfg: &PolarityConfig, seed: u64) -> PolarityResult {
    let sim = simulate_polarity(cfg, seed).unwrap();
    let plan = parse_plan(&sim.plan_toml, Path::new("p.toml")).unwrap();
    let log = read_sweep_from(
        sim.csv.as_bytes(),
        Path::new("s.csv"),
        &Default::default(),
        &mut |_| {},
    )
    .unwrap();
    let input = crate::check::CheckInput::screen(log, Default::default(), None).unwrap();
    let req = crate::check::CheckRequest::new(&input, Some(&plan), Default::default());
    run_polarity(&req).unwrap()
}

// The simulation's rods rise with τ = 20 ms after a 30 ms delay: both come back within
// 4σ of their stated 1σ, and the σ are small against the values.
#[test]
fn delay_and_rise_time_are_recovered_with_their_sigma() {
    let r = check(&PolarityConfig::default(), 41);
    assert!(
        (r.lag_s - 0.03).abs() < 4.0 * r.lag_sigma_s,
        "lag {} ± {}",
        r.lag_s,
        r.lag_sigma_s
    );
    assert!(r.lag_sigma_s < 0.002);
    for rod in &r.rods {
        let (tau, s) = (rod.rise_time_s.unwrap(), rod.rise_time_sigma_s.unwrap());
        assert!(
            (tau - 0.02).abs() < 4.0 * s && s < 0.002,
            "{}: τ {tau} ± {s}",
            rod.name
        );
    }
}

// A pure delay of 2.5 samples with edges on the sample grid is a step: no rise time is
// fitted, and the delay is the middle of the sample interval that fits.
#[test]
fn a_step_response_has_no_rise_time() {
    let cfg = PolarityConfig {
        lag_s: 0.05,
        rise_time_s: 0.0,
        ..Default::default()
    };
    let r = check(&cfg, 42);
    for rod in &r.rods {
        assert_eq!(rod.rise_time_s, Some(0.0), "{}", rod.name);
        assert_eq!(rod.rise_time_sigma_s, None);
    }
    assert!((r.lag_s - 0.05).abs() <= 0.0051, "lag {}", r.lag_s);
}
