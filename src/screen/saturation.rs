//! Saturated readings (see `docs/reliability.md`): a value at or beyond the sensor's full-scale range, or
//! a value piled up at an axis's extreme (the sensor's rail). Such rows are flagged and
//! left out of fits, never silently used.
//!
//! Rail detection without a stated range is a heuristic of our own: clipping stacks many
//! readings on one extreme value, while an unclipped signal visits its extreme briefly.
//! An axis's maximum (or minimum) is taken as a rail when at least
//! `max(5, 0.2 % of N)` readings sit exactly on it and it holds at least four times as
//! many readings as any other single value among the 5 % of readings nearest that end.

use std::collections::HashMap;
use std::path::Path;

use rayon::prelude::*;

use crate::log::SweepLog;
use crate::Error;

/// Why a reading was flagged.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SaturationCause {
    /// |value| at or beyond the stated full-scale range.
    BeyondRange,
    /// Piled up on the axis's extreme value.
    Rail,
}

/// Saturation found on one axis.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisSaturation {
    /// Axis index (0 = x, 1 = y, 2 = z), sensor frame.
    pub axis: usize,
    /// Readings flagged on this axis.
    pub count: usize,
    /// The rail value or range, nT.
    pub level_nt: f64,
    /// Why.
    pub cause: SaturationCause,
}

/// Flags per row (true = saturated on some axis) and what was found per axis.
#[derive(Debug, Clone, Default)]
pub struct SaturationReport {
    /// One flag per row.
    pub flagged: Vec<bool>,
    /// Findings per axis.
    pub axes: Vec<AxisSaturation>,
    /// Rows flagged on each axis (x, y, z), whatever the cause.
    pub rows_per_axis: [usize; 3],
}

impl SaturationReport {
    /// Rows flagged.
    pub fn count(&self) -> usize {
        self.flagged.iter().filter(|f| **f).count()
    }

    /// Refuse (`Error::Degenerate`) when every row of some axis is flagged: nothing of
    /// that axis is left to use.
    pub fn refuse_if_axis_saturated(&self, path: &Path) -> Result<(), Error> {
        let n = self.flagged.len();
        if n == 0 {
            return Ok(());
        }
        for (axis, &rows) in self.rows_per_axis.iter().enumerate() {
            if rows < n {
                continue;
            }
            let levels: Vec<String> = self
                .axes
                .iter()
                .filter(|a| a.axis == axis)
                .map(|a| match a.cause {
                    SaturationCause::BeyondRange => format!("at or beyond ±{} nT", a.level_nt),
                    SaturationCause::Rail => format!("on the rail {} nT", a.level_nt),
                })
                .collect();
            return Err(Error::Degenerate(format!(
                "{}: every one of the {n} readings of sensor {} is saturated ({}): nothing \
                 usable is left on that axis; check the sensor's full-scale range (given, or \
                 [magnetometer] range_nt in the plan), the field unit, or whether the axis is stuck",
                path.display(),
                AXIS_NAMES.get(axis).copied().unwrap_or("?"),
                levels.join(", ")
            )));
        }
        Ok(())
    }
}

const AXIS_NAMES: [&str; 3] = ["x", "y", "z"];

/// Screen a log for saturation: flag rows (range from `range_nt`, else the rail
/// heuristic only), refuse when an axis is saturated throughout. `None` without a
/// field.
pub fn screen_log(log: &SweepLog, range_nt: Option<f64>) -> Result<SaturationReport, Error> {
    let Some(b) = log.b_nt.as_ref() else {
        return Ok(SaturationReport::default());
    };
    let report = find_saturation(b, range_nt);
    report.refuse_if_axis_saturated(&log.path)?;
    Ok(report)
}

