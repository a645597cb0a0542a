//! `magproof simulate tumble|cage|polarity|dipole|rod|orbit|loop --seed N --out DIR [options]`: a
//! synthetic log, a matching plan and the truth behind them (JSON), from the simulators
//! in `magproof::sim`, so that a check can be rehearsed and its answer compared with the
//! truth. Files are written atomically; an existing non-empty DIR needs `--force`.

use std::path::PathBuf;

use clap::{Args as ClapArgs, ValueEnum};
use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

use super::common::Outcome;
use super::numeric::{count, number, numbers, vector3, Domain, FIELD_NT};
use magproof::report::atomic::write_atomic;
use magproof::sim::dipole::{simulate_static, simulate_turntable, StaticConfig, TurntableConfig};
use magproof::sim::polarity::{simulate_polarity, PolarityConfig};
use magproof::sim::rod::{simulate_rod_bench, RodBenchConfig};
use magproof::sim::{
    simulate_cage, simulate_tumble, write_cage_csv, write_tumble_csv, CageConfig, SimCoverage,
    TumbleConfig,
};
use magproof::Error;

/// What to simulate.
#[derive(Debug, Clone, Copy, ValueEnum)]
enum Kind {
    /// A tumble test in the ambient field.
    Tumble,
    /// A coil-cage sweep.
    Cage,
    /// Torque-rod pulses.
    Polarity,
    /// A residual-dipole run (turntable or static map).
    Dipole,
    /// A turntable alignment run (sensor axes against the body frame).
    Align,
    /// A torque rod on the bench (finite rod with saturation and hysteresis).
    Rod,
    /// On-orbit telemetry from a two-line element set, with regressors and a tumble.
    Orbit,
    /// A closed-loop run: a flight control law driving the rods of a turning body.
    Loop,
}

/// How an orbit log gives positions.
#[derive(Debug, Clone, Copy, ValueEnum)]
enum PositionsArg {
    /// None: the plan's [orbit] tle is propagated.
    Tle,
    /// Earth-fixed rx ry rz, km.
    Ecef,
    /// Geodetic lat lon alt.
    Geodetic,
}

/// Directions a tumble visits.
#[derive(Debug, Clone, Copy, ValueEnum)]
enum CoverageArg {
    /// The whole sphere.
    Full,
    /// Half the sphere (u_z ≥ 0).
    Hemisphere,
    /// One great circle: coplanar data.
    Plane,
}

/// Residual-dipole method.
#[derive(Debug, Clone, Copy, ValueEnum)]
enum DipoleMethodArg {
    /// Article turned on a turntable under each mount, probe fixed.
    Turntable,
    /// Article fixed, probe at six positions.
    Static,
}

