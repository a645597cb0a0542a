//! `history` at scale: the time to open a ledger of 10³, 10⁴ and 10⁵ runs and read it
//! into runs, changes and the history section as the terminal shows it (what `magproof
//! history` does before it lays the text out). Input: ledgers written here, 30 runs per serial (ten builds of
//! the three kinds), each with a small result and its quantities.
//!
//! `MAGPROOF_BENCH_KEEP=DIR` keeps the ledgers as DIR/history-N.db, for measuring the
//! binary's peak memory (`/usr/bin/time -v magproof history --ledger DIR/history-100000.db`).

use std::path::Path;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use magproof::check::CheckKind;
use magproof::ledger::{
    changes, legacy_quantities, ChangeRules, InputFile, InputRole, Ledger, NewRun, RunFilter,
};
use serde_json::json;

/// Write a ledger of `n` runs at `path`.
fn write_ledger(path: &Path, n: usize) {
    let kinds: Vec<CheckKind> = ["calibrate", "polarity", "dipole"]
        .into_iter()
        .filter_map(CheckKind::parse)
        .collect();
    let mut ledger = Ledger::open(path).expect("create bench ledger");
    let mut batch = Vec::with_capacity(1000);
    for i in 0..n {
        let kind = kinds[i % 3];
        let x = (i % 97) as f64;
        let result = json!({
            "pass": i % 11 != 0,
            "hard_iron_nt": [400.0 + x, -120.0, 30.0],
            "hard_iron_sigma_nt": [6.0, 6.0, 8.0],
            "residual_rms_nt": 40.0 + x / 10.0,
            "moment_body_am2": [3e-3, 4e-3, x * 1e-5],
            "moment_sigma_am2": [1e-4, 2e-4, 3e-4],
        });
        batch.push(NewRun {
            serial: format!("SN-{:05}", i / 30),
            build: format!("B{}", (i / 3) % 10),
            kind,
            inputs: vec![InputFile {
                role: InputRole::Log,
                path: format!("log{i}.csv").into(),
                sha256: format!("{i:064x}"),
            }],
            quantities: legacy_quantities(kind.as_str(), &result),
            result,
            options: json!({}),
            sensor: None,
        });
        if batch.len() == 1000 || i + 1 == n {
            ledger.record_runs(&batch).expect("record bench runs");
            batch.clear();
        }
    }
}

fn history(c: &mut Criterion) {
    let keep = std::env::var_os("MAGPROOF_BENCH_KEEP");
    let dir = tempfile::tempdir().expect("temp dir");
    let root = keep.as_deref().map(Path::new).unwrap_or(dir.path());
    let mut group = c.benchmark_group("history");
    group.sample_size(10);
    for n in [1_000usize, 10_000, 100_000] {
        let path = root.join(format!("history-{n}.db"));
        if !path.exists() {
            write_ledger(&path, n);
        }
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::from_parameter(n), &path, |b, p| {
            b.iter(|| {
                let ledger = Ledger::open_for_reading(p).expect("open");
                let runs = ledger.runs(&RunFilter::default()).expect("runs");
                let ch = changes(&runs, &ChangeRules::default());
                magproof::report::sections::history_text_section(&runs, &ch).expect("section")
            })
        });
    }
    group.finish();
}

criterion_group!(benches, history);
criterion_main!(benches);