/// A copy of `log` without the rows where `drop` is true (per-row columns only).
pub fn without_rows(log: &SweepLog, drop: &[bool]) -> SweepLog {
    let keep = |i: usize| !drop.get(i).copied().unwrap_or(false);
    fn pick<T: Clone>(v: &[T], keep: &dyn Fn(usize) -> bool) -> Vec<T> {
        v.iter()
            .enumerate()
            .filter(|(i, _)| keep(*i))
            .map(|(_, x)| x.clone())
            .collect()
    }
    let pick3 = |c: &[Vec<f64>; 3]| [pick(&c[0], &keep), pick(&c[1], &keep), pick(&c[2], &keep)];
    let mut out = log.clone();
    out.t_s = log.t_s.as_ref().map(|v| pick(v, &keep));
    out.b_nt = log.b_nt.as_ref().map(pick3);
    out.h_nt = log.h_nt.as_ref().map(pick3);
    out.temp_c = log.temp_c.as_ref().map(|v| pick(v, &keep));
    out.current_a = log.current_a.as_ref().map(|v| pick(v, &keep));
    for c in &mut out.commands {
        c.values = pick(&c.values, &keep);
    }
    out.angle_rad = log.angle_rad.as_ref().map(|v| pick(v, &keep));
    out.mount = log.mount.as_ref().map(|v| pick(v, &keep));
    out.probe_m = log.probe_m.as_ref().map(pick3);
    out.lines = log
        .lines
        .iter()
        .enumerate()
        .filter(|(i, _)| keep(*i))
        .map(|(_, l)| l)
        .collect();
    out
}

/// Flag saturated readings of the three field columns `b_nt` (sensor frame, nT).
/// `range_nt` is the full-scale range per axis when known.
pub fn find_saturation(b_nt: &[Vec<f64>; 3], range_nt: Option<f64>) -> SaturationReport {
    let n = b_nt[0].len();
    let mut report = SaturationReport {
        flagged: vec![false; n],
        axes: Vec::new(),
        rows_per_axis: [0; 3],
    };
    // Rows flagged on the current axis; cleared and counted only on an axis that
    // flagged something (a clean million-row log then costs no pass over it).
    let mut on_axis = vec![false; n];
    let mut dirty = false;
    for (axis, col) in b_nt.iter().enumerate() {
        if dirty {
            on_axis.iter_mut().for_each(|f| *f = false);
            dirty = false;
        }
        let ext = Extremes::of(col);
        if let Some(range) = range_nt {
            let mut count = 0;
            for (i, v) in col.iter().enumerate() {
                if v.abs() >= range {
                    report.flagged[i] = true;
                    on_axis[i] = true;
                    count += 1;
                }
            }
            if count > 0 {
                dirty = true;
                report.axes.push(AxisSaturation {
                    axis,
                    count,
                    level_nt: range,
                    cause: SaturationCause::BeyondRange,
                });
            }
        }
        for high in [true, false] {
            if let Some(level) = rail_value(col, high, &ext) {
                let mut count = 0;
                for (i, v) in col.iter().enumerate() {
                    if v.to_bits() == level.to_bits() {
                        report.flagged[i] = true;
                        on_axis[i] = true;
                        count += 1;
                    }
                }
                dirty |= count > 0;
                report.axes.push(AxisSaturation {
                    axis,
                    count,
                    level_nt: level,
                    cause: SaturationCause::Rail,
                });
            }
        }
        if dirty {
            report.rows_per_axis[axis] = on_axis.iter().filter(|f| **f).count();
        }
    }
    report
}

/// Largest and smallest reading of a column and how many readings equal each
/// (bit for bit); found in one pass, in parallel chunks on long columns.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Extremes {
    max: f64,
    at_max: usize,
    min: f64,
    at_min: usize,
}

impl Extremes {
    const EMPTY: Extremes = Extremes {
        max: f64::NEG_INFINITY,
        at_max: 0,
        min: f64::INFINITY,
        at_min: 0,
    };

    fn of(col: &[f64]) -> Extremes {
        let one = |e: Extremes, &v: &f64| {
            if v.is_nan() {
                e
            } else {
                e.merge(Extremes {
                    max: v,
                    at_max: 1,
                    min: v,
                    at_min: 1,
                })
            }
        };
        col.par_chunks(65_536)
            .map(|ch| ch.iter().fold(Extremes::EMPTY, one))
            .reduce(|| Extremes::EMPTY, Extremes::merge)
    }

    /// Combine two parts (NaN readings are skipped by [`Extremes::of`]); equal
    /// extremes are compared bit for bit, like the rail test.
    fn merge(self, o: Extremes) -> Extremes {
        let (max, at_max) = if o.max > self.max || self.at_max == 0 {
            (o.max, o.at_max)
        } else if o.max.to_bits() == self.max.to_bits() {
            (self.max, self.at_max + o.at_max)
        } else {
            (self.max, self.at_max)
        };
        let (min, at_min) = if o.min < self.min || self.at_min == 0 {
            (o.min, o.at_min)
        } else if o.min.to_bits() == self.min.to_bits() {
            (self.min, self.at_min + o.at_min)
        } else {
            (self.min, self.at_min)
        };
        Extremes {
            max,
            at_max,
            min,
            at_min,
        }
    }
}

