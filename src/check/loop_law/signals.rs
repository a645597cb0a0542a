//! The body-frame signals of a loop test: the field from the raw readings (rod coupling
//! subtracted, calibration applied, the plan's mapping), its derivative by a smoothing
//! filter, and the body rate from the best source the log offers.
//!
//! Derivative: a local straight-line least-squares fit over a centred window of
//! `2h + 1` samples, the first-derivative Savitzky–Golay filter (Savitzky & Golay 1964),
//! written for uneven time steps. With white noise σ per axis and step Δt, its noise is
//! σ_Ḃ = σ √(12 / (n (n² − 1))) / Δt for n = 2h + 1, against σ√2/Δt for a plain
//! difference; its bias for a rotation at ω is about (ωnΔt)²/24 of the rate, small
//! while ωnΔt ≪ 1. Windows never span a mount change, a gap of more than five median
//! steps, or a row flagged as saturated; rows without a whole window are not used.
//!
//! Body rate, in order: the gyro (through `[gyro] sensor_to_body`), the turntable's
//! angle rate with the row's `[align_test]` mount, else the part perpendicular to B
//! from the field alone: with B fixed in space, Ḃ_body = −ω × B, so
//! ω⊥ = Ḃ × B / |B|² (the part along B leaves no trace in the field).

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

use super::warning::LoopWarning;
use super::LoopRequest;
use crate::check::align::Calibration;
use crate::Error;

/// Where the body rate came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RateSource {
    /// The gyro columns through `[gyro] sensor_to_body`.
    Gyro,
    /// The turntable angle's rate through the row's mount.
    Table,
    /// ω⊥ = Ḃ × B / |B|² from the field alone.
    FieldDerivative,
}

impl RateSource {
    /// Words for the terminal and report.
    pub fn words(self) -> &'static str {
        match self {
            RateSource::Gyro => "gyro (plan's [gyro] mapping)",
            RateSource::Table => "turntable angle rate (plan's [align_test] mounts)",
            RateSource::FieldDerivative => "field derivative, ω⊥ = Ḃ × B/|B|² (part ⊥ B only)",
        }
    }
}

/// Body-frame signals per row.
#[derive(Debug, Clone)]
pub struct Signals {
    /// Time, s.
    pub t_s: Vec<f64>,
    /// Field, body frame (B), nT.
    pub b_body_nt: Vec<Vector3<f64>>,
    /// Its derivative, body frame, nT/s (zero where not used).
    pub bdot_body_nt_s: Vec<Vector3<f64>>,
    /// Body rate, body frame, rad/s (zero where not used).
    pub rate_body_rad_s: Vec<Vector3<f64>>,
    /// Rows with a whole derivative window and a rate.
    pub used: Vec<bool>,
    /// The rate's source.
    pub rate_source: RateSource,
    /// Half-width of the derivative window, samples.
    pub half_window: usize,
}

/// Segment index per row: a new segment at a mount change or a gap of more than five
/// median steps.
fn segments(t: &[f64], mount: Option<&[Option<u32>]>) -> (Vec<usize>, f64) {
    let mut steps: Vec<f64> = t.windows(2).map(|w| w[1] - w[0]).collect();
    steps.sort_by(f64::total_cmp);
    let median = steps.get(steps.len() / 2).copied().unwrap_or(1.0).max(1e-9);
    let mut seg = vec![0usize; t.len()];
    for i in 1..t.len() {
        let changed = mount.is_some_and(|m| m[i] != m[i - 1]);
        let gap = t[i] - t[i - 1] > 5.0 * median || t[i] <= t[i - 1];
        seg[i] = seg[i - 1] + usize::from(changed || gap);
    }
    (seg, median)
}

/// The slope of `y` against `t` over rows `lo..=hi` (least squares), per unit time.
fn slope(t: &[f64], lo: usize, hi: usize, y: impl Fn(usize) -> f64) -> f64 {
    let n = (hi - lo + 1) as f64;
    let tm = (lo..=hi).map(|k| t[k]).sum::<f64>() / n;
    let ym = (lo..=hi).map(&y).sum::<f64>() / n;
    let (mut num, mut den) = (0.0, 0.0);
    for (k, tk) in t.iter().enumerate().take(hi + 1).skip(lo) {
        let dt = tk - tm;
        num += dt * (y(k) - ym);
        den += dt * dt;
    }
    if den > 0.0 {
        num / den
    } else {
        f64::NAN
    }
}

