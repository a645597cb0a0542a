//! Benchmark of the torque-rod polarity check (pulse finding, lag estimate and the
//! per-rod regression) on simulated logs with a fixed seed (`magproof::sim`) at about
//! 1e4, 1e5 and 1e6 rows, reported as rows per second. The log is read once in setup;
//! the figure is the check alone.
//!
//! Run: `cargo bench --bench polarity -- --noplot`. The check's cost is linear in N
//! (normal equations accumulated row by row, drift block solved as a band), so all
//! three sizes run by default; ten samples each and a short measurement time keep the
//! whole bench to a few minutes.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::check::polarity::run_polarity;
use magproof::check::{CheckInput, CheckRequest};
use magproof::log::plan::read_plan;
use magproof::log::{read_sweep, ReadOptions};
use magproof::sim::polarity::simulate_polarity;
use magproof::sim::workload::polarity_config;

fn bench_polarity(c: &mut Criterion) {
    let dir = std::env::temp_dir().join(format!("magproof-bench-polarity-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp dir");
    let mut g = c.benchmark_group("polarity_check");
    g.sample_size(10);
    g.warm_up_time(std::time::Duration::from_secs(1));
    g.measurement_time(std::time::Duration::from_secs(5));
    for n in [10_000usize, 100_000, 1_000_000] {
        let cfg = polarity_config(n);
        let sim = simulate_polarity(&cfg, 42).expect("simulation");
        let [csv, plan, _] = sim.write(&dir, &format!("pol{n}")).expect("write");
        let log = read_sweep(&csv, &ReadOptions::default()).expect("log");
        let log = CheckInput::screen(log, Default::default(), None).expect("screen");
        let plan = read_plan(&plan).expect("plan");
        g.throughput(Throughput::Elements(log.log.len() as u64));
        g.bench_with_input(
            BenchmarkId::new("check", n),
            &(log, plan),
            |b, (log, plan)| {
                b.iter(|| {
                    run_polarity(&CheckRequest::new(log, Some(plan), Default::default()))
                        .expect("check")
                })
            },
        );
    }
    g.finish();
    let _ = std::fs::remove_dir_all(&dir);
}

criterion_group!(benches, bench_polarity);
criterion_main!(benches);