/// Flags of `magproof simulate`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// What to simulate.
    #[arg(value_enum)]
    kind: Kind,
    /// Random seed (the same seed and options give byte-identical files).
    #[arg(long, allow_hyphen_values = true)]
    seed: u64,
    /// Folder to write into (created; an existing non-empty one needs --force).
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// Write into an existing non-empty folder, replacing files of the same name.
    #[arg(long)]
    force: bool,
    /// White noise per axis, 1σ, nT (default: the simulator's).
    #[arg(long, value_name = "NT", value_parser = |s: &str| number(s, NOISE_NT), allow_hyphen_values = true)]
    noise_nt: Option<f64>,
    /// Tumble/cage: hard iron, sensor frame, nT: X,Y,Z.
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, HARD_IRON_NT), allow_hyphen_values = true)]
    hard_iron_nt: Option<Vector3<f64>>,
    /// Tumble/cage: soft-iron correction W: D1,D2,D3 (diagonal) or D1,D2,D3,W12,W13,W23.
    #[arg(long, value_name = "LIST", value_parser = parse_soft_iron, allow_hyphen_values = true, conflicts_with = "soft_iron_scale")]
    soft_iron: Option<Matrix3<f64>>,
    /// Tumble/cage: soft-iron correction W = S·I (a pure scale).
    #[arg(long, value_name = "S", value_parser = |s: &str| number(s, SOFT_IRON_SCALE), allow_hyphen_values = true)]
    soft_iron_scale: Option<f64>,
    /// Tumble: fraction of samples hit by a 3000 nT outlier (0..1).
    #[arg(long, value_name = "RATE", value_parser = |s: &str| number(s, Domain::closed(0.0, 1.0, "")), allow_hyphen_values = true)]
    outlier_rate: Option<f64>,
    /// Tumble: directions visited.
    #[arg(long, value_enum)]
    coverage: Option<CoverageArg>,
    /// Tumble: number of samples.
    #[arg(long, value_parser = |s: &str| count(s, 1, MAX_SAMPLES), allow_hyphen_values = true)]
    samples: Option<usize>,
    /// Tumble: reference field magnitude, nT (written to the plan's [site]).
    #[arg(long, value_name = "NT", value_parser = |s: &str| number(s, FIELD_NT), allow_hyphen_values = true)]
    reference_nt: Option<f64>,
    /// Polarity: a rod (x, y or z) wired backwards; repeatable. Rod: any name winds the
    /// bench rod backwards.
    #[arg(long, value_name = "ROD")]
    reverse: Vec<String>,
    /// Polarity: two rods whose command lines are swapped: A,B.
    #[arg(long, value_name = "A,B")]
    swap: Option<String>,
    /// Polarity: command-to-current lag, s.
    #[arg(long, value_name = "SECONDS", value_parser = |s: &str| number(s, Domain::closed(0.0, 60.0, "s")), allow_hyphen_values = true)]
    lag_s: Option<f64>,
    /// Polarity/dipole: linear drift of the ambient field, nT/s: X,Y,Z.
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, DRIFT_NT_PER_S), allow_hyphen_values = true)]
    drift_nt_per_s: Option<Vector3<f64>>,
    /// Dipole: true moment, body frame, A·m²: X,Y,Z.
    #[arg(long, value_name = "X,Y,Z", value_parser = |s: &str| vector3(s, MOMENT_AM2), allow_hyphen_values = true)]
    moment_am2: Option<Vector3<f64>>,
    #[command(flatten)]
    align: super::simulate_align::AlignArgs,
    #[command(flatten)]
    loop_law: super::simulate_loop::LoopArgs,
    /// Dipole/align: number of turntable mounts (1 = upright only, 2 = upright and on-side;
    /// align also 3 = and on the other side, so that a gyro is spun about every axis).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u8).range(1..=3), allow_hyphen_values = true)]
    mounts: Option<u8>,
    /// Rod: half-width of the hysteresis play, A (the remanence is the moment there);
    /// 0 to 0.05 A.
    #[arg(long, value_name = "A", value_parser = |s: &str| number(s, Domain::closed(0.0, 0.05, "A")), allow_hyphen_values = true)]
    hysteresis_a: Option<f64>,
    /// Dipole: turntable run or static map.
    #[arg(long, value_enum, default_value = "turntable")]
    method: DipoleMethodArg,
    /// Orbit: how the log gives positions.
    #[arg(long, value_enum, default_value = "tle")]
    positions: PositionsArg,
}

/// `--noise-nt`, 1σ per axis.
const NOISE_NT: Domain = Domain::closed(0.0, magproof::screen::plausible::MAX_FIELD_NT, "nT");
/// `--hard-iron-nt`, each component.
const HARD_IRON_NT: Domain = Domain::closed(-1e12, 1e12, "nT");
/// `--soft-iron`, each element (a soft-iron matrix is near the identity; 100 is a
/// wrong unit or a typo).
const SOFT_IRON: Domain = Domain::closed(-100.0, 100.0, "");
/// `--soft-iron-scale`.
const SOFT_IRON_SCALE: Domain = Domain::positive(100.0, "");
/// `--drift-nt-per-s`, each component.
const DRIFT_NT_PER_S: Domain = Domain::closed(-1e6, 1e6, "nT/s");
/// `--moment-am2`, each component (a small spacecraft's residual dipole is well under
/// 10 A·m² — common practice).
const MOMENT_AM2: Domain = Domain::closed(-1e6, 1e6, "A·m²");
/// `--samples`: at most 10⁸ rows (a log of several GB).
const MAX_SAMPLES: usize = 100_000_000;

