//! `magproof simulate align`: the flags of the turntable alignment simulator and the
//! files it writes (log, plan, truth).

use clap::{Args as ClapArgs, ValueEnum};
use nalgebra::Vector3;

use super::numeric::{vector3, Domain};
use magproof::sim::align::{simulate_align, AlignConfig, AxisFault};
use magproof::sim::align_gyro::GyroSim;
use magproof::Error;

/// An axis fault to simulate.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum FaultArg {
    /// The plan's mapping holds.
    None,
    /// Body x reads sensor x reversed.
    FlipX,
    /// Body y reads sensor y reversed.
    FlipY,
    /// Body z reads sensor z reversed.
    FlipZ,
    /// Body x and y read each other's sensor axes.
    SwapXy,
    /// Body y and z read each other's sensor axes.
    SwapYz,
    /// Body x and z read each other's sensor axes.
    SwapXz,
}

/// Flags only `simulate align` reads.
#[derive(Debug, ClapArgs)]
pub struct AlignArgs {
    /// Align: misalignment rotation vector, body frame, deg: X,Y,Z [default: 1,-0.5,1.5].
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, MISALIGN_DEG), allow_hyphen_values = true)]
    misalign_deg: Option<Vector3<f64>>,
    /// Align: a reversed or swapped sensor axis.
    #[arg(long, value_enum)]
    axis_fault: Option<FaultArg>,
    /// Align: leave the reference field out of the plan (the field's sign then unknown).
    #[arg(long)]
    no_reference_field: bool,
    /// Align: log a gyro too (gx, gy, gz, deg/s); the table stops at each heading and
    /// turns at 10 deg/s between them.
    #[arg(long)]
    gyro: bool,
    /// Align: a reversed or swapped gyro axis (implies --gyro).
    #[arg(long, value_enum)]
    gyro_fault: Option<FaultArg>,
    /// Align: gyro scale factor per sensor axis: X,Y,Z [default: 1,1,1] (implies --gyro).
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, GYRO_SCALE), allow_hyphen_values = true)]
    gyro_scale: Option<Vector3<f64>>,
    /// Align: gyro bias per sensor axis, deg/s: X,Y,Z [default: 0.05,-0.03,0.02] (implies --gyro).
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, GYRO_BIAS_DEG_S), allow_hyphen_values = true)]
    gyro_bias_deg_s: Option<Vector3<f64>>,
    /// Align: a hand tumble (magnetometer and gyro, no table, no `angle`) instead of a
    /// turntable run (implies --gyro).
    #[arg(long)]
    tumble: bool,
}

/// A gyro scale factor.
const GYRO_SCALE: Domain = Domain::closed(0.5, 1.5, "");

/// A gyro bias, deg/s.
const GYRO_BIAS_DEG_S: Domain = Domain::closed(-10.0, 10.0, "deg/s");

fn fault(arg: Option<FaultArg>) -> AxisFault {
    match arg.unwrap_or(FaultArg::None) {
        FaultArg::None => AxisFault::None,
        FaultArg::FlipX => AxisFault::Flip(0),
        FaultArg::FlipY => AxisFault::Flip(1),
        FaultArg::FlipZ => AxisFault::Flip(2),
        FaultArg::SwapXy => AxisFault::Swap(0, 1),
        FaultArg::SwapYz => AxisFault::Swap(1, 2),
        FaultArg::SwapXz => AxisFault::Swap(0, 2),
    }
}

/// The gyro the flags ask for, if any.
fn gyro(args: &AlignArgs) -> Option<GyroSim> {
    let wanted = args.gyro
        || args.tumble
        || args.gyro_fault.is_some()
        || args.gyro_scale.is_some()
        || args.gyro_bias_deg_s.is_some();
    wanted.then(|| {
        let mut g = GyroSim {
            fault: fault(args.gyro_fault),
            ..GyroSim::default()
        };
        if let Some(s) = args.gyro_scale {
            g.scale = s;
        }
        if let Some(b) = args.gyro_bias_deg_s {
            g.bias_deg_s = b;
        }
        g
    })
}

/// A misalignment component, deg.
const MISALIGN_DEG: Domain = Domain::closed(-45.0, 45.0, "deg");

/// The log, plan and truth of an alignment run: (file name, text).
pub fn align_files(
    args: &AlignArgs,
    seed: u64,
    noise_nt: Option<f64>,
    hard_iron_nt: Option<Vector3<f64>>,
    mounts: Option<u8>,
) -> Result<Vec<(String, String)>, Error> {
    let mut cfg = AlignConfig {
        gyro: gyro(args),
        tumble: args.tumble,
        ..AlignConfig::default()
    };
    if let Some(m) = args.misalign_deg {
        cfg.misalign_deg = m;
    }
    if let Some(n) = noise_nt {
        cfg.noise_nt = n;
    }
    if let Some(h) = hard_iron_nt {
        cfg.hard_iron_nt = h;
    }
    if cfg.gyro.is_some() && !cfg.tumble {
        // Three mounts spin the gyro about every body axis.
        cfg.mounts = 3;
    }
    if let Some(m) = mounts {
        cfg.mounts = m as usize;
    }
    cfg.reference_in_plan = !args.no_reference_field;
    cfg.fault = fault(args.axis_fault);
    let sim = simulate_align(&cfg, seed, "align.csv")?;
    let truth = serde_json::json!({
        "kind": "align",
        "log": "align.csv",
        "plan": "plan.toml",
        "truth": sim.truth,
    });
    let truth = serde_json::to_string_pretty(&truth)
        .map_err(|e| Error::Internal(format!("truth JSON: {e}")))?;
    Ok(vec![
        ("align.csv".into(), sim.csv),
        ("plan.toml".into(), sim.plan),
        ("truth.json".into(), truth + "\n"),
    ])
}
