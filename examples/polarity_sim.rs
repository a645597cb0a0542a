//! Write a simulated torque-rod pulse log, its plan and truth:
//! `cargo run --example polarity_sim -- OUT_DIR [reversed|swapped|healthy] [rate_hz] [cycles] [seed]`.
use magproof::sim::polarity::{simulate_polarity, PolarityConfig};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let dir = std::path::PathBuf::from(args.get(1).map_or("sim-out", String::as_str));
    std::fs::create_dir_all(&dir)?;
    let mut cfg = PolarityConfig::default();
    match args.get(2).map(String::as_str) {
        Some("reversed") => cfg.rods[1].reversed = true,
        Some("swapped") => cfg.swapped = Some((0, 1)),
        _ => {}
    }
    if let Some(rate) = args.get(3) {
        cfg.sample_rate_hz = rate.parse()?;
    }
    if let Some(cycles) = args.get(4) {
        cfg.cycles = cycles.parse()?;
    }
    let seed = args.get(5).map_or(Ok(1), |s| s.parse())?;
    let sim = simulate_polarity(&cfg, seed)?;
    let paths = sim.write(&dir, "pulses")?;
    for p in paths {
        println!("{}", p.display());
    }
    Ok(())
}