fn parse_soft_iron(s: &str) -> Result<Matrix3<f64>, String> {
    match numbers(s, SOFT_IRON)?.as_slice() {
        [a, b, c] => Ok(Matrix3::from_diagonal(&Vector3::new(*a, *b, *c))),
        [a, b, c, xy, xz, yz] => Ok(Matrix3::new(*a, *xy, *xz, *xy, *b, *yz, *xz, *yz, *c)),
        v => Err(format!(
            "need D1,D2,D3 or D1,D2,D3,W12,W13,W23, got {} numbers",
            v.len()
        )),
    }
}

impl Args {
    fn soft_iron(&self) -> Option<Matrix3<f64>> {
        self.soft_iron
            .or(self.soft_iron_scale.map(|s| Matrix3::identity() * s))
    }
}

#[derive(Serialize)]
struct TruthFile<'a, T: Serialize> {
    kind: &'a str,
    log: &'a str,
    plan: &'a str,
    truth: T,
}

/// A simulated file: (file name, text).
type SimFile = (String, String);

/// The simulated files: (file name, text); the truth last.
fn simulate(args: &Args) -> Result<Vec<SimFile>, Error> {
    match args.kind {
        Kind::Tumble => tumble_files(args),
        Kind::Cage => cage_files(args),
        Kind::Polarity => polarity_files(args),
        Kind::Dipole => dipole_files(args),
        Kind::Align => super::simulate_align::align_files(
            &args.align,
            args.seed,
            args.noise_nt,
            args.hard_iron_nt,
            args.mounts,
        ),
        Kind::Rod => rod_files(args),
        Kind::Orbit => orbit_files(args),
        Kind::Loop => super::simulate_loop::loop_files(&args.loop_law, args.seed, args.noise_nt),
    }
}

/// The text a CSV writer produces.
fn csv_text(f: &dyn Fn(&mut Vec<u8>) -> std::io::Result<()>) -> Result<String, Error> {
    let mut buf = Vec::new();
    f(&mut buf).map_err(|e| Error::Internal(format!("CSV: {e}")))?;
    String::from_utf8(buf).map_err(|e| Error::Internal(format!("CSV: {e}")))
}

/// The truth file for a log of `kind`, pretty JSON.
fn truth_json(kind: &str, log: &str, truth: &dyn erased::Truth) -> Result<String, Error> {
    truth.to_json(kind, log)
}

/// The head of a synthetic plan: a comment with the seed and the [article] table.
fn plan_head(args: &Args, kind: &str) -> String {
    format!(
        "# synthetic {kind} plan (magproof simulate, seed {})\n[article]\nserial = \"SIM-{}\"\nbuild = \"S1\"\n\n",
        args.seed,
        kind.to_uppercase()
    )
}

/// A tumble log, its plan (with the reference |B| in nT as the site) and the truth.
fn tumble_files(args: &Args) -> Result<Vec<SimFile>, Error> {
    let cfg = tumble_config(args);
    let sim = simulate_tumble(&cfg, args.seed)?;
    let plan = format!(
        "{}[site]\nlat_deg = 0.0\nlon_deg = 0.0\nreference_nt = {}\n\n\
         [[step]]\nkind = \"calibrate\"\nlog = \"tumble.csv\"\n",
        plan_head(args, "tumble"),
        cfg.reference_nt
    );
    Ok(vec![
        (
            "tumble.csv".into(),
            csv_text(&|b| write_tumble_csv(&sim, b))?,
        ),
        ("plan.toml".into(), plan),
        (
            "truth.json".into(),
            truth_json("tumble", "tumble.csv", &sim.truth)?,
        ),
    ])
}

/// The tumble configuration: 2000 samples with 20 nT noise unless the flags say otherwise.
fn tumble_config(args: &Args) -> TumbleConfig {
    let mut cfg = TumbleConfig {
        samples: 2000,
        noise_nt: 20.0,
        ..TumbleConfig::default()
    };
    set(&mut cfg.noise_nt, args.noise_nt);
    set(&mut cfg.hard_iron_nt, args.hard_iron_nt);
    set(&mut cfg.soft_iron, args.soft_iron());
    set(&mut cfg.outlier_rate, args.outlier_rate);
    set(&mut cfg.samples, args.samples);
    set(&mut cfg.reference_nt, args.reference_nt);
    if let Some(c) = args.coverage {
        cfg.coverage = match c {
            CoverageArg::Full => SimCoverage::FullSphere,
            CoverageArg::Hemisphere => SimCoverage::Hemisphere,
            CoverageArg::Plane => SimCoverage::Plane,
        };
    }
    cfg
}

