//! `magproof simulate loop`: the flags of the closed-loop simulator and the files it
//! writes (log, plan, truth).

use clap::{Args as ClapArgs, ValueEnum};
use nalgebra::Vector3;

use super::numeric::{vector3, Domain};
use magproof::log::plan::ControlLaw;
use magproof::sim::loop_law::{simulate_loop, LoopFault, LoopSimConfig};
use magproof::Error;

/// The flight law to simulate.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum LawArg {
    /// m = −k Ḃ.
    Bdot,
    /// m = k ω × B (from the gyro).
    Rate,
}

/// Flags only `simulate loop` reads.
#[derive(Debug, ClapArgs)]
pub struct LoopArgs {
    /// Loop: the flight law [default: bdot].
    #[arg(long, value_enum)]
    law: Option<LawArg>,
    /// Loop: a fault, repeatable: rod-sign:AXIS (software command sign), rod-wiring:AXIS
    /// (harness backwards), gyro-sign:AXIS (software gyro sign), swap-sensor:A,B
    /// (software magnetometer mapping swaps two body axes), swap-commands:A,B (software
    /// sends rod A's command to rod B and B's to A); AXIS is x, y or z.
    #[arg(long, value_name = "FAULT")]
    fault: Vec<String>,
    /// Loop: initial body rate, deg/s: X,Y,Z [default: 4,-3,6].
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, RATE_DEG_S), allow_hyphen_values = true)]
    rate_deg_s: Option<Vector3<f64>>,
    /// Loop: leave the gyro columns out of the log.
    #[arg(long)]
    no_gyro: bool,
}

/// `--rate-deg-s`, each component.
const RATE_DEG_S: Domain = Domain::closed(-360.0, 360.0, "deg/s");

fn axis(s: &str) -> Result<usize, Error> {
    match s.trim() {
        "x" | "X" => Ok(0),
        "y" | "Y" => Ok(1),
        "z" | "Z" => Ok(2),
        other => Err(Error::Usage(format!(
            "--fault: axis \"{other}\" is not x, y or z"
        ))),
    }
}

/// The two different axes A,B of a swap fault (`s` is the whole value, for messages).
fn pair(s: &str, rest: &str) -> Result<(usize, usize), Error> {
    let (a, b) = rest
        .split_once(',')
        .ok_or_else(|| Error::Usage(format!("--fault {s:?}: a swap needs two axes A,B")))?;
    let (a, b) = (axis(a)?, axis(b)?);
    if a == b {
        return Err(Error::Usage(format!(
            "--fault {s:?}: swap two different axes"
        )));
    }
    Ok((a, b))
}

/// One `--fault` value.
fn fault(s: &str) -> Result<LoopFault, Error> {
    let (kind, rest) = s.split_once(':').ok_or_else(|| {
        Error::Usage(format!(
            "--fault {s:?}: write KIND:AXIS (rod-sign:y, rod-wiring:y, gyro-sign:z) or \
             swap-sensor:A,B"
        ))
    })?;
    match kind.trim() {
        "rod-sign" => Ok(LoopFault::RodSign(axis(rest)?)),
        "rod-wiring" => Ok(LoopFault::RodWiring(axis(rest)?)),
        "gyro-sign" => Ok(LoopFault::GyroSign(axis(rest)?)),
        "swap-sensor" => pair(s, rest).map(|(a, b)| LoopFault::SwapSensor(a, b)),
        "swap-commands" => pair(s, rest).map(|(a, b)| LoopFault::SwapCommands(a, b)),
        other => Err(Error::Usage(format!(
            "--fault {s:?}: \"{other}\" is not rod-sign, rod-wiring, gyro-sign, swap-sensor \
             or swap-commands"
        ))),
    }
}

/// The log, plan and truth of a closed-loop run: (file name, text).
pub fn loop_files(
    args: &LoopArgs,
    seed: u64,
    noise_nt: Option<f64>,
) -> Result<Vec<(String, String)>, Error> {
    let mut cfg = LoopSimConfig::default();
    if let Some(l) = args.law {
        cfg.law = match l {
            LawArg::Bdot => ControlLaw::Bdot,
            LawArg::Rate => ControlLaw::Rate,
        };
    }
    if let Some(n) = noise_nt {
        cfg.noise_nt = n;
    }
    if let Some(r) = args.rate_deg_s {
        cfg.rate0_deg_s = r;
    }
    cfg.log_gyro = !args.no_gyro;
    cfg.faults = args
        .fault
        .iter()
        .map(|f| fault(f))
        .collect::<Result<_, _>>()?;
    let sim = simulate_loop(&cfg, seed, "loop.csv")?;
    let truth = serde_json::json!({
        "kind": "loop",
        "log": "loop.csv",
        "plan": "plan.toml",
        "truth": sim.truth,
    });
    let truth = serde_json::to_string_pretty(&truth)
        .map_err(|e| Error::Internal(format!("truth JSON: {e}")))?;
    Ok(vec![
        ("loop.csv".into(), sim.csv),
        ("plan.toml".into(), sim.plan_toml),
        ("truth.json".into(), truth + "\n"),
    ])
}
