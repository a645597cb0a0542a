//! Benchmarks of the calibration hot paths on simulated logs with fixed seeds:
//! the Li & Griffiths ellipsoid fit and the full robust tumble fit at 1e6 samples.

use criterion::{criterion_group, criterion_main, Criterion};
use magproof::fit::ellipsoid::fit_ellipsoid;
use magproof::fit::tumble::{fit_tumble, Robust, TumbleOptions};
use magproof::sim::{simulate_tumble, TumbleConfig};

fn bench_tumble(c: &mut Criterion) {
    let cfg = TumbleConfig {
        samples: 1_000_000,
        outlier_rate: 0.01,
        ..TumbleConfig::default()
    };
    let sim = simulate_tumble(&cfg, 42).expect("simulation");
    let mut g = c.benchmark_group("tumble_1e6");
    g.sample_size(10);
    g.bench_function("ellipsoid_fit", |b| {
        b.iter(|| fit_ellipsoid(&sim.samples_nt).expect("fit"))
    });
    g.bench_function("robust_tumble_fit", |b| {
        b.iter(|| {
            fit_tumble(
                &sim.samples_nt,
                None,
                &TumbleOptions {
                    reference_nt: Some(cfg.reference_nt),
                    robust: Robust::Tukey,
                    ..TumbleOptions::default()
                },
            )
            .expect("fit")
        })
    });
    g.finish();
}

criterion_group!(benches, bench_tumble);
criterion_main!(benches);
