//! Synthetic residual-dipole tests with known truth: a turntable run (article turned
//! through full turns under each mount, probe fixed) or a static map (article fixed,
//! probe moved), each with article-absent background segments, a uniform ambient field
//! drifting linearly in time, and Gaussian probe noise. Writes a sweep log (CSV), a test
//! plan (TOML) and the truth (JSON).
//!
//! The article's field comes from the same point-dipole law the fit uses
//! ([`crate::physics::dipole`]); the fit's own forward model is checked separately
//! against magpylib (tests/data/dipole_turntable_reference.json).

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use nalgebra::{Matrix3, Vector3};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use crate::fit::dipole::{model_field_nt, DipoleSample};
use crate::physics::frames::rotation_z;
use crate::Error;

/// A mount of the simulated article.
#[derive(Debug, Clone)]
pub struct SimMount {
    /// Label in the log's `mount` column.
    pub label: String,
    /// Rotation body → table at angle zero.
    pub body_to_table: Matrix3<f64>,
}

/// A torque rod written into the plan (for the residual-fraction output).
#[derive(Debug, Clone)]
pub struct SimRod {
    /// Rod name.
    pub name: String,
    /// Positive dipole direction, body frame.
    pub axis_body: Vector3<f64>,
    /// Nominal dipole per command unit, A·m².
    pub dipole_per_command_am2: f64,
}

/// What the article, the room and the probe are like (both methods).
#[derive(Debug, Clone)]
pub struct SimArticle {
    /// True moment, body frame, A·m².
    pub moment_body_am2: Vector3<f64>,
    /// True dipole position, body frame relative to the body point at the table origin, m.
    pub offset_body_m: Vector3<f64>,
    /// Ambient field at t = 0, table frame, nT.
    pub ambient_nt: Vector3<f64>,
    /// Linear drift of the ambient field, nT/s.
    pub drift_nt_per_s: Vector3<f64>,
    /// Probe noise, 1σ per axis, nT.
    pub noise_nt: f64,
    /// Time between samples, s.
    pub sample_interval_s: f64,
    /// Samples in each background segment.
    pub background_samples: usize,
    /// `limits.residual_dipole_max_am2` written into the plan.
    pub limit_am2: Option<f64>,
    /// Rods written into the plan.
    pub rods: Vec<SimRod>,
}

impl Default for SimArticle {
    fn default() -> Self {
        Self {
            moment_body_am2: Vector3::new(0.012, -0.007, 0.009),
            offset_body_m: Vector3::zeros(),
            ambient_nt: Vector3::new(21_400.0, -1_150.0, 43_800.0),
            drift_nt_per_s: Vector3::new(0.04, -0.02, 0.03),
            noise_nt: 0.5,
            sample_interval_s: 1.0,
            background_samples: 30,
            limit_am2: Some(0.05),
            rods: vec![SimRod {
                name: "x".into(),
                axis_body: Vector3::x(),
                dipole_per_command_am2: 0.2,
            }],
        }
    }
}

/// A turntable run.
#[derive(Debug, Clone)]
pub struct TurntableConfig {
    /// Article, room and probe.
    pub article: SimArticle,
    /// Probe position, table frame, m.
    pub probe_position_m: Vector3<f64>,
    /// Mounts, run in order, each for one full turn; background before, between, after.
    pub mounts: Vec<SimMount>,
    /// Table step, deg (positive, dividing the turn into at least 4 steps).
    pub step_deg: f64,
    /// Samples at each table angle.
    pub samples_per_step: usize,
}

impl Default for TurntableConfig {
    fn default() -> Self {
        Self {
            article: SimArticle::default(),
            probe_position_m: Vector3::new(0.6, 0.0, 0.0),
            mounts: vec![
                SimMount {
                    label: "upright".into(),
                    body_to_table: Matrix3::identity(),
                },
                SimMount {
                    label: "on-side".into(),
                    body_to_table: Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0),
                },
            ],
            step_deg: 15.0,
            samples_per_step: 3,
        }
    }
}

