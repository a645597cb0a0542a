//! Benchmarks of the residual-dipole path at about 1e4, 1e5 and 1e6 samples, reported as
//! samples per second:
//!
//! * `dipole_check/{at_origin,fitted}/N`: the dipole check (`run_dipole`: background
//!   model, fit, background covariance, hidden-component test, per-sample model, orbit
//!   torque; the log is screened once by the input builder outside the timed loop) on a
//!   turntable log from the
//!   simulator the demo uses (`magproof::sim::dipole::simulate_turntable`, fixed seed),
//!   with the dipole at the table origin (linear fit) or its position fitted
//!   (Levenberg–Marquardt). The log is simulated and parsed outside the timed loop.
//! * `dipole_fit/{linear_moment,moment_and_offset}/N`: the two fits alone on samples made
//!   directly from the dipole field model (`magproof::sim::workload::dipole_fit_samples`).
//!
//! Run: `cargo bench --bench dipole -- --noplot` (one group: `... -- dipole_check`).

use std::path::Path;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::check::dipole::{run_dipole, DipoleOptions, DipolePosition};
use magproof::check::{CheckInput, CheckRequest};
use magproof::fit::dipole::{fit_moment, fit_moment_and_offset};
use magproof::log::plan::parse_plan;
use magproof::log::{read_sweep_from, Plan, ReadOptions};
use magproof::sim::dipole::simulate_turntable;
use magproof::sim::workload::{dipole_fit_samples, turntable_config};
use nalgebra::Vector3;

const SIZES: [usize; 3] = [10_000, 100_000, 1_000_000];

/// A simulated turntable log with about `n` article-present rows (two mounts, 15° steps,
/// 100 Hz probe), parsed, with its request; and the number of article-present rows.
fn turntable(n: usize) -> (CheckInput, Plan, usize) {
    let (cfg, rows) = turntable_config(n);
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
    (input, plan, rows)
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
        let data = dipole_fit_samples(n).expect("samples");
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