fn rail_value(col: &[f64], high: bool, ext: &Extremes) -> Option<f64> {
    let n = col.len();
    if n < 20 {
        return None;
    }
    let (extreme, at_extreme) = if high {
        (ext.max, ext.at_max)
    } else {
        (ext.min, ext.at_min)
    };
    // A constant axis is not clipped but stuck or idle: the fits refuse it by name.
    if at_extreme == n {
        return None;
    }
    let needed = 5usize.max(n / 500);
    if at_extreme < needed {
        return None;
    }
    // The 5 % of readings nearest this end, by value.
    let mut sorted: Vec<f64> = col.to_vec();
    sorted.sort_by(|a, b| a.total_cmp(b));
    let k = (n / 20).max(needed + 1).min(n);
    let tail: &[f64] = if high { &sorted[n - k..] } else { &sorted[..k] };
    let mut counts: HashMap<u64, usize> = HashMap::new();
    for v in tail {
        *counts.entry(v.to_bits()).or_default() += 1;
    }
    let runner_up = counts
        .iter()
        .filter(|(bits, _)| **bits != extreme.to_bits())
        .map(|(_, c)| *c)
        .max()
        .unwrap_or(0);
    (at_extreme >= 4 * runner_up.max(1)).then_some(extreme)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sine(n: usize, amp: f64, clip: f64) -> Vec<f64> {
        (0..n)
            .map(|i| (amp * (i as f64 * 0.01).sin()).clamp(-clip, clip))
            .collect()
    }

    #[test]
    fn extremes_in_parallel_equal_a_plain_scan() {
        // A long column with repeated extremes spread over many chunks.
        let col: Vec<f64> = (0..300_000)
            .map(|i| {
                if i % 9973 == 0 {
                    7.5
                } else if i % 7919 == 0 {
                    -3.25
                } else {
                    ((i * 37) % 1000) as f64 / 1000.0
                }
            })
            .collect();
        let max = col.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let min = col.iter().copied().fold(f64::INFINITY, f64::min);
        let want = Extremes {
            max,
            at_max: col.iter().filter(|v| v.to_bits() == max.to_bits()).count(),
            min,
            at_min: col.iter().filter(|v| v.to_bits() == min.to_bits()).count(),
        };
        assert_eq!(Extremes::of(&col), want);
        assert_eq!((want.at_max, want.at_min), (31, 37));
        assert_eq!(Extremes::of(&[]), Extremes::EMPTY);
    }

    #[test]
    fn clipped_axis_is_flagged_as_rail() {
        let b = [
            sine(5000, 60_000.0, 50_000.0),
            sine(5000, 1000.0, 1e9),
            sine(5000, 1000.0, 1e9),
        ];
        let r = find_saturation(&b, None);
        assert!(r.count() > 100, "{r:?}");
        assert!(r
            .axes
            .iter()
            .all(|a| a.axis == 0 && a.cause == SaturationCause::Rail));
    }

    #[test]
    fn clean_signal_is_not_flagged_even_when_quantised() {
        // 13 nT quantisation, slow signal: the peak is visited by several samples, but
        // not piled up far beyond its neighbours.
        let q = |v: f64| (v / 13.0).round() * 13.0;
        let b = [
            sine(5000, 40_000.0, 1e9).into_iter().map(q).collect(),
            sine(5000, 20_000.0, 1e9).into_iter().map(q).collect(),
            sine(5000, 30_000.0, 1e9).into_iter().map(q).collect(),
        ];
        let r = find_saturation(&b, None);
        assert_eq!(r.count(), 0, "{:?}", r.axes);
    }

    #[test]
    fn range_flags_readings_at_or_beyond_it() {
        let b = [
            vec![1.0, 80_000.0, -80_000.0, 5.0],
            vec![0.0; 4],
            vec![0.0; 4],
        ];
        let r = find_saturation(&b, Some(80_000.0));
        assert_eq!(r.flagged, vec![false, true, true, false]);
    }
}