/// Whether row `i` has a whole window of half-width `h` in its segment, no flagged row.
fn window_ok(i: usize, h: usize, seg: &[usize], flagged: &[bool]) -> bool {
    i >= h
        && i + h < seg.len()
        && seg[i - h] == seg[i]
        && seg[i + h] == seg[i]
        && !flagged[i - h..=i + h].iter().any(|f| *f)
}

/// The field in the body frame per row: coupling subtracted, calibration applied, mapped.
fn body_field(
    req: &LoopRequest,
    b: &[Vec<f64>; 3],
    commands: &[Vec<f64>],
    sensor_to_body: &Matrix3<f64>,
) -> Vec<Vector3<f64>> {
    let plan_rods = req.plan.map(|p| p.rods.as_slice()).unwrap_or(&[]);
    let cal: Option<&Calibration> = req.options.calibration.as_ref();
    (0..b[0].len())
        .map(|i| {
            let mut s = Vector3::new(b[0][i], b[1][i], b[2][i]);
            for (rod, cmd) in plan_rods.iter().zip(commands) {
                if let Some(c) = rod.coupling_nt_per_command {
                    s -= c * cmd[i];
                }
            }
            let s = cal.map_or(s, |c| c.apply(&s));
            sensor_to_body * s
        })
        .collect()
}

/// Every signal of the check (module doc).
pub fn signals(
    req: &LoopRequest,
    commands: &[Vec<f64>],
    warnings: &mut Vec<LoopWarning>,
) -> Result<Signals, Error> {
    let log = &req.input.log;
    let t = log.require_time("the field's derivative needs the time of each row")?;
    let b = log.require_field("the loop check needs the magnetometer readings")?;
    let plan = req.require_plan("loop", "its [control] law and [[rod]] axes")?;
    let sensor_to_body = match &plan.magnetometer {
        Some(m) => m.sensor_to_body,
        None => {
            warnings.push(LoopWarning::MagnetometerMappingAssumed);
            Matrix3::identity()
        }
    };
    let b_body = body_field(req, b, commands, &sensor_to_body);
    let (seg, median_dt) = segments(t, log.mount.as_deref());
    let h = ((req.options.smooth_s / 2.0 / median_dt).round() as usize).max(1);
    let flagged = &req.input.saturation.flagged;
    let flagged: Vec<bool> = (0..t.len())
        .map(|i| flagged.get(i).copied().unwrap_or(false))
        .collect();
    let mut used: Vec<bool> = (0..t.len())
        .map(|i| window_ok(i, h, &seg, &flagged))
        .collect();
    let bdot: Vec<Vector3<f64>> = (0..t.len())
        .map(|i| {
            if !used[i] {
                return Vector3::zeros();
            }
            Vector3::from_fn(|a, _| slope(t, i - h, i + h, |k| b_body[k][a]))
        })
        .collect();
    let (rate, rate_source) = body_rate(req, t, &b_body, &bdot, &mut used, h, &seg, warnings)?;
    for (u, (d, w)) in used.iter_mut().zip(bdot.iter().zip(&rate)) {
        *u &= d.iter().chain(w.iter()).all(|x| x.is_finite());
    }
    Ok(Signals {
        t_s: t.to_vec(),
        b_body_nt: b_body,
        bdot_body_nt_s: bdot,
        rate_body_rad_s: rate,
        used,
        rate_source,
        half_window: h,
    })
}

/// The body rate per row and its source (module doc); rows without one are unmarked.
#[allow(clippy::too_many_arguments)]
fn body_rate(
    req: &LoopRequest,
    t: &[f64],
    b_body: &[Vector3<f64>],
    bdot: &[Vector3<f64>],
    used: &mut [bool],
    h: usize,
    seg: &[usize],
    warnings: &mut Vec<LoopWarning>,
) -> Result<(Vec<Vector3<f64>>, RateSource), Error> {
    let log = &req.input.log;
    let plan = req.require_plan("loop", "its [control] law and [[rod]] axes")?;
    if let Some(g) = &log.gyro_rad_s {
        let map = match &plan.gyro {
            Some(gy) => gy.sensor_to_body,
            None => {
                warnings.push(LoopWarning::GyroMappingAssumed);
                Matrix3::identity()
            }
        };
        let rate = (0..t.len())
            .map(|i| map * Vector3::new(g[0][i], g[1][i], g[2][i]))
            .collect();
        return Ok((rate, RateSource::Gyro));
    }
    if let Some(angle) = &log.angle_rad {
        match table_rate(req, t, angle, used, h, seg)? {
            Some(rate) => return Ok((rate, RateSource::Table)),
            None => warnings.push(LoopWarning::TableWithoutMounts),
        }
    }
    warnings.push(LoopWarning::RateFromField);
    let rate = b_body
        .iter()
        .zip(bdot)
        .map(|(b, d)| {
            let n2 = b.norm_squared();
            if n2 > 0.0 {
                d.cross(b) / n2
            } else {
                Vector3::zeros()
            }
        })
        .collect();
    Ok((rate, RateSource::FieldDerivative))
}

