//! Reader throughput: MB/s of CSV read into columns, at 1e4, 1e5 and 1e6 rows.
//! Input: a tumble-like log written here with a fixed seed (4 columns `t,bx,by,bz`, nT,
//! ~38 bytes a row).

use std::io::Write;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::log::{read_sweep, ReadOptions};
use rand::{Rng, SeedableRng};

fn write_log(path: &std::path::Path, n: usize) -> u64 {
    let mut rng = rand::rngs::StdRng::seed_from_u64(7);
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).expect("create bench log"));
    writeln!(f, "t,bx,by,bz").expect("write");
    for i in 0..n {
        let (x, y, z): (f64, f64, f64) = (
            rng.gen_range(-50000.0..50000.0),
            rng.gen_range(-50000.0..50000.0),
            rng.gen_range(-50000.0..50000.0),
        );
        writeln!(f, "{},{x:.3},{y:.3},{z:.3}", i as f64 / 100.0).expect("write");
    }
    f.flush().expect("flush");
    std::fs::metadata(path).expect("stat").len()
}

fn reader(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temp dir");
    let mut group = c.benchmark_group("read_sweep");
    group.sample_size(10);
    for n in [10_000usize, 100_000, 1_000_000] {
        let path = dir.path().join(format!("log{n}.csv"));
        let bytes = write_log(&path, n);
        group.throughput(Throughput::Bytes(bytes));
        group.bench_with_input(BenchmarkId::from_parameter(n), &path, |b, p| {
            b.iter(|| read_sweep(p, &ReadOptions::default()).expect("read"))
        });
    }
    group.finish();
}

criterion_group!(benches, reader);
criterion_main!(benches);
