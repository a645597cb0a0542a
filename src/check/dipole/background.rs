//! Ambient background for the dipole check: the mean field of each run of
//! article-absent rows (`mount` empty or `none`), interpolated linearly in time between
//! runs so that a slow drift of the room's field (or of the probe's offset) cancels.
//! Outside the first and last run the nearest run's mean is held (no extrapolation, which
//! would amplify noise); the check warns about rows there.

use nalgebra::Vector3;

use crate::log::RowLines;

/// One run of consecutive article-absent rows.
#[derive(Debug, Clone)]
pub struct BackgroundSegment {
    /// Mean time of the run, s.
    pub t_mean_s: f64,
    /// First and last time of the run, s.
    pub t_span_s: (f64, f64),
    /// Mean field over the run, probe (= table) frame, nT.
    pub mean_nt: Vector3<f64>,
    /// Standard deviation of the mean per component, nT (0 for a one-row run).
    pub sigma_mean_nt: Vector3<f64>,
    /// Rows in the run.
    pub rows: usize,
    /// File lines of its first and last row.
    pub lines: (u64, u64),
}

/// Background segments in time order.
#[derive(Debug, Clone)]
pub struct Background {
    /// The runs, in time order.
    pub segments: Vec<BackgroundSegment>,
}

impl Background {
    /// Background field at time `t_s`, nT: linear between the bracketing segments' mean
    /// times, the nearest segment's mean outside.
    pub fn at(&self, t_s: f64) -> Vector3<f64> {
        self.weights(t_s)
            .iter()
            .filter_map(|&(k, w)| Some(self.segments.get(k)?.mean_nt * w))
            .sum()
    }

    /// The segments that make the background at `t_s` and their weights (summing to 1),
    /// as used by [`Background::at`].
    pub fn weights(&self, t_s: f64) -> [(usize, f64); 2] {
        let segs = &self.segments;
        let last = segs.len().saturating_sub(1);
        match (segs.first(), segs.last()) {
            (Some(a), _) if t_s <= a.t_mean_s => [(0, 1.0), (0, 0.0)],
            (_, Some(b)) if t_s >= b.t_mean_s => [(last, 1.0), (last, 0.0)],
            (Some(_), Some(_)) => {
                let k = segs.partition_point(|s| s.t_mean_s <= t_s);
                match (segs.get(k.wrapping_sub(1)), segs.get(k)) {
                    (Some(a), Some(b)) if b.t_mean_s > a.t_mean_s => {
                        let w = (t_s - a.t_mean_s) / (b.t_mean_s - a.t_mean_s);
                        [(k - 1, 1.0 - w), (k, w)]
                    }
                    _ => [(k.saturating_sub(1), 1.0), (0, 0.0)],
                }
            }
            _ => [(0, 0.0), (0, 0.0)],
        }
    }

    /// Mean times of the first and last segment, s: inside this span drift is
    /// interpolated.
    pub fn span_s(&self) -> (f64, f64) {
        match (self.segments.first(), self.segments.last()) {
            (Some(a), Some(b)) => (a.t_mean_s, b.t_mean_s),
            _ => (0.0, 0.0),
        }
    }
}

/// Find the runs of article-absent rows (`mount[i] == None`) and average each. `None`
/// when there is no such row.
pub fn estimate_background(
    t_s: &[f64],
    mount: &[Option<u32>],
    b_nt: &[Vec<f64>; 3],
    lines: &RowLines,
) -> Option<Background> {
    let mut segments = Vec::new();
    let mut acc: Option<Accumulator> = None;
    for (i, m) in mount.iter().enumerate() {
        let row = (
            t_s.get(i),
            b_nt[0].get(i),
            b_nt[1].get(i),
            b_nt[2].get(i),
            lines.get(i),
        );
        match (m, row) {
            (None, (Some(&t), Some(&x), Some(&y), Some(&z), Some(line))) => {
                acc.get_or_insert_with(|| Accumulator::new(t, line)).push(
                    t,
                    Vector3::new(x, y, z),
                    line,
                );
            }
            _ => {
                if let Some(a) = acc.take() {
                    segments.push(a.finish());
                }
            }
        }
    }
    if let Some(a) = acc.take() {
        segments.push(a.finish());
    }
    (!segments.is_empty()).then_some(Background { segments })
}

/// Probe positions closer than this are the same position, m.
pub const SAME_POSITION_M: f64 = 2e-3;

fn position_key(x: f64, y: f64, z: f64) -> [i64; 3] {
    [x, y, z].map(|v| (v / SAME_POSITION_M).round() as i64)
}

