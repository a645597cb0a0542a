//! The forms a log may come in, resolved once for every check (`docs/formats.md`, "Logs
//! as labs and flight software write them"): the reader's layout from the plan and the
//! command line (`[columns]`, the chosen magnetometer's columns and raw-count scale,
//! `[log]`), coil currents turned into the applied field with `[cage] nt_per_amp`, and
//! repeated timestamps spread evenly.

use nalgebra::{Matrix3, Vector3};

use super::input::{InputOptions, InputWarning};
use crate::log::{LogError, LogLayout, Plan, Shown, SweepLog};
use crate::Error;

/// The reader's layout for a log read under `plan` with `options`. A log of the flight
/// magnetometer (`plan_range_applies`) under a plan that lists several and has none
/// chosen is refused with their names.
pub(super) fn layout_for(plan: Option<&Plan>, options: &InputOptions) -> Result<LogLayout, Error> {
    let mut layout = LogLayout {
        decimal_comma: options.decimal_comma,
        ..LogLayout::default()
    };
    let Some(plan) = plan else { return Ok(layout) };
    if options.plan_range_applies && plan.magnetometer.is_none() && plan.magnetometers.len() > 1 {
        let mut p = plan.clone();
        p.select_sensor(None)?;
    }
    layout.columns = plan.columns.clone();
    layout.decimal_comma |= plan.log.decimal_comma;
    layout.hold_commands = plan.log.hold_commands;
    if let Some(m) = &plan.magnetometer {
        layout.nt_per_count = m.nt_per_count;
        layout.counts_by_default = m.counts;
        if let Some(cols) = &m.columns {
            for (q, name) in ["bx", "by", "bz"].iter().zip(cols) {
                if let Some(other) = layout.mapped(q) {
                    return Err(plan
                        .invalid(
                            "columns",
                            format!(
                                "{q} is mapped to \"{other}\" here and to \"{name}\" by the \
                                 magnetometer's columns; give it once"
                            ),
                        )
                        .into());
                }
                layout.columns.push((q.to_string(), name.clone()));
            }
        }
    }
    Ok(layout)
}

/// The applied field from coil currents: `h = nt_per_amp · i (+ ambient_nt)`, cage frame,
/// nT. A log with currents and no `[cage] nt_per_amp` is refused naming the columns; a
/// log with both currents and an applied field is refused too (which one to use would
/// be a guess). Without `ambient_nt` a warning says the ambient field is folded into
/// the hard iron.
pub(super) fn currents_to_field(
    log: &mut SweepLog,
    plan: Option<&Plan>,
    warnings: &mut Vec<InputWarning>,
) -> Result<(), Error> {
    let Some(i) = &log.i_a else { return Ok(()) };
    let columns: Vec<&str> = log
        .columns_used
        .iter()
        .filter(|c| matches!(c.quantity.as_str(), "ix" | "iy" | "iz"))
        .map(|c| c.header.as_str())
        .collect();
    let unusable = |needs: &str| LogError::Unusable {
        path: Shown(log.path.clone()),
        column: format!("columns \"{}\"", columns.join("\", \"")),
        needs: needs.to_string(),
    };
    if log.h_nt.is_some() {
        return Err(unusable(
            "the log gives coil currents and the applied field hx hy hz both; keep one of them",
        )
        .into());
    }
    let cage = plan.and_then(|p| p.cage.as_ref());
    let Some(k) = cage.and_then(|c| c.nt_per_amp) else {
        return Err(unusable(
            "coil currents need the cage's field per ampere: give [cage] nt_per_amp (nT/A, \
             3×3, cage frame, row by row) in the plan",
        )
        .into());
    };
    let ambient = cage.and_then(|c| c.ambient_nt);
    log.h_nt = Some(field_from_currents(
        i,
        &k,
        ambient.unwrap_or_else(Vector3::zeros),
    ));
    if ambient.is_none() {
        warnings.push(InputWarning::AmbientFolded);
    }
    Ok(())
}

/// `h = k · i + ambient` per row, nT.
fn field_from_currents(
    i: &[Vec<f64>; 3],
    k: &Matrix3<f64>,
    ambient: Vector3<f64>,
) -> [Vec<f64>; 3] {
    let n = i[0].len();
    let mut h: [Vec<f64>; 3] = std::array::from_fn(|_| Vec::with_capacity(n));
    for ((&x, &y), &z) in i[0].iter().zip(&i[1]).zip(&i[2]) {
        let v = k * Vector3::new(x, y, z) + ambient;
        for (a, col) in h.iter_mut().enumerate() {
            col.push(v[a]);
        }
    }
    h
}

/// Spread runs of equal timestamps evenly up to the next distinct time (the last run
/// at the step of the run before it), so that checks that need time steps see them.
/// Returns the rows that shared a timestamp with the row before, and the first such
/// row's index; `None` when no time repeats.
#[allow(clippy::float_cmp)] // equal timestamps as read: exact equality is the question
pub(super) fn spread_repeated_times(t: &mut [f64]) -> Option<(usize, usize)> {
    let first = t.windows(2).position(|w| w[1] == w[0])? + 1;
    let repeated = t.windows(2).filter(|w| w[1] == w[0]).count();
    let mut start = 0;
    let mut last_step = None;
    while start < t.len() {
        let mut end = start + 1;
        while end < t.len() && t[end] == t[start] {
            end += 1;
        }
        let run = end - start;
        let step = match t.get(end) {
            Some(&next) => Some((next - t[start]) / run as f64),
            None => last_step,
        };
        if let Some(step) = step.filter(|s: &f64| s.is_finite() && *s > 0.0) {
            let t0 = t[start];
            for (k, v) in t[start..end].iter_mut().enumerate() {
                *v = t0 + step * k as f64;
            }
            last_step = Some(step);
        }
        start = end;
    }
    Some((repeated, first))
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // sums of exactly representable values
mod tests {
    use super::*;

    #[test]
    fn repeats_are_spread_up_to_the_next_time() {
        // A 4 Hz log with a 1 s clock.
        let mut t = vec![0.0, 0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 1.0];
        assert_eq!(spread_repeated_times(&mut t), Some((6, 1)));
        let want = [0.0, 0.25, 0.5, 0.75, 1.0, 1.25, 1.5, 1.75];
        for (a, b) in t.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{t:?}");
        }
        let mut plain = vec![0.0, 0.1, 0.2];
        assert_eq!(spread_repeated_times(&mut plain), None);
        assert_eq!(plain, vec![0.0, 0.1, 0.2]);
        // Nothing to spread against: left as it is.
        let mut flat = vec![3.0, 3.0];
        assert_eq!(spread_repeated_times(&mut flat), Some((1, 1)));
        assert_eq!(flat, vec![3.0, 3.0]);
    }

    #[test]
    fn currents_give_the_field_through_the_coil_constant() {
        // Exact: a diagonal coil constant and an ambient field added by hand.
        let k = Matrix3::from_diagonal(&Vector3::new(1.0e4, 2.0e4, 4.0e4));
        let i = [vec![1.0, 0.0], vec![0.0, 0.5], vec![0.0, -0.25]];
        let h = field_from_currents(&i, &k, Vector3::new(1.0, 2.0, 3.0));
        assert_eq!(h[0], vec![10_001.0, 1.0]);
        assert_eq!(h[1], vec![2.0, 10_002.0]);
        assert_eq!(h[2], vec![3.0, -9_997.0]);
    }
}
