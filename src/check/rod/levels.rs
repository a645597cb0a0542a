//! Current levels matched across stations, the settled field of each (background
//! removed, rod frame), and the moment of each level by weighted least squares over the
//! stations with the finite-rod model along the rod's axis (the point dipole across it).

use nalgebra::{Matrix3, Vector3};

use super::steps::{mean_field, BenchLog, StationBackground, Step};
use crate::log::RodBench;
use crate::physics::dipole::dipole_matrix;
use crate::physics::finite_rod::FiniteRod;
use crate::Error;

/// One level's settled field at one station, rod frame, nT, with its isotropic 1σ.
#[derive(Debug, Clone, Copy)]
pub struct StationField {
    /// Field minus background, rod frame, nT.
    pub b_nt: Vector3<f64>,
    /// 1σ per axis (isotropic), nT.
    pub sigma_nt: f64,
}

/// A current level: the steps of every station that share its place in the sequence.
#[derive(Debug, Clone)]
pub struct Level {
    /// Mean current over the stations, A.
    pub current_a: f64,
    /// Rod off.
    pub off: bool,
    /// Sign of the last driven level before this one: +1, −1, or 0 before any.
    pub after_sign: i8,
    /// Step index per station.
    pub steps: Vec<usize>,
    /// Field per station.
    pub fields: Vec<StationField>,
    /// Fitted moment, rod frame, A·m².
    pub moment_am2: Vector3<f64>,
    /// Covariance of the moment, (A·m²)².
    pub moment_cov: Matrix3<f64>,
}

/// The measurement steps of each station (its two background steps left out), matched
/// by their place in the sequence; every station must run the same staircase.
pub fn match_levels(
    bench: &RodBench,
    steps: &[Step],
    backgrounds: &[Option<StationBackground>],
    tol_a: f64,
) -> Result<Vec<Level>, Error> {
    let per_station: Vec<Vec<usize>> = (0..bench.positions.len())
        .map(|s| {
            let bg = backgrounds[s].as_ref().map(|b| b.steps);
            (0..steps.len())
                .filter(|&k| steps[k].station == s && !bg.is_some_and(|b| b.contains(&k)))
                .collect()
        })
        .collect();
    let used: Vec<usize> = (0..per_station.len())
        .filter(|&s| backgrounds[s].is_some())
        .collect();
    let Some(&first) = used.first() else {
        return Err(Error::Degenerate(
            "no station has a rod-off segment: the background cannot be told from the rod's \
             field; record rod-off rows at the start and the end of each station"
                .into(),
        ));
    };
    let count = per_station[first].len();
    for &s in &used {
        let label = &bench.positions[s].label;
        if per_station[s].len() != count {
            return Err(Error::Degenerate(format!(
                "station \"{label}\" has {} current steps, station \"{}\" {count}: every \
                 station must run the same staircase",
                per_station[s].len(),
                bench.positions[first].label
            )));
        }
        for (j, (&a, &b)) in per_station[s].iter().zip(&per_station[first]).enumerate() {
            if (steps[a].current_a - steps[b].current_a).abs() > 2.0 * tol_a {
                return Err(Error::Degenerate(format!(
                    "step {} at station \"{label}\" is at {:.4} A, at station \"{}\" {:.4} A: \
                     every station must run the same staircase",
                    j + 1,
                    steps[a].current_a,
                    bench.positions[first].label,
                    steps[b].current_a
                )));
            }
        }
    }
    let mut levels = Vec::with_capacity(count);
    let mut last_sign = 0;
    #[allow(clippy::needless_range_loop)] // j indexes every station's list at once
    for j in 0..count {
        let ks: Vec<usize> = used.iter().map(|&s| per_station[s][j]).collect();
        let current_a = ks.iter().map(|&k| steps[k].current_a).sum::<f64>() / ks.len() as f64;
        let off = current_a.abs() <= tol_a;
        levels.push(Level {
            current_a,
            off,
            after_sign: last_sign,
            steps: ks,
            fields: Vec::new(),
            moment_am2: Vector3::zeros(),
            moment_cov: Matrix3::zeros(),
        });
        if !off {
            last_sign = if current_a > 0.0 { 1 } else { -1 };
        }
    }
    if levels.iter().filter(|l| !l.off).count() < 2 {
        return Err(Error::Degenerate(
            "fewer than two driven current levels: the moment per ampere needs a staircase".into(),
        ));
    }
    Ok(levels)
}

