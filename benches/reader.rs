//! Reader throughput: MB/s of CSV read into columns, at 1e4, 1e5 and 1e6 rows.
//! Input: a tumble-like log written here with a fixed seed (4 columns `t,bx,by,bz`, nT,
//! ~38 bytes a row). A second group reads the same rows at 1e6 under a flight-software
//! header (`TIME,MAG_X [counts],…`) through the plan's `[columns]` mapping and
//! `nt_per_count`, against the plain header (the budget: at most 10 % more time).
//! A third group reads 1e6 turntable-like rows with a `mount` label column, which every
//! row sends through the general row parser (`log/row.rs`) instead of the fast path.

use std::io::Write;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::log::{read_sweep, LogLayout, ReadOptions};
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

/// The 1e6-row log again, under the flight-software header.
fn mapped_copy(plain: &std::path::Path, out: &std::path::Path) -> u64 {
    let text = std::fs::read_to_string(plain).expect("read bench log");
    let body = text.split_once('\n').map_or("", |(_, b)| b);
    std::fs::write(
        out,
        format!("TIME,MAG_X [counts],MAG_Y [counts],MAG_Z [counts]\n{body}"),
    )
    .expect("write bench log");
    std::fs::metadata(out).expect("stat").len()
}

fn mapped_and_counts(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temp dir");
    let plain = dir.path().join("plain.csv");
    let bytes = write_log(&plain, 1_000_000);
    let mapped = dir.path().join("mapped.csv");
    mapped_copy(&plain, &mapped);
    let layout = LogLayout {
        columns: ["t", "bx", "by", "bz"]
            .iter()
            .zip(["TIME", "MAG_X", "MAG_Y", "MAG_Z"])
            .map(|(q, h)| (q.to_string(), h.to_string()))
            .collect(),
        nt_per_count: Some([0.5, 0.5, 0.5]),
        ..LogLayout::default()
    };
    let mapped_opts = ReadOptions {
        layout,
        ..ReadOptions::default()
    };
    let mut group = c.benchmark_group("read_sweep_forms");
    group.sample_size(10);
    group.throughput(Throughput::Bytes(bytes));
    group.bench_function("plain_1000000", |b| {
        b.iter(|| read_sweep(&plain, &ReadOptions::default()).expect("read"))
    });
    group.bench_function("mapped_counts_1000000", |b| {
        b.iter(|| read_sweep(&mapped, &mapped_opts).expect("read"))
    });
    group.finish();
}

/// A turntable-like log (`t,bx,by,bz,angle [deg],mount`, ~50 bytes a row): the mount
/// column keeps every row on the general parser.
fn write_mount_log(path: &std::path::Path, n: usize) -> u64 {
    let mut rng = rand::rngs::StdRng::seed_from_u64(11);
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).expect("create bench log"));
    writeln!(f, "t [s],bx [nT],by [nT],bz [nT],angle [deg],mount").expect("write");
    for i in 0..n {
        let (x, y, z): (f64, f64, f64) = (
            rng.gen_range(-50000.0..50000.0),
            rng.gen_range(-50000.0..50000.0),
            rng.gen_range(-50000.0..50000.0),
        );
        let angle = (i % 3600) as f64 / 10.0;
        let mount = if i % 2 == 0 { "none" } else { "mount-2" };
        writeln!(
            f,
            "{},{x:.3},{y:.3},{z:.3},{angle:.1},{mount}",
            i as f64 / 100.0
        )
        .expect("write");
    }
    f.flush().expect("flush");
    std::fs::metadata(path).expect("stat").len()
}

fn general_rows(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("mount.csv");
    let bytes = write_mount_log(&path, 1_000_000);
    let mut group = c.benchmark_group("read_sweep_general");
    group.sample_size(10);
    group.throughput(Throughput::Bytes(bytes));
    group.bench_function("mount_1000000", |b| {
        b.iter(|| read_sweep(&path, &ReadOptions::default()).expect("read"))
    });
    group.finish();
}

criterion_group!(benches, reader, mapped_and_counts, general_rows);
criterion_main!(benches);