/// The table's rate in the body frame per row: the angle unwrapped within each segment,
/// its smoothed derivative about table +z, mapped by the row's mount (body → table
/// transposed). `None` without `[align_test]` mounts.
fn table_rate(
    req: &LoopRequest,
    t: &[f64],
    angle: &[f64],
    used: &mut [bool],
    h: usize,
    seg: &[usize],
) -> Result<Option<Vec<Vector3<f64>>>, Error> {
    let log = &req.input.log;
    let Some(align) = req.plan.and_then(|p| p.align_test.as_ref()) else {
        return Ok(None);
    };
    let mount_of = |i: usize| -> Result<Option<&Matrix3<f64>>, Error> {
        let label = match (&log.mount, align.mounts.as_slice()) {
            (Some(m), _) => match m[i] {
                None => return Ok(None),
                Some(k) => log
                    .mount_labels
                    .get(k as usize)
                    .cloned()
                    .unwrap_or_default(),
            },
            (None, [only]) => only.label.clone(),
            (None, _) => {
                return Err(Error::Usage(format!(
                    "{}: the log has an angle but no mount column, and the plan's \
                     [align_test] lists several mounts",
                    log.path.display()
                )))
            }
        };
        align
            .mounts
            .iter()
            .find(|m| m.label == label)
            .map(|m| Some(&m.body_to_table))
            .ok_or_else(|| {
                Error::Usage(format!(
                    "{} line {}: mount \"{label}\" is not in the plan's [align_test]",
                    log.path.display(),
                    log.lines.get(i).unwrap_or(0)
                ))
            })
    };
    let mut unwrapped = angle.to_vec();
    for i in 1..unwrapped.len() {
        if seg[i] == seg[i - 1] {
            let d = (angle[i] - angle[i - 1] + std::f64::consts::PI)
                .rem_euclid(2.0 * std::f64::consts::PI)
                - std::f64::consts::PI;
            unwrapped[i] = unwrapped[i - 1] + d;
        }
    }
    let mut rate = vec![Vector3::zeros(); t.len()];
    for i in 0..t.len() {
        if !used[i] {
            continue;
        }
        match mount_of(i)? {
            None => used[i] = false,
            Some(body_to_table) => {
                let w = slope(t, i - h, i + h, |k| unwrapped[k]);
                rate[i] = body_to_table.transpose() * Vector3::new(0.0, 0.0, w);
            }
        }
    }
    Ok(Some(rate))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The straight-line fit's derivative of a sampled sine against its analytic
    /// derivative (calculus; the filter's bias (ωnΔt)²/24 of the rate is below 1e-3 here).
    #[test]
    fn the_smoothing_derivative_follows_an_analytic_sine() {
        let t: Vec<f64> = (0..200).map(|i| i as f64 * 0.1).collect();
        let w = 0.3;
        let y: Vec<f64> = t.iter().map(|x| (w * x).sin()).collect();
        for i in [20, 77, 150] {
            let d = slope(&t, i - 3, i + 3, |k| y[k]);
            let truth = w * (w * t[i]).cos();
            assert!((d - truth).abs() < 1e-3 * w, "{d} vs {truth}");
        }
    }

    #[test]
    fn windows_stop_at_gaps_mount_changes_and_flagged_rows() {
        let t = vec![0.0, 1.0, 2.0, 3.0, 4.0, 50.0, 51.0, 52.0];
        let (seg, _) = segments(&t, None);
        assert_eq!(seg, vec![0, 0, 0, 0, 0, 1, 1, 1]);
        let flagged = vec![false, false, false, true, false, false, false, false];
        assert!(window_ok(1, 1, &seg, &flagged));
        assert!(!window_ok(2, 1, &seg, &flagged));
        assert!(!window_ok(4, 1, &seg, &flagged));
        assert!(window_ok(6, 1, &seg, &flagged));
    }
}
