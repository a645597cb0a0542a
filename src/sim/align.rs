//! Synthetic turntable alignment logs with known truth: a magnetometer mounted with a
//! small misalignment and, if asked, a reversed or swapped axis, turned through 12
//! headings in each mount in a steady field, with hard iron and white noise.
//!
//! Model (the inverse of what [`crate::fit::align`] fits): `s = Aᵀ Tᵀ F + h + n`,
//! `A = exp([φ]×) · fault · planned` sensor → body, `T = R_z(θ) · mount` body → table.

use nalgebra::{Matrix3, Vector3};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use super::align_gyro::{table_rows, tumble_rows, GyroSim, GyroTruth};
use crate::fit::wahba::rotation_from_vector;
use crate::Error;

/// A wiring or mounting fault of the sensor's axes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum AxisFault {
    /// None: the plan's mapping holds.
    None,
    /// The body axis reads its sensor axis reversed (0 = x).
    Flip(usize),
    /// Two body axes read each other's sensor axes (a harness swap): a reflection.
    Swap(usize, usize),
}

impl AxisFault {
    /// The fault as a signed permutation, sensor → body (rows: body axes).
    pub fn matrix(self) -> Matrix3<f64> {
        let mut m = Matrix3::identity();
        match self {
            AxisFault::None => {}
            AxisFault::Flip(i) => m[(i, i)] = -1.0,
            AxisFault::Swap(i, j) => m.swap_rows(i, j),
        }
        m
    }
}

/// What to simulate.
#[derive(Debug, Clone)]
pub struct AlignConfig {
    /// Mounts: 1 (body z up), 2 (and body x up) or 3 (and body y up).
    pub mounts: usize,
    /// Headings per mount, evenly over 360°.
    pub headings: usize,
    /// Readings at each heading.
    pub per_heading: usize,
    /// Misalignment rotation vector, body frame, deg.
    pub misalign_deg: Vector3<f64>,
    /// Axis fault.
    pub fault: AxisFault,
    /// Noise per axis, 1σ, nT.
    pub noise_nt: f64,
    /// Hard iron, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// Steady field, table frame (+z up), nT.
    pub field_table_nt: Vector3<f64>,
    /// Write the field into the plan as a reference probe's reading.
    pub reference_in_plan: bool,
    /// A gyro logged with the magnetometer (gyro columns), when simulated.
    pub gyro: Option<GyroSim>,
    /// A hand tumble (no table, no `angle`) instead of a turntable run; needs a gyro.
    pub tumble: bool,
    /// The magnetometer's planned sensor → body mapping (the plan's and the truth's,
    /// before misalignment and fault).
    pub mag_planned: Matrix3<f64>,
    /// The plan's `[article]`: serial and build.
    pub article: (String, String),
}

impl Default for AlignConfig {
    fn default() -> Self {
        AlignConfig {
            mounts: 2,
            headings: 12,
            per_heading: 5,
            misalign_deg: Vector3::new(1.0, -0.5, 1.5),
            fault: AxisFault::None,
            noise_nt: 20.0,
            hard_iron_nt: Vector3::new(250.0, -120.0, 60.0),
            // Mid-latitude field, 37° off vertical (common practice: ≥ 30°).
            field_table_nt: Vector3::new(30_000.0, 5_000.0, -40_000.0),
            reference_in_plan: true,
            gyro: None,
            tumble: false,
            mag_planned: Matrix3::identity(),
            article: ("SIM-ALIGN".into(), "S1".into()),
        }
    }
}

/// The truth behind a simulated run.
#[derive(Debug, Clone, Serialize)]
pub struct AlignTruth {
    /// Sensor → body, rows.
    pub sensor_to_body: [[f64; 3]; 3],
    /// Misalignment rotation vector, body frame, deg.
    pub misalignment_deg: [f64; 3],
    /// Axis fault.
    pub fault: AxisFault,
    /// Field, table frame, nT.
    pub field_table_nt: [f64; 3],
    /// Hard iron, sensor frame, nT.
    pub hard_iron_nt: [f64; 3],
    /// Noise, nT.
    pub noise_nt: f64,
    /// The gyro, when simulated.
    pub gyro: Option<GyroTruth>,
}

/// A simulated run: the log, the plan and the truth.
#[derive(Debug, Clone)]
pub struct AlignSim {
    /// The CSV log: `t, angle [deg], mount, bx, by, bz`.
    pub csv: String,
    /// The plan (TOML), whose step reads `log_name`.
    pub plan: String,
    /// The truth.
    pub truth: AlignTruth,
}

/// Mount labels and body → table rotations at heading zero.
pub fn mounts() -> [(&'static str, Matrix3<f64>, &'static str); 3] {
    [
        ("z-up", Matrix3::identity(), "[\"+x\", \"+y\", \"+z\"]"),
        (
            "x-up",
            Matrix3::new(0.0, 0.0, -1.0, 0.0, 1.0, 0.0, 1.0, 0.0, 0.0),
            "[\"-z\", \"+y\", \"+x\"]",
        ),
        (
            "y-up",
            Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0),
            "[\"+x\", \"-z\", \"+y\"]",
        ),
    ]
}