/// Backgrounds for a static map: one per probe position that has article-absent rows
/// of its own (interpolated in time between that position's runs), so that field
/// gradients in the room cancel. Returns the position keys with their backgrounds.
pub fn estimate_position_backgrounds(
    t_s: &[f64],
    mount: &[Option<u32>],
    b_nt: &[Vec<f64>; 3],
    probe_m: &[Vec<f64>; 3],
    lines: &RowLines,
) -> Vec<([i64; 3], Background)> {
    let key_at = |i: usize| -> Option<[i64; 3]> {
        Some(position_key(
            *probe_m[0].get(i)?,
            *probe_m[1].get(i)?,
            *probe_m[2].get(i)?,
        ))
    };
    let mut keys: Vec<[i64; 3]> = Vec::new();
    for (i, m) in mount.iter().enumerate() {
        if let (None, Some(k)) = (m, key_at(i)) {
            if !keys.contains(&k) {
                keys.push(k);
            }
        }
    }
    let mut out = Vec::with_capacity(keys.len());
    let mut masked: Vec<Option<u32>> = Vec::with_capacity(mount.len());
    for key in keys {
        masked.clear();
        masked.extend(mount.iter().enumerate().map(|(i, m)| match m {
            None if key_at(i) == Some(key) => None,
            _ => Some(0),
        }));
        if let Some(bg) = estimate_background(t_s, &masked, b_nt, lines) {
            out.push((key, bg));
        }
    }
    out
}

/// The key of a probe position, for looking up [`estimate_position_backgrounds`].
pub fn position_key_of(p: &Vector3<f64>) -> [i64; 3] {
    position_key(p.x, p.y, p.z)
}

/// Running sums of one segment (Welford's update for the spread).
struct Accumulator {
    n: usize,
    t_sum: f64,
    t_first: f64,
    t_last: f64,
    mean: Vector3<f64>,
    m2: Vector3<f64>,
    first_line: u64,
    last_line: u64,
}

impl Accumulator {
    fn new(t: f64, line: u64) -> Self {
        Self {
            n: 0,
            t_sum: 0.0,
            t_first: t,
            t_last: t,
            mean: Vector3::zeros(),
            m2: Vector3::zeros(),
            first_line: line,
            last_line: line,
        }
    }

    fn push(&mut self, t: f64, b: Vector3<f64>, line: u64) {
        self.n += 1;
        self.t_sum += t;
        self.t_last = t;
        self.last_line = line;
        let d = b - self.mean;
        self.mean += d / self.n as f64;
        self.m2 += d.component_mul(&(b - self.mean));
    }

    fn finish(self) -> BackgroundSegment {
        let n = self.n.max(1) as f64;
        let sigma = if self.n > 1 {
            (self.m2 / ((n - 1.0) * n)).map(f64::sqrt)
        } else {
            Vector3::zeros()
        };
        BackgroundSegment {
            t_mean_s: self.t_sum / n,
            t_span_s: (self.t_first, self.t_last),
            mean_nt: self.mean,
            sigma_mean_nt: sigma,
            rows: self.n,
            lines: (self.first_line, self.last_line),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn linear_drift_is_interpolated_exactly_between_segments() {
        // Field drifts 2 nT/s on x; background rows at t = 0..4 and 20..24.
        let t: Vec<f64> = (0..25).map(f64::from).collect();
        let mount: Vec<Option<u32>> = t
            .iter()
            .map(|&t| {
                if !(5.0..20.0).contains(&t) {
                    None
                } else {
                    Some(0)
                }
            })
            .collect();
        let bx: Vec<f64> = t.iter().map(|t| 100.0 + 2.0 * t).collect();
        let b = [bx, vec![5.0; 25], vec![-3.0; 25]];
        let lines: RowLines = (2..27).collect();
        let bg = estimate_background(&t, &mount, &b, &lines).unwrap();
        assert_eq!(bg.segments.len(), 2);
        assert_eq!(bg.segments[1].lines, (22, 26));
        for tt in [2.0, 7.5, 12.0, 22.0] {
            assert_relative_eq!(
                bg.at(tt),
                Vector3::new(100.0 + 2.0 * tt, 5.0, -3.0),
                epsilon = 1e-9
            );
        }
        // Held, not extrapolated, outside the segment means.
        assert_relative_eq!(bg.at(30.0).x, 144.0, epsilon = 1e-9);
    }

    #[test]
    fn no_absent_row_gives_no_background() {
        let b = [vec![1.0], vec![2.0], vec![3.0]];
        assert!(estimate_background(&[0.0], &[Some(0)], &b, &RowLines::from_iter([2])).is_none());
    }
}