/// A static map: the article fixed under one mount, the probe at several positions.
#[derive(Debug, Clone)]
pub struct StaticConfig {
    /// Article, room and probe.
    pub article: SimArticle,
    /// The article's mount.
    pub mount: SimMount,
    /// Probe positions, table frame, m.
    pub positions_m: Vec<Vector3<f64>>,
    /// Samples at each position.
    pub samples_per_position: usize,
    /// Spatial gradient of the ambient field, nT/m: ambient(p) = ambient + G · p.
    pub ambient_gradient_nt_per_m: Matrix3<f64>,
    /// Background rows at every position (a pass before and after the article is in
    /// place); otherwise only at the first position.
    pub background_at_each_position: bool,
}

impl Default for StaticConfig {
    fn default() -> Self {
        let d = 0.7;
        Self {
            article: SimArticle::default(),
            mount: SimMount {
                label: "fixed".into(),
                body_to_table: Matrix3::identity(),
            },
            positions_m: vec![
                Vector3::new(d, 0.0, 0.0),
                Vector3::new(-d, 0.0, 0.0),
                Vector3::new(0.0, d, 0.0),
                Vector3::new(0.0, -d, 0.0),
                Vector3::new(0.0, 0.0, d),
                Vector3::new(0.0, 0.0, -d),
            ],
            samples_per_position: 20,
            ambient_gradient_nt_per_m: Matrix3::zeros(),
            background_at_each_position: true,
        }
    }
}

/// The truth behind a simulated log.
#[derive(Debug, Clone, Serialize)]
pub struct DipoleTruth {
    /// "turntable" or "static".
    pub method: String,
    /// True moment, body frame, A·m².
    pub moment_body_am2: [f64; 3],
    /// True |m|, A·m².
    pub magnitude_am2: f64,
    /// True dipole position, body frame, m.
    pub offset_body_m: [f64; 3],
    /// Ambient field at t = 0, nT.
    pub ambient_nt: [f64; 3],
    /// Drift, nT/s.
    pub drift_nt_per_s: [f64; 3],
    /// Probe noise 1σ, nT.
    pub noise_nt: f64,
    /// Random seed.
    pub seed: u64,
    /// Rows written.
    pub rows: usize,
}

/// A simulated log with its plan and truth.
#[derive(Debug, Clone)]
pub struct DipoleSim {
    /// The sweep log, CSV text.
    pub log_csv: String,
    /// The test plan, TOML text (its `[[step]]` names `<stem>.csv`).
    pub plan_toml: String,
    /// The truth.
    pub truth: DipoleTruth,
    stem: String,
}

/// Paths written by [`DipoleSim::write_to`].
#[derive(Debug, Clone)]
pub struct DipoleSimFiles {
    /// `<stem>.csv`.
    pub log: PathBuf,
    /// `<stem>-plan.toml`.
    pub plan: PathBuf,
    /// `<stem>-truth.json`.
    pub truth: PathBuf,
}

impl DipoleSim {
    /// Write `<stem>.csv`, `<stem>-plan.toml` and `<stem>-truth.json` into `dir`
    /// (created if absent). The stem is "dipole-turntable" or "dipole-static".
    pub fn write_to(&self, dir: &Path) -> Result<DipoleSimFiles, Error> {
        std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
        let files = DipoleSimFiles {
            log: dir.join(format!("{}.csv", self.stem)),
            plan: dir.join(format!("{}-plan.toml", self.stem)),
            truth: dir.join(format!("{}-truth.json", self.stem)),
        };
        let truth = serde_json::to_string_pretty(&self.truth)
            .map_err(|e| Error::Internal(format!("truth JSON: {e}")))?;
        for (path, text) in [
            (&files.log, &self.log_csv),
            (&files.plan, &self.plan_toml),
            (&files.truth, &truth),
        ] {
            std::fs::write(path, text).map_err(|e| Error::io(path, e))?;
        }
        Ok(files)
    }
}

