//! Run one dipole workload once and print its result: a fixed, repeatable workload for
//! instruction counting with callgrind, e.g.
//!
//! ```text
//! cargo build --release --example dipole_once
//! valgrind --tool=callgrind --separate-threads=yes target/release/examples/dipole_once fit 100000
//! ```
//!
//! * `fit N`: the moment-and-offset fit on the samples of `benches/dipole.rs`
//!   (`dipole_fit` group): two mounts, four full turns, 1 nT noise, seed 7.
//! * `check-origin N` / `check-fitted N`: the whole dipole check (`run_dipole`) on a
//!   simulated turntable log with about N article rows, as in the `dipole_check` group.

use std::path::Path;

use magproof::check::dipole::{run_dipole, DipoleOptions, DipolePosition};
use magproof::check::{CheckInput, CheckRequest};
use magproof::fit::dipole::fit_moment_and_offset;
use magproof::log::plan::parse_plan;
use magproof::log::{read_sweep_from, ReadOptions};
use magproof::sim::dipole::simulate_turntable;
use magproof::sim::workload::{dipole_fit_samples, turntable_config};

type Res = Result<(), Box<dyn std::error::Error>>;

fn main() -> Res {
    let mode = std::env::args().nth(1).unwrap_or_else(|| "fit".into());
    let n: usize = match std::env::args().nth(2) {
        Some(a) => a.parse().map_err(|e| format!("N: {e}"))?,
        None => 10_000,
    };
    match mode.as_str() {
        "fit" => fit(n),
        "check-origin" => check(n, DipolePosition::AtTableOrigin),
        "check-fitted" => check(n, DipolePosition::Fitted),
        other => Err(format!("unknown mode {other:?}: fit, check-origin or check-fitted").into()),
    }
}

/// The whole check on a simulated turntable log (two mounts, 15° steps, 100 Hz).
fn check(n: usize, position: DipolePosition) -> Res {
    let (cfg, _) = turntable_config(n);
    let sim = simulate_turntable(&cfg, 2026)?;
    let plan = parse_plan(&sim.plan_toml, Path::new("plan.toml"))?;
    let log = read_sweep_from(
        sim.log_csv.as_bytes(),
        Path::new("turntable.csv"),
        &ReadOptions::default(),
        &mut |_| {},
    )?;
    drop(sim);
    let input = CheckInput::screen(log, Default::default(), None)?;
    let options = DipoleOptions {
        inclination_deg: Some(97.4),
        position,
        ..Default::default()
    };
    let r = run_dipole(&CheckRequest::new(&input, Some(&plan), options))?;
    println!(
        "{} samples: moment {:.6?} A·m² ± {:.2e}, {} iterations",
        r.samples_used, r.moment_body_am2, r.magnitude_sigma_am2, r.iterations
    );
    Ok(())
}

fn fit(n: usize) -> Res {
    let data = dipole_fit_samples(n).ok_or("probe at the dipole")?;
    let fit = fit_moment_and_offset(&data)?;
    println!(
        "n = {n}: moment {:.6?} A·m², offset {:.5?} m, {} iterations, rms {:.4} nT",
        fit.moment_body_am2.as_slice(),
        fit.offset_body_m.as_slice(),
        fit.iterations,
        fit.residual_rms_nt
    );
    Ok(())
}
