//! Benchmarks of the calibration hot paths on simulated data with fixed seeds
//! (`magproof::sim`): the Li & Griffiths ellipsoid fit, the robust tumble fit and the
//! cage fit, each at 1e4, 1e5 and 1e6 samples, reported as samples per second.
//!
//! Run: `cargo bench --bench calibrate` (one group: `cargo bench --bench calibrate -- cage_fit`).

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::fit::cage::fit_cage;
use magproof::fit::ellipsoid::fit_ellipsoid;
use magproof::fit::tumble::{fit_tumble, Robust, TumbleOptions};
use magproof::sim::{simulate_cage, simulate_tumble, CageConfig, TumbleConfig};

const SIZES: [usize; 3] = [10_000, 100_000, 1_000_000];

fn bench_tumble(c: &mut Criterion) {
    let mut g = c.benchmark_group("tumble_fit");
    g.sample_size(10);
    for n in SIZES {
        let cfg = TumbleConfig {
            samples: n,
            outlier_rate: 0.01,
            ..TumbleConfig::default()
        };
        let sim = simulate_tumble(&cfg, 42).expect("simulation");
        let opts = TumbleOptions {
            reference_nt: Some(cfg.reference_nt),
            robust: Robust::Tukey,
            ..TumbleOptions::default()
        };
        g.throughput(Throughput::Elements(n as u64));
        g.bench_with_input(BenchmarkId::new("ellipsoid", n), &sim, |b, sim| {
            b.iter(|| fit_ellipsoid(&sim.samples_nt).expect("fit"))
        });
        g.bench_with_input(BenchmarkId::new("robust_tukey", n), &sim, |b, sim| {
            b.iter(|| fit_tumble(&sim.samples_nt, None, &opts).expect("fit"))
        });
    }
    g.finish();
}

fn bench_cage(c: &mut Criterion) {
    let mut g = c.benchmark_group("cage_fit");
    g.sample_size(10);
    for n in SIZES {
        // The default grid has 5³ = 125 points; repeats scale it to about n samples.
        let cfg = CageConfig {
            repeats: n.div_ceil(125),
            ..CageConfig::default()
        };
        let sim = simulate_cage(&cfg, 42).expect("simulation");
        g.throughput(Throughput::Elements(sim.samples_nt.len() as u64));
        g.bench_with_input(BenchmarkId::new("linear", n), &sim, |b, sim| {
            b.iter(|| fit_cage(&sim.applied_nt, &sim.samples_nt, None).expect("fit"))
        });
    }
    g.finish();
}

criterion_group!(benches, bench_tumble, bench_cage);
criterion_main!(benches);