struct Writer<'a> {
    art: &'a SimArticle,
    rng: StdRng,
    noise: Normal<f64>,
    t_s: f64,
    rows: usize,
    csv: String,
}

impl Writer<'_> {
    /// One row: article field (if any) + drifting ambient + noise.
    fn row(&mut self, article_nt: Vector3<f64>, extra: &str, label: &str) {
        let b = article_nt
            + self.art.ambient_nt
            + self.art.drift_nt_per_s * self.t_s
            + Vector3::from_fn(|_, _| self.noise.sample(&mut self.rng));
        let _ = writeln!(
            self.csv,
            "{:.3},{:.3},{:.3},{:.3},{extra},{label}",
            self.t_s, b.x, b.y, b.z
        );
        self.t_s += self.art.sample_interval_s;
        self.rows += 1;
    }

    fn background(&mut self, extra: &str) {
        self.background_with(Vector3::zeros(), extra);
    }

    /// A background segment with a position-dependent ambient part `ambient_nt`.
    fn background_with(&mut self, ambient_nt: Vector3<f64>, extra: &str) {
        for _ in 0..self.art.background_samples {
            self.row(ambient_nt, extra, "none");
        }
    }
}

fn validate(art: &SimArticle) -> Result<Normal<f64>, Error> {
    let bad = |what: &str| Err(Error::Usage(format!("simulation: {what}")));
    if !(art.sample_interval_s.is_finite() && art.sample_interval_s > 0.0) {
        return bad("sample_interval_s must be positive");
    }
    if art.background_samples == 0 {
        return bad("background_samples must be at least 1");
    }
    Normal::new(0.0, art.noise_nt)
        .map_err(|_| Error::Usage("simulation: noise_nt must be finite and ≥ 0".into()))
}

fn writer<'a>(art: &'a SimArticle, seed: u64, header: &str) -> Result<Writer<'a>, Error> {
    Ok(Writer {
        art,
        noise: validate(art)?,
        rng: StdRng::seed_from_u64(seed),
        t_s: 0.0,
        rows: 0,
        csv: format!(
            "# synthetic residual-dipole log (magproof sim), seed {seed}\n\
             t [s],bx [nT],by [nT],bz [nT],{header},mount\n"
        ),
    })
}

fn field(
    art: &SimArticle,
    probe_m: Vector3<f64>,
    rot: Matrix3<f64>,
) -> Result<Vector3<f64>, Error> {
    let s = DipoleSample {
        probe_m,
        body_to_table: rot,
        b_nt: Vector3::zeros(),
    };
    model_field_nt(&s, &art.moment_body_am2, &art.offset_body_m).ok_or_else(|| {
        Error::Usage("simulation: a probe position coincides with the dipole".into())
    })
}

/// Simulate a turntable run (see the module doc).
pub fn simulate_turntable(cfg: &TurntableConfig, seed: u64) -> Result<DipoleSim, Error> {
    let steps = 360.0 / cfg.step_deg;
    if !(cfg.step_deg.is_finite() && steps >= 4.0) || cfg.samples_per_step == 0 {
        return Err(Error::Usage(
            "simulation: step_deg must divide the turn into ≥ 4 steps; samples_per_step ≥ 1".into(),
        ));
    }
    if cfg.mounts.is_empty() {
        return Err(Error::Usage("simulation: at least one mount".into()));
    }
    let mut w = writer(&cfg.article, seed, "angle [deg]")?;
    w.background("0.0");
    for m in &cfg.mounts {
        let n = steps.round() as usize;
        for k in 0..n {
            let angle_deg = k as f64 * cfg.step_deg;
            let rot = rotation_z(angle_deg.to_radians()) * m.body_to_table;
            let b = field(&cfg.article, cfg.probe_position_m, rot)?;
            for _ in 0..cfg.samples_per_step {
                w.row(b, &format!("{angle_deg:.3}"), &m.label);
            }
        }
        w.background("0.0");
    }
    let plan = plan_toml(
        &cfg.article,
        "dipole-turntable",
        Some(cfg.probe_position_m),
        &cfg.mounts,
    );
    finish(w, plan, "turntable", "dipole-turntable", seed)
}

