//! Benchmarks of the residual-dipole path at about 1e4, 1e5 and 1e6 samples, reported as
//! samples per second:
//!
//! * `dipole_check/{at_origin,fitted}/N`: the whole dipole check (`run_dipole` on a log
//!   already screened by the input builder: background model, fit, background covariance,
//!   hidden-component test, per-sample model, orbit torque) on a turntable log from the
//!   simulator the demo uses (`magproof::sim::dipole::simulate_turntable`, fixed seed),
//!   with the dipole at the table origin (linear fit) or its position fitted
//!   (Levenberg–Marquardt). The log is simulated and parsed outside the timed loop.
//! * `dipole_fit/{linear_moment,moment_and_offset}/N`: the two fits alone on samples made
//!   directly from the dipole field model (`model_field_nt` plus seeded Gaussian noise).
//!
//! Run: `cargo bench --bench dipole -- --noplot` (one group: `... -- dipole_check`).

use std::path::Path;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::check::dipole::{run_dipole, DipoleOptions, DipolePosition};
use magproof::check::{CheckInput, CheckRequest};
use magproof::fit::dipole::{fit_moment, fit_moment_and_offset, model_field_nt, DipoleSample};
use magproof::log::plan::parse_plan;
use magproof::log::{read_sweep_from, Plan, ReadOptions};
use magproof::physics::frames::rotation_z;
use magproof::sim::dipole::{simulate_turntable, TurntableConfig};
use nalgebra::{Matrix3, Vector3};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};

const SIZES: [usize; 3] = [10_000, 100_000, 1_000_000];

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

/// A simulated turntable log with about `n` article-present rows (two mounts, 15° steps,
/// 100 Hz probe), parsed, with its request; and the number of article-present rows.
fn turntable(n: usize) -> (CheckInput, Plan, usize) {
    let mut cfg = TurntableConfig::default();
    let steps = cfg.mounts.len() * (360.0 / cfg.step_deg).round() as usize;
    cfg.samples_per_step = (n / steps).max(1);
    cfg.article.sample_interval_s = 0.01;
    let sim = simulate_turntable(&cfg, 2026).expect("simulation");
    let plan = parse_plan(&sim.plan_toml, Path::new("plan.toml")).expect("plan");
    let log = read_sweep_from(
        sim.log_csv.as_bytes(),
        Path::new("turntable.csv"),
        &ReadOptions::default(),
        &mut |_| {},
    )
    .expect("log");
    let input = CheckInput::screen(log, Default::default(), None).expect("screen");
    (input, plan, steps * cfg.samples_per_step)
}

fn bench_check(c: &mut Criterion) {
    let mut g = c.benchmark_group("dipole_check");
    g.sample_size(10);
    for n in SIZES {
        let (input, plan, used) = turntable(n);
        g.throughput(Throughput::Elements(used as u64));
        for (name, position) in [
            ("at_origin", DipolePosition::AtTableOrigin),
            ("fitted", DipolePosition::Fitted),
        ] {
            let options = DipoleOptions {
                inclination_deg: Some(97.4),
                position,
                ..Default::default()
            };
            let req = CheckRequest::new(&input, Some(&plan), options);
            let r = run_dipole(&req).expect("check");
            assert_eq!(r.samples_used, used, "every article row is used");
            g.bench_with_input(BenchmarkId::new(name, n), &req, |b, req| {
                b.iter(|| run_dipole(req).expect("check"))
            });
        }
    }
    g.finish();
}

fn bench_fit(c: &mut Criterion) {
    let mut g = c.benchmark_group("dipole_fit");
    g.sample_size(10);
    for n in SIZES {
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

criterion_group!(benches, bench_check, bench_fit);
criterion_main!(benches);
