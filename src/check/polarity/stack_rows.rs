//! The rows the stacked, pulse-aligned plot draws, kept at full resolution: the plot
//! series of a long log is thinned evenly for the time plot, which would leave a pulse
//! of an hour-long log with a handful of points; inside the pulses' windows every row
//! is kept, so the stacked view shows exactly what the pulses hold.

use super::result::{PolaritySeries, PulseResult};

/// True for every row of `t_s` (s) inside the stacked window of one of the first
/// [`PolaritySeries::STACK_PULSES_MAX`] pulses of each rod: from a fifth of the pulse
/// before it turns on until the next pulse of any rod turns on, and no longer than the
/// rod's slowest settle time twice over (or the pulse's length, if longer) after it
/// turns off. The stacked plot's window (`report::sections::polarity_stack`) lies
/// within it.
pub(super) fn stack_rows(t_s: &[f64], pulses: &[PulseResult]) -> Vec<bool> {
    let mut keep = vec![false; t_s.len()];
    // Per rod: pulses drawn so far and the slowest settle time; every turn-on, sorted.
    let mut rods: Vec<(&str, usize, f64)> = Vec::new();
    for p in pulses {
        let settle = p.settle_time_s.unwrap_or(0.0);
        match rods.iter_mut().find(|(r, _, _)| *r == p.rod) {
            Some(r) => r.2 = r.2.max(settle),
            None => rods.push((&p.rod, 0, settle)),
        }
    }
    let mut ons: Vec<f64> = pulses.iter().map(|q| q.t_on_s).collect();
    ons.sort_by(f64::total_cmp);
    for p in pulses {
        let Some(rod) = rods.iter_mut().find(|(r, _, _)| *r == p.rod) else {
            continue;
        };
        if rod.1 >= PolaritySeries::STACK_PULSES_MAX {
            continue;
        }
        rod.1 += 1;
        let dur = p.t_off_s - p.t_on_s;
        let next_on = ons
            .get(ons.partition_point(|t| *t <= p.t_off_s))
            .copied()
            .unwrap_or(f64::INFINITY);
        let start = p.t_on_s - 0.2 * dur;
        let end = (p.t_off_s + (2.0 * rod.2).max(dur)).min(next_on);
        let a = t_s.partition_point(|t| *t < start);
        let b = t_s.partition_point(|t| *t <= end);
        keep[a..b.max(a)].iter_mut().for_each(|k| *k = true);
    }
    keep
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pulse(rod: &str, on: f64, off: f64, settle: Option<f64>) -> PulseResult {
        PulseResult {
            rod: rod.into(),
            t_on_s: on,
            t_off_s: off,
            command: 1.0,
            settle_time_s: settle,
            step_nt: None,
            step_sigma_nt: None,
        }
    }

    #[test]
    fn a_window_runs_from_before_the_pulse_to_the_next_one() {
        let t: Vec<f64> = (0..100).map(|i| i as f64 * 0.1).collect();
        let p = [pulse("x", 2.0, 3.0, Some(0.2)), pulse("y", 3.5, 4.0, None)];
        let keep = stack_rows(&t, &p);
        let kept: Vec<usize> = (0..100).filter(|&i| keep[i]).collect();
        // x: 1.8 s .. min(3.0 + max(0.4, 1.0), 3.5) = 3.5 s; y: 3.4 s .. 4.0 + 0.5 s.
        assert_eq!(kept.first(), Some(&18));
        assert_eq!(kept.last(), Some(&45));
        assert!(!keep[17] && !keep[46]);
    }
}