/// A coil-cage log, its plan and the truth; `--soft-iron` sets the inverse response.
fn cage_files(args: &Args) -> Result<Vec<SimFile>, Error> {
    let mut cfg = CageConfig::default();
    set(&mut cfg.noise_nt, args.noise_nt);
    set(&mut cfg.hard_iron_nt, args.hard_iron_nt);
    if let Some(w) = args.soft_iron() {
        cfg.response = w
            .try_inverse()
            .ok_or_else(|| Error::Usage("--soft-iron: the matrix is singular".into()))?;
    }
    let sim = simulate_cage(&cfg, args.seed)?;
    let plan = format!(
        "{}[[step]]\nkind = \"calibrate\"\nlog = \"cage.csv\"\n",
        plan_head(args, "cage")
    );
    Ok(vec![
        ("cage.csv".into(), csv_text(&|b| write_cage_csv(&sim, b))?),
        ("plan.toml".into(), plan),
        (
            "truth.json".into(),
            truth_json("cage", "cage.csv", &sim.truth)?,
        ),
    ])
}

/// A torque-rod pulse log, its plan and the truth.
fn polarity_files(args: &Args) -> Result<Vec<SimFile>, Error> {
    let cfg = polarity_config(args)?;
    let sim = simulate_polarity(&cfg, args.seed)?;
    let plan = format!(
        "{}\n[[step]]\nkind = \"polarity\"\nlog = \"pulses.csv\"\n",
        sim.plan_toml
    );
    Ok(vec![
        ("pulses.csv".into(), sim.csv),
        ("plan.toml".into(), plan),
        (
            "truth.json".into(),
            truth_json("polarity", "pulses.csv", &sim.truth)?,
        ),
    ])
}

/// The pulse configuration from the flags: noise (nT), lag (s), drift (nT/s), and rods
/// reversed or swapped by name.
fn polarity_config(args: &Args) -> Result<PolarityConfig, Error> {
    let mut cfg = PolarityConfig::default();
    set(&mut cfg.noise_nt, args.noise_nt);
    set(&mut cfg.lag_s, args.lag_s);
    set(&mut cfg.drift_nt_per_s, args.drift_nt_per_s);
    let names: Vec<String> = cfg.rods.iter().map(|r| r.name.clone()).collect();
    let index = |name: &str| {
        names
            .iter()
            .position(|r| r == name.trim())
            .ok_or_else(|| Error::Usage(format!("no rod named {name:?}; the rods are x, y, z")))
    };
    for r in &args.reverse {
        let i = index(r)?;
        cfg.rods[i].reversed = true;
    }
    if let Some(s) = &args.swap {
        let (a, b) = s
            .split_once(',')
            .ok_or_else(|| Error::Usage(format!("--swap {s:?}: give two rods A,B")))?;
        cfg.swapped = Some((index(a)?, index(b)?));
    }
    Ok(cfg)
}

/// A residual-dipole log (turntable or static map), its plan and the truth.
fn dipole_files(args: &Args) -> Result<Vec<SimFile>, Error> {
    let sim = match args.method {
        DipoleMethodArg::Turntable => {
            let mut cfg = TurntableConfig::default();
            set(&mut cfg.article.noise_nt, args.noise_nt);
            set(&mut cfg.article.moment_body_am2, args.moment_am2);
            set(&mut cfg.article.drift_nt_per_s, args.drift_nt_per_s);
            if let Some(n) = args.mounts {
                if usize::from(n) > cfg.mounts.len() {
                    return Err(Error::Usage(format!(
                        "invalid value '{n}' for '--mounts <N>': simulate dipole expected 1 \
                         or {} (only align takes 3)",
                        cfg.mounts.len()
                    )));
                }
                cfg.mounts.truncate(usize::from(n));
            }
            simulate_turntable(&cfg, args.seed)?
        }
        DipoleMethodArg::Static => {
            let mut cfg = StaticConfig::default();
            set(&mut cfg.article.noise_nt, args.noise_nt);
            set(&mut cfg.article.moment_body_am2, args.moment_am2);
            set(&mut cfg.article.drift_nt_per_s, args.drift_nt_per_s);
            simulate_static(&cfg, args.seed)?
        }
    };
    // The simulator's plan names its log `<stem>.csv` with the method in the stem.
    let log = format!("dipole-{}.csv", sim.truth.method);
    Ok(vec![
        (log.clone(), sim.log_csv.clone()),
        ("plan.toml".into(), sim.plan_toml.clone()),
        ("truth.json".into(), truth_json("dipole", &log, &sim.truth)?),
    ])
}