/// Simulate a static map (see the module doc).
pub fn simulate_static(cfg: &StaticConfig, seed: u64) -> Result<DipoleSim, Error> {
    if cfg.positions_m.len() < 2 || cfg.samples_per_position == 0 {
        return Err(Error::Usage(
            "simulation: at least two probe positions and one sample at each".into(),
        ));
    }
    let mut w = writer(&cfg.article, seed, "px [m],py [m],pz [m]")?;
    let pos = |p: &Vector3<f64>| format!("{:.4},{:.4},{:.4}", p.x, p.y, p.z);
    let grad = cfg.ambient_gradient_nt_per_m;
    let bg_positions: &[Vector3<f64>] = if cfg.background_at_each_position {
        &cfg.positions_m
    } else {
        &cfg.positions_m[..1]
    };
    for p in bg_positions {
        w.background_with(grad * p, &pos(p));
    }
    for p in &cfg.positions_m {
        let b = field(&cfg.article, *p, cfg.mount.body_to_table)? + grad * p;
        for _ in 0..cfg.samples_per_position {
            w.row(b, &pos(p), &cfg.mount.label);
        }
    }
    for p in bg_positions {
        w.background_with(grad * p, &pos(p));
    }
    let plan = plan_toml(
        &cfg.article,
        "dipole-static",
        None,
        std::slice::from_ref(&cfg.mount),
    );
    finish(w, plan, "static", "dipole-static", seed)
}

fn finish(
    w: Writer<'_>,
    plan: String,
    method: &str,
    stem: &str,
    seed: u64,
) -> Result<DipoleSim, Error> {
    let art = w.art;
    Ok(DipoleSim {
        truth: DipoleTruth {
            method: method.into(),
            moment_body_am2: art.moment_body_am2.into(),
            magnitude_am2: art.moment_body_am2.norm(),
            offset_body_m: art.offset_body_m.into(),
            ambient_nt: art.ambient_nt.into(),
            drift_nt_per_s: art.drift_nt_per_s.into(),
            noise_nt: art.noise_nt,
            seed,
            rows: w.rows,
        },
        log_csv: w.csv,
        plan_toml: plan,
        stem: stem.into(),
    })
}

fn matrix_toml(m: &Matrix3<f64>) -> String {
    let row = |i: usize| format!("[{}, {}, {}]", m[(i, 0)], m[(i, 1)], m[(i, 2)]);
    format!("[{}, {}, {}]", row(0), row(1), row(2))
}

fn plan_toml(
    art: &SimArticle,
    stem: &str,
    probe: Option<Vector3<f64>>,
    mounts: &[SimMount],
) -> String {
    let mut s = String::from(
        "# synthetic test plan (magproof sim)\n[article]\nserial = \"SIM-1\"\nbuild = \"S1\"\n\n",
    );
    for r in &art.rods {
        let a = r.axis_body;
        let _ = writeln!(
            s,
            "[[rod]]\nname = \"{}\"\naxis_body = [{}, {}, {}]\nposition_m = [0.0, 0.0, 0.0]\n\
             dipole_per_command_am2 = {}\n",
            r.name, a.x, a.y, a.z, r.dipole_per_command_am2
        );
    }
    s.push_str("[dipole_test]\n");
    if let Some(p) = probe {
        let _ = writeln!(s, "probe_position_m = [{}, {}, {}]", p.x, p.y, p.z);
    }
    for m in mounts {
        let _ = writeln!(
            s,
            "[[dipole_test.mount]]\nlabel = \"{}\"\nbody_to_table = {}",
            m.label,
            matrix_toml(&m.body_to_table)
        );
    }
    let _ = writeln!(s, "\n[[step]]\nkind = \"dipole\"\nlog = \"{stem}.csv\"");
    if let Some(l) = art.limit_am2 {
        let _ = writeln!(s, "\n[limits]\nresidual_dipole_max_am2 = {l}");
    }
    s
}
