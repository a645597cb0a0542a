//! Benchmarks of the geomagnetic synthesis: one IGRF-14 evaluation (degree 13) at a site,
//! and the dipole orbit average (128 × 128 grid).

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use magproof::physics::{geomag::orbit_field_nt, igrf::igrf_field};
use time::macros::date;

fn bench_geomag(c: &mut Criterion) {
    let mut g = c.benchmark_group("geomag");
    g.bench_function("igrf_field_degree_13", |b| {
        b.iter(|| {
            igrf_field(
                black_box(47.0),
                black_box(8.0),
                400.0,
                date!(2026 - 11 - 20),
            )
        })
    });
    g.bench_function("orbit_field_dipole_average", |b| {
        b.iter(|| orbit_field_nt(black_box(500.0), black_box(97.4), date!(2026 - 11 - 20)))
    });
    g.finish();
}

criterion_group!(benches, bench_geomag);
criterion_main!(benches);
