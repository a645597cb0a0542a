//! Synthetic coil-cage sweeps with known truth: the cage applies known fields h (cage
//! frame, nT) on a grid, and the magnetometer reads `b = A h + b₀ + n` (sensor frame),
//! with A the sensor's response matrix (gain, non-orthogonality, misalignment) and b₀
//! its hard iron (including the cage's residual field seen through A).

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use std::io::Write;

use nalgebra::{Matrix3, Vector3};
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use serde::Serialize;

use crate::Error;

/// Which applied fields the cage steps through.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum CageGrid {
    /// A cubic lattice of `per_axis`³ points from −max to +max on each axis.
    Cube {
        /// Points per axis (≥ 2).
        per_axis: usize,
        /// Largest applied component, nT.
        max_nt: f64,
    },
    /// Steps along each axis in turn (the others held at zero), `steps` per axis.
    Axes {
        /// Points per axis (≥ 2).
        steps: usize,
        /// Largest applied component, nT.
        max_nt: f64,
    },
    /// A square lattice in the x–y plane only (hz = 0): rank-deficient on purpose.
    PlaneXy {
        /// Points per axis (≥ 2).
        per_axis: usize,
        /// Largest applied component, nT.
        max_nt: f64,
    },
}

/// What to simulate.
#[derive(Debug, Clone)]
pub struct CageConfig {
    /// The grid of applied fields.
    pub grid: CageGrid,
    /// Readings per grid point.
    pub repeats: usize,
    /// True response matrix A (sensor reading per applied cage-frame field).
    pub response: Matrix3<f64>,
    /// True hard iron b₀, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// Gaussian noise per axis, 1σ, nT.
    pub noise_nt: f64,
}

impl Default for CageConfig {
    /// A 5×5×5 grid to ±60 µT, a sensor with 1–3 % gain errors, 0.3° non-orthogonality
    /// and a 1° misalignment.
    fn default() -> Self {
        let mis = nalgebra::Rotation3::from_euler_angles(
            0.4f64.to_radians(),
            -0.7f64.to_radians(),
            0.6f64.to_radians(),
        );
        let gain = Matrix3::new(1.02, 0.004, -0.003, 0.0, 0.985, 0.005, 0.0, 0.0, 1.03);
        CageConfig {
            grid: CageGrid::Cube {
                per_axis: 5,
                max_nt: 60_000.0,
            },
            repeats: 4,
            response: gain * mis.matrix(),
            hard_iron_nt: Vector3::new(-620.0, 1_480.0, 275.0),
            noise_nt: 30.0,
        }
    }
}

/// The truth behind a simulated sweep.
#[derive(Debug, Clone, Serialize)]
pub struct CageTruth {
    /// Response matrix A, rows.
    pub response: [[f64; 3]; 3],
    /// Correction W = A⁻¹, rows.
    pub soft_iron: [[f64; 3]; 3],
    /// Hard iron b₀, sensor frame, nT.
    pub hard_iron_nt: [f64; 3],
    /// Noise, 1σ per axis, nT.
    pub noise_nt: f64,
    /// Seed used.
    pub seed: u64,
}

/// A simulated sweep.
#[derive(Debug, Clone)]
pub struct CageSim {
    /// Time, s.
    pub t_s: Vec<f64>,
    /// Applied field, cage frame, nT.
    pub applied_nt: Vec<Vector3<f64>>,
    /// Readings, sensor frame, nT.
    pub samples_nt: Vec<Vector3<f64>>,
    /// The truth.
    pub truth: CageTruth,
}

fn rows(m: &Matrix3<f64>) -> [[f64; 3]; 3] {
    [0, 1, 2].map(|i| [m[(i, 0)], m[(i, 1)], m[(i, 2)]])
}

fn grid_points(grid: CageGrid) -> Result<Vec<Vector3<f64>>, Error> {
    let lin = |k: usize, n: usize, max: f64| -max + 2.0 * max * k as f64 / (n - 1) as f64;
    let (n, max) = match grid {
        CageGrid::Cube { per_axis, max_nt }
        | CageGrid::PlaneXy { per_axis, max_nt }
        | CageGrid::Axes {
            steps: per_axis,
            max_nt,
        } => (per_axis, max_nt),
    };
    if n < 2 || !(max.is_finite() && max > 0.0) {
        return Err(Error::Usage(
            "cage simulation: at least 2 points per axis and a positive field".into(),
        ));
    }
    let mut pts = Vec::new();
    match grid {
        CageGrid::Cube { .. } => {
            for i in 0..n {
                for j in 0..n {
                    for k in 0..n {
                        pts.push(Vector3::new(lin(i, n, max), lin(j, n, max), lin(k, n, max)));
                    }
                }
            }
        }
        CageGrid::PlaneXy { .. } => {
            for i in 0..n {
                for j in 0..n {
                    pts.push(Vector3::new(lin(i, n, max), lin(j, n, max), 0.0));
                }
            }
        }
        CageGrid::Axes { .. } => {
            for a in 0..3 {
                for i in 0..n {
                    let mut v = Vector3::zeros();
                    v[a] = lin(i, n, max);
                    pts.push(v);
                }
            }
        }
    }
    Ok(pts)
}

/// Simulate a cage sweep.
pub fn simulate_cage(cfg: &CageConfig, seed: u64) -> Result<CageSim, Error> {
    let Some(w) = cfg.response.try_inverse() else {
        return Err(Error::Usage(
            "cage simulation: response matrix is singular".into(),
        ));
    };
    if cfg.repeats == 0 {
        return Err(Error::Usage("cage simulation: repeats must be ≥ 1".into()));
    }
    let noise = Normal::new(0.0, cfg.noise_nt)
        .map_err(|e| Error::Usage(format!("cage simulation: noise: {e}")))?;
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let mut applied_nt = Vec::new();
    let mut samples_nt = Vec::new();
    for h in grid_points(cfg.grid)? {
        for _ in 0..cfg.repeats {
            let mut b = cfg.response * h + cfg.hard_iron_nt;
            for a in 0..3 {
                b[a] += noise.sample(&mut rng);
            }
            applied_nt.push(h);
            samples_nt.push(b);
        }
    }
    Ok(CageSim {
        t_s: (0..samples_nt.len()).map(|i| i as f64 * 0.5).collect(),
        applied_nt,
        samples_nt,
        truth: CageTruth {
            response: rows(&cfg.response),
            soft_iron: rows(&w),
            hard_iron_nt: cfg.hard_iron_nt.into(),
            noise_nt: cfg.noise_nt,
            seed,
        },
    })
}

/// Write a simulated sweep as a sweep log: `t [s], hx, hy, hz, bx, by, bz` (nT).
pub fn write_cage_csv(sim: &CageSim, mut out: impl Write) -> std::io::Result<()> {
    writeln!(
        out,
        "# simulated cage sweep (magproof sim), seed {}, noise {} nT",
        sim.truth.seed, sim.truth.noise_nt
    )?;
    writeln!(out, "t [s],hx [nT],hy [nT],hz [nT],bx [nT],by [nT],bz [nT]")?;
    for ((t, h), b) in sim.t_s.iter().zip(&sim.applied_nt).zip(&sim.samples_nt) {
        writeln!(
            out,
            "{t:.3},{:.3},{:.3},{:.3},{:.3},{:.3},{:.3}",
            h.x, h.y, h.z, b.x, b.y, b.z
        )?;
    }
    Ok(())
}