/// A rod bench log, its plan and the truth; `--reverse` (any name) winds it backwards,
/// `--hysteresis-a` sets the hysteresis.
fn rod_files(args: &Args) -> Result<Vec<SimFile>, Error> {
    let mut cfg = RodBenchConfig::default();
    set(&mut cfg.noise_nt, args.noise_nt);
    set(&mut cfg.drift_nt_per_s, args.drift_nt_per_s);
    set(&mut cfg.play_a, args.hysteresis_a);
    if !args.reverse.is_empty() {
        cfg.moment_per_amp = -cfg.moment_per_amp;
    }
    let sim = simulate_rod_bench(&cfg, args.seed)?;
    Ok(vec![
        ("rod.csv".into(), sim.csv),
        ("plan.toml".into(), sim.plan_toml),
        (
            "truth.json".into(),
            truth_json("rod", "rod.csv", &sim.truth)?,
        ),
    ])
}

/// On-orbit telemetry (1 Hz, 6000 samples unless --samples), its plan with the element
/// set, and the truth.
fn orbit_files(args: &Args) -> Result<Vec<SimFile>, Error> {
    use magproof::sim::orbit::{simulate_orbit, OrbitSimConfig, SimPositions};
    let mut cfg = OrbitSimConfig {
        positions: match args.positions {
            PositionsArg::Tle => SimPositions::Tle,
            PositionsArg::Ecef => SimPositions::Ecef,
            PositionsArg::Geodetic => SimPositions::Geodetic,
        },
        ..OrbitSimConfig::default()
    };
    set(&mut cfg.samples, args.samples);
    set(&mut cfg.noise_nt, args.noise_nt);
    set(&mut cfg.hard_iron_nt, args.hard_iron_nt);
    set(&mut cfg.soft_iron, args.soft_iron());
    if cfg.samples < 200 {
        return Err(Error::Usage("orbit: --samples must be at least 200".into()));
    }
    let sim = simulate_orbit(&cfg, args.seed)?;
    let plan = format!(
        "{}{}\n[[step]]\nkind = \"orbit\"\nlog = \"orbit.csv\"\n",
        plan_head(args, "orbit"),
        sim.plan_orbit
    );
    Ok(vec![
        ("orbit.csv".into(), sim.csv.clone()),
        ("plan.toml".into(), plan),
        (
            "truth.json".into(),
            truth_json("orbit", "orbit.csv", &sim.truth)?,
        ),
    ])
}

/// Overwrite `slot` with `value` when a flag gave one.
fn set<T>(slot: &mut T, value: Option<T>) {
    if let Some(v) = value {
        *slot = v;
    }
}

mod erased {
    //! A truth of any simulator, as the JSON of the truth file.
    use super::TruthFile;
    use magproof::Error;

    /// Anything that can be written as the `truth` of a truth file.
    pub trait Truth {
        /// The whole truth file, pretty JSON.
        fn to_json(&self, kind: &str, log: &str) -> Result<String, Error>;
    }

    impl<T: serde::Serialize> Truth for T {
        fn to_json(&self, kind: &str, log: &str) -> Result<String, Error> {
            let file = TruthFile {
                kind,
                log,
                plan: "plan.toml",
                truth: self,
            };
            serde_json::to_string_pretty(&file)
                .map(|s| s + "\n")
                .map_err(|e| Error::Internal(format!("truth JSON: {e}")))
        }
    }
}

/// Run `simulate`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    // Simulate first: a bad option must not leave an empty folder behind.
    let files = simulate(&args)?;
    super::common::prepare_out(&args.out, args.force)?;
    for (name, text) in &files {
        let path = args.out.join(name);
        write_atomic(&path, text.as_bytes(), true)?;
        outln!("{}", path.display())?;
    }
    Ok(Outcome::Passed)
}
