//! Time one polarity check on a simulated log of about N rows (the same log as
//! `benches/polarity.rs`: default simulation, cycles scaled to N, seed 42), for profiling
//! under callgrind: `cargo run --release --example polarity_profile -- 100000 [DIR]`.
//! With DIR the simulated log is written there once and read back on later runs (the
//! simulation costs more instructions than the check).
use magproof::check::polarity::run_polarity;
use magproof::check::{CheckInput, CheckRequest};
use magproof::log::plan::read_plan;
use magproof::log::{read_sweep, ReadOptions};
use magproof::sim::polarity::simulate_polarity;
use magproof::sim::workload::polarity_config;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let n: usize = std::env::args().nth(1).map_or(Ok(100_000), |s| s.parse())?;
    let cfg = polarity_config(n);
    let tmp = tempfile::tempdir()?;
    let dir = std::env::args()
        .nth(2)
        .map_or_else(|| tmp.path().to_path_buf(), std::path::PathBuf::from);
    std::fs::create_dir_all(&dir)?;
    let stem = format!("prof{n}");
    let (csv, plan) = (
        dir.join(format!("{stem}.csv")),
        dir.join(format!("{stem}.plan.toml")),
    );
    let (csv, plan) = if csv.exists() && plan.exists() {
        (csv, plan)
    } else {
        let [csv, plan, _] = simulate_polarity(&cfg, 42)?.write(&dir, &stem)?;
        (csv, plan)
    };
    let log = read_sweep(&csv, &ReadOptions::default())?;
    let log = CheckInput::screen(log, Default::default(), None)?;
    let plan = read_plan(&plan)?;
    let start = std::time::Instant::now();
    let r = run_polarity(&CheckRequest::new(&log, Some(&plan), Default::default()))?;
    println!(
        "{} rows: {:.3} s; lag {:.4} s; drift {}; couplings {:?}",
        log.log.len(),
        start.elapsed().as_secs_f64(),
        r.lag_s,
        r.drift,
        r.coupling_matrix_nt_per_command
    );
    Ok(())
}
