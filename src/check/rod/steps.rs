//! A bench log cut into steps: runs of rows at one station and one current level; the
//! rod-off background of each station (its first and last I = 0 steps, drift
//! interpolated linearly in time between them); and the settled, background-free field
//! of every step in the rod frame.

use nalgebra::Vector3;

use crate::log::{Plan, RodBench, SweepLog};
use crate::Error;

/// Shortest run of rows that counts as a step (shorter runs are transitions).
pub const MIN_STEP_ROWS: usize = 3;

/// One run of rows at one station and one current level.
#[derive(Debug, Clone)]
pub struct Step {
    /// Station index in the plan.
    pub station: usize,
    /// Rows `[first, end)` of the log.
    pub rows: std::ops::Range<usize>,
    /// Mean current, A.
    pub current_a: f64,
    /// True when the rod is off (|I| within the level tolerance of zero).
    pub off: bool,
}

/// The log's columns a bench needs, checked.
pub struct BenchLog<'a> {
    /// Time, s.
    pub t_s: &'a [f64],
    /// Current, A.
    pub current_a: &'a [f64],
    /// Probe field, probe frame, nT.
    pub b_nt: &'a [Vec<f64>; 3],
    /// Station index per row.
    pub station: Vec<usize>,
    /// Tolerance on a current level, A.
    pub level_tol_a: f64,
}

impl BenchLog<'_> {
    /// Probe field of row `i`, probe frame, nT.
    pub fn field(&self, i: usize) -> Vector3<f64> {
        Vector3::new(self.b_nt[0][i], self.b_nt[1][i], self.b_nt[2][i])
    }
}

/// Check the columns and map each row's `position` label to a plan station.
pub fn bench_log<'a>(
    log: &'a SweepLog,
    plan: &Plan,
    bench: &RodBench,
) -> Result<BenchLog<'a>, Error> {
    let t_s = log.require_time("the rod's background drift and time constant need time")?;
    let b_nt = log.require_field("the rod's moment comes from the probe field")?;
    let current_a = log.current_a.as_deref().ok_or_else(|| {
        Error::Log(crate::log::LogError::MissingColumn {
            path: crate::log::Shown(log.path.clone()),
            column: "i".into(),
            why: "the rod's current (A, or write `i [mA]`) gives each step's level".into(),
        })
    })?;
    let labels = log.mount.as_deref().ok_or_else(|| {
        Error::Log(crate::log::LogError::MissingColumn {
            path: crate::log::Shown(log.path.clone()),
            column: "position".into(),
            why: "each row's probe station, as labelled in [[rod_bench.position]]".into(),
        })
    })?;
    let mut map = Vec::with_capacity(log.mount_labels.len());
    for label in &log.mount_labels {
        map.push(bench.positions.iter().position(|p| &p.label == label));
    }
    let mut station = Vec::with_capacity(log.len());
    for (i, l) in labels.iter().enumerate() {
        let line = log.lines.get(i).unwrap_or(0);
        let s = l.and_then(|k| map.get(k as usize).copied().flatten());
        let Some(s) = s else {
            let found = l
                .and_then(|k| log.mount_labels.get(k as usize))
                .map_or("(empty)", String::as_str);
            let known: Vec<&str> = bench.positions.iter().map(|p| p.label.as_str()).collect();
            return Err(Error::Usage(format!(
                "{}:{line}: column \"position\": \"{found}\" is not a station of the plan {} \
                 (known: {})",
                log.path.display(),
                plan.path.display(),
                known.join(", ")
            )));
        };
        station.push(s);
    }
    let i_max = current_a.iter().fold(0.0_f64, |m, x| m.max(x.abs()));
    if i_max <= 0.0 || i_max.is_nan() {
        return Err(Error::Degenerate(format!(
            "{}: the current is zero throughout: the rod was never driven",
            log.path.display()
        )));
    }
    Ok(BenchLog {
        t_s,
        current_a,
        b_nt,
        station,
        level_tol_a: (0.01 * i_max).max(1e-6),
    })
}

/// Cut the log into steps; returns the steps and the count of transition rows left out.
pub fn cut_steps(bl: &BenchLog) -> (Vec<Step>, usize) {
    let n = bl.current_a.len();
    let mut steps = Vec::new();
    let mut dropped = 0;
    let mut start = 0;
    while start < n {
        let (s, i0) = (bl.station[start], bl.current_a[start]);
        let mut end = start + 1;
        while end < n && bl.station[end] == s && (bl.current_a[end] - i0).abs() <= bl.level_tol_a {
            end += 1;
        }
        if end - start >= MIN_STEP_ROWS {
            let mean = bl.current_a[start..end].iter().sum::<f64>() / (end - start) as f64;
            steps.push(Step {
                station: s,
                rows: start..end,
                current_a: mean,
                off: mean.abs() <= bl.level_tol_a,
            });
        } else {
            dropped += end - start;
        }
        start = end;
    }
    (steps, dropped)
}

/// Mean and 1σ of the mean of the probe field over rows, probe frame, nT.
pub fn mean_field(
    bl: &BenchLog,
    rows: impl Iterator<Item = usize> + Clone,
) -> (Vector3<f64>, Vector3<f64>, f64) {
    let n = rows.clone().count().max(1) as f64;
    let mean = rows.clone().map(|i| bl.field(i)).sum::<Vector3<f64>>() / n;
    let var = rows
        .map(|i| (bl.field(i) - mean).component_mul(&(bl.field(i) - mean)))
        .sum::<Vector3<f64>>()
        / (n - 1.0).max(1.0);
    (mean, (var / n).map(f64::sqrt), var.max().sqrt())
}

/// The rod-off background of one station: the means of its first and last rod-off
/// steps, interpolated linearly in time between them (held outside).
#[derive(Debug, Clone)]
pub struct StationBackground {
    /// (time, mean field probe frame nT) at the first and last rod-off steps.
    pub ends: [(f64, Vector3<f64>); 2],
    /// 1σ of each end's mean, per axis, nT.
    pub sigma_nt: Vector3<f64>,
    /// Indices (into the steps) of the two background steps (equal with one).
    pub steps: [usize; 2],
}

impl StationBackground {
    /// Background at time `t`, probe frame, nT.
    pub fn at(&self, t: f64) -> Vector3<f64> {
        let [(t0, b0), (t1, b1)] = self.ends;
        if t1 <= t0 {
            return b0;
        }
        let f = ((t - t0) / (t1 - t0)).clamp(0.0, 1.0);
        b0 + (b1 - b0) * f
    }
}

/// The background of each station from its first and last rod-off steps; `None` for a
/// station with no rod-off step.
pub fn backgrounds(
    bl: &BenchLog,
    steps: &[Step],
    stations: usize,
) -> Vec<Option<StationBackground>> {
    (0..stations)
        .map(|s| {
            let off: Vec<usize> = (0..steps.len())
                .filter(|&k| steps[k].station == s && steps[k].off)
                .collect();
            let (&first, &last) = (off.first()?, off.last()?);
            let end = |k: usize| {
                let r = steps[k].rows.clone();
                let (m, sig, _) = mean_field(bl, r.clone());
                let t = (bl.t_s[r.start] + bl.t_s[r.end - 1]) / 2.0;
                (t, m, sig)
            };
            let (a, b) = (end(first), end(last));
            Some(StationBackground {
                ends: [(a.0, a.1), (b.0, b.1)],
                sigma_nt: a.2.sup(&b.2),
                steps: [first, last],
            })
        })
        .collect()
}