/// Settled rows of a step: from `settle_s` after its start, at least the first row left
/// out; the last half when the settling takes more.
pub fn settled_rows(bl: &BenchLog, step: &Step, settle_s: f64) -> std::ops::Range<usize> {
    let r = step.rows.clone();
    let t0 = bl.t_s[r.start];
    let from = (r.start + 1..r.end)
        .find(|&i| bl.t_s[i] - t0 >= settle_s)
        .unwrap_or(r.end);
    if r.end - from >= 2 {
        from..r.end
    } else {
        (r.start + r.len() / 2)..r.end
    }
}

/// Fill each level's station fields and fitted moment.
pub fn fit_levels(
    bl: &BenchLog,
    bench: &RodBench,
    rod: &FiniteRod,
    steps: &[Step],
    backgrounds: &[Option<StationBackground>],
    levels: &mut [Level],
    settle_s: f64,
) -> Result<usize, Error> {
    let mut rows_used = 0;
    for level in levels.iter_mut() {
        let mut normal = Matrix3::zeros();
        let mut rhs = Vector3::zeros();
        let mut designs = Vec::with_capacity(level.steps.len());
        for &k in &level.steps {
            let step = &steps[k];
            let pos = &bench.positions[step.station];
            let bg = backgrounds[step.station]
                .as_ref()
                .ok_or_else(|| Error::Internal("a level at a station with no background".into()))?;
            let rows = settled_rows(bl, step, settle_s);
            rows_used += rows.len();
            let (_, sig, _) = mean_field(bl, rows.clone());
            let n = rows.len() as f64;
            let mean = rows
                .clone()
                .map(|i| bl.field(i) - bg.at(bl.t_s[i]))
                .sum::<Vector3<f64>>()
                / n;
            let sigma = (sig.max().powi(2) + bg.sigma_nt.max().powi(2))
                .sqrt()
                .max(1e-12);
            let field = StationField {
                b_nt: pos.probe_to_rod * mean,
                sigma_nt: sigma,
            };
            let g = design(rod, &pos.position_m)?;
            normal += g.transpose() * g / (sigma * sigma);
            rhs += g.transpose() * field.b_nt / (sigma * sigma);
            designs.push(g);
            level.fields.push(field);
        }
        let cov = normal.try_inverse().ok_or_else(|| {
            Error::Degenerate(
                "the stations cannot resolve the rod's moment (singular design)".into(),
            )
        })?;
        let m = cov * rhs;
        let chi2: f64 = designs
            .iter()
            .zip(&level.fields)
            .map(|(g, f)| ((f.b_nt - g * m).norm() / f.sigma_nt).powi(2))
            .sum();
        let dof = 3 * designs.len() as i64 - 3;
        let birge = if dof > 0 {
            (chi2 / dof as f64).max(1.0)
        } else {
            1.0
        };
        level.moment_am2 = m;
        level.moment_cov = cov * birge;
    }
    Ok(rows_used)
}

/// B = G·m at a station (rod frame): the finite rod along the axis (column z), the point
/// dipole across it (columns x, y).
fn design(rod: &FiniteRod, r_m: &Vector3<f64>) -> Result<Matrix3<f64>, Error> {
    let dip = dipole_matrix(r_m)
        .ok_or_else(|| Error::Degenerate("a station at the rod's centre".into()))?;
    let axial = rod
        .field_nt(1.0, r_m)
        .ok_or_else(|| Error::Degenerate("a station on the rod's end face".into()))?;
    let mut g = dip;
    g.set_column(2, &axial);
    Ok(g)
}