/// Simulate a run whose plan reads the log as `log_name`.
pub fn simulate_align(cfg: &AlignConfig, seed: u64, log_name: &str) -> Result<AlignSim, Error> {
    if !(1..=3).contains(&cfg.mounts) || cfg.headings < 3 || cfg.per_heading == 0 {
        return Err(Error::Usage(
            "align simulation: 1 to 3 mounts, ≥ 3 headings".into(),
        ));
    }
    let a = rotation_from_vector(&cfg.misalign_deg.map(f64::to_radians))
        * cfg.fault.matrix()
        * cfg.mag_planned;
    let noise =
        Normal::new(0.0, cfg.noise_nt.max(0.0)).map_err(|e| Error::Usage(format!("noise: {e}")))?;
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let csv = match (&cfg.gyro, cfg.tumble) {
        (Some(g), true) => tumble_rows(cfg, g, &a, &mut rng)?,
        (Some(g), false) => table_rows(cfg, g, &a, &mut rng)?,
        (None, true) => {
            return Err(Error::Usage(
                "align simulation: a hand tumble needs a gyro".into(),
            ))
        }
        (None, false) => table_only(cfg, &a, &noise, &mut rng),
    };
    Ok(AlignSim {
        csv,
        plan: plan_text(cfg, log_name),
        truth: AlignTruth {
            sensor_to_body: [0, 1, 2].map(|i| [a[(i, 0)], a[(i, 1)], a[(i, 2)]]),
            misalignment_deg: [cfg.misalign_deg.x, cfg.misalign_deg.y, cfg.misalign_deg.z],
            fault: cfg.fault,
            field_table_nt: [
                cfg.field_table_nt.x,
                cfg.field_table_nt.y,
                cfg.field_table_nt.z,
            ],
            hard_iron_nt: [cfg.hard_iron_nt.x, cfg.hard_iron_nt.y, cfg.hard_iron_nt.z],
            noise_nt: cfg.noise_nt,
            gyro: cfg.gyro.as_ref().map(GyroSim::truth),
        },
    })
}

/// The turntable without a gyro: `t, angle, mount, bx, by, bz`.
fn table_only(
    cfg: &AlignConfig,
    a: &Matrix3<f64>,
    noise: &Normal<f64>,
    rng: &mut rand::rngs::StdRng,
) -> String {
    let mut csv = String::from("t,angle [deg],mount,bx,by,bz\n");
    let mut t = 0.0;
    let all = mounts();
    for (label, m, _) in all.iter().take(cfg.mounts) {
        for k in 0..cfg.headings {
            let deg = 360.0 * k as f64 / cfg.headings as f64;
            let tt = rotation_from_vector(&Vector3::new(0.0, 0.0, deg.to_radians())) * m;
            for _ in 0..cfg.per_heading {
                let n = Vector3::from_fn(|_, _| noise.sample(rng));
                let s = a.transpose() * tt.transpose() * cfg.field_table_nt + cfg.hard_iron_nt + n;
                csv.push_str(&format!(
                    "{t:.2},{deg:.3},{label},{:.3},{:.3},{:.3}\n",
                    s.x, s.y, s.z
                ));
                t += 0.5;
            }
        }
    }
    csv
}

fn plan_text(cfg: &AlignConfig, log_name: &str) -> String {
    let m = cfg.mag_planned;
    let row = |i: usize| format!("[{}, {}, {}]", m[(i, 0)], m[(i, 1)], m[(i, 2)]);
    let mut p = format!(
        "[article]\nserial = \"{}\"\nbuild = \"{}\"\n\n\
         [magnetometer]\nsensor_to_body = [{}, {}, {}]\n\n",
        cfg.article.0,
        cfg.article.1,
        row(0),
        row(1),
        row(2)
    );
    if cfg.gyro.is_some() {
        p.push_str("[gyro]\nsensor_to_body = [\"+x\", \"+y\", \"+z\"]\n\n");
    }
    if cfg.tumble {
        p.push_str(&format!(
            "[[step]]\nkind = \"align\"\nlog = \"{log_name}\"\n"
        ));
        return p;
    }
    p.push_str("[align_test]\n");
    if cfg.reference_in_plan {
        let f = cfg.field_table_nt;
        p.push_str(&format!(
            "field_table_nt = [{:.1}, {:.1}, {:.1}]\n",
            f.x, f.y, f.z
        ));
    }
    for (label, _, axes) in mounts().iter().take(cfg.mounts) {
        p.push_str(&format!(
            "\n[[align_test.mount]]\nlabel = \"{label}\"\nbody_to_table = {axes}\n"
        ));
    }
    p.push_str(&format!(
        "\n[[step]]\nkind = \"align\"\nlog = \"{log_name}\"\n"
    ));
    p
}
