//! Benchmarks of the dipole fits on a simulated turntable data set with a fixed seed:
//! the linear moment fit and the moment-and-offset fit at 1e4, 1e5 and 1e6 samples
//! (samples per second). The samples come from the dipole field model directly
//! (`model_field_nt` plus seeded Gaussian noise), not from a CSV, so the figure is the
//! fit alone.
//!
//! Run: `cargo bench --bench dipole`.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::fit::dipole::{fit_moment, fit_moment_and_offset, model_field_nt, DipoleSample};
use magproof::physics::frames::rotation_z;
use nalgebra::{Matrix3, Vector3};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};

/// Two mounts, `n` samples spread over full turns, 1 nT noise.
fn samples(n: usize) -> Vec<DipoleSample> {
    let m = Vector3::new(0.012, -0.007, 0.009);
    let o = Vector3::new(0.02, -0.01, 0.01);
    let on_side = Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0);
    let mut rng = StdRng::seed_from_u64(7);
    let noise = Normal::new(0.0, 1.0).expect("noise");
    (0..n)
        .map(|i| {
            let mount = if i % 2 == 0 {
                Matrix3::identity()
            } else {
                on_side
            };
            let angle = std::f64::consts::TAU * i as f64 / n as f64 * 4.0;
            let mut s = DipoleSample {
                probe_m: Vector3::new(0.6, 0.0, 0.05),
                body_to_table: rotation_z(angle) * mount,
                b_nt: Vector3::zeros(),
            };
            s.b_nt = model_field_nt(&s, &m, &o).expect("field")
                + Vector3::from_fn(|_, _| noise.sample(&mut rng));
            s
        })
        .collect()
}

fn bench_dipole(c: &mut Criterion) {
    let mut g = c.benchmark_group("dipole_fit");
    g.sample_size(10);
    for n in [10_000, 100_000, 1_000_000] {
        let data = samples(n);
        g.throughput(Throughput::Elements(n as u64));
        g.bench_with_input(BenchmarkId::new("linear_moment", n), &data, |b, d| {
            b.iter(|| fit_moment(d, &Vector3::zeros()).expect("fit"))
        });
        g.bench_with_input(BenchmarkId::new("moment_and_offset", n), &data, |b, d| {
            b.iter(|| fit_moment_and_offset(d).expect("fit"))
        });
    }
    g.finish();
}

criterion_group!(benches, bench_dipole);
criterion_main!(benches);
