//! The rod blanking window: how long after a rod's command changes the magnetometer
//! reading still carries the rod's transient, from the polarity check's per-pulse settle
//! times.
//!
//! The window is a high percentile of the per-pulse settle times, not the slowest pulse:
//! one pulse disturbed by a passing vehicle or a door (1.8 s where 298 of 300 settle in
//! 0.03 s) would otherwise blank the magnetometer sixty times longer than the rods need.
//! The percentile is [`BLANKING_PERCENTILE`] by the nearest-rank method (the smallest
//! settle time that at least that share of pulses do not exceed; Hyndman & Fan 1996,
//! definition 1), so the window is always a settle time that was measured. A pulse that
//! never settled before the next one counts as longer than every measured one: when the
//! percentile falls on such a pulse there is no window, and the file says so.

use serde::Serialize;

use crate::check::polarity::PulseResult;

/// Percentile of the per-pulse settle times taken as the blanking window, % (common
/// practice: cover all but the rare disturbed pulse).
pub const BLANKING_PERCENTILE: f64 = 95.0;

/// A blanking window and the settle times it comes from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BlankingWindow {
    /// The window, s from the command change (includes the lag); null when the
    /// percentile falls on a pulse that never settled.
    pub window_s: Option<f64>,
    /// Percentile used, %.
    pub percentile: f64,
    /// How the percentile is taken.
    pub method: &'static str,
    /// Pulses measured.
    pub pulses: usize,
    /// Pulses that did not settle before the next one.
    pub unsettled: usize,
    /// Pulses whose settle time exceeds the window (not covered by it).
    pub beyond_window: usize,
    /// Longest measured settle time, s (null when none settled).
    pub longest_s: Option<f64>,
}

/// The window over `settle_times_s` (one per pulse; `None`: did not settle).
pub fn blanking_window(settle_times_s: &[Option<f64>]) -> Option<BlankingWindow> {
    let n = settle_times_s.len();
    if n == 0 {
        return None;
    }
    let mut settled: Vec<f64> = settle_times_s
        .iter()
        .flatten()
        .copied()
        .filter(|t| t.is_finite())
        .collect();
    settled.sort_by(f64::total_cmp);
    let unsettled = n - settled.len();
    // Nearest rank: the ⌈p·n⌉-th smallest (1-based); unsettled pulses sort last.
    let rank = ((BLANKING_PERCENTILE / 100.0) * n as f64).ceil().max(1.0) as usize;
    let window_s = settled.get(rank - 1).copied();
    let beyond_window = match window_s {
        Some(w) => settled.iter().filter(|t| **t > w).count() + unsettled,
        None => n - settled.len().min(rank - 1),
    };
    Some(BlankingWindow {
        window_s,
        percentile: BLANKING_PERCENTILE,
        method: "nearest rank",
        pulses: n,
        unsettled,
        beyond_window,
        longest_s: settled.last().copied(),
    })
}

/// The window of one rod's pulses.
pub fn rod_window(pulses: &[PulseResult], rod: &str) -> Option<BlankingWindow> {
    let times: Vec<Option<f64>> = pulses
        .iter()
        .filter(|p| p.rod == rod)
        .map(|p| p.settle_time_s)
        .collect();
    blanking_window(&times)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_slow_pulse_does_not_set_the_window() {
        // The case: 298 of 300 pulses settle in 0.03 s, two take 1.8 s.
        let mut t = vec![Some(0.03); 298];
        t.extend([Some(1.8), Some(1.8)]);
        let w = blanking_window(&t).unwrap();
        assert_eq!(w.window_s, Some(0.03));
        assert_eq!(w.beyond_window, 2);
        assert_eq!(w.longest_s, Some(1.8));
    }

    #[test]
    fn nearest_rank_matches_the_textbook_definition() {
        // Nearest rank (Hyndman & Fan 1996, definition 1; also numpy's
        // percentile(method="inverted_cdf")): for 1..=20 the 95th percentile is the
        // ⌈0.95·20⌉ = 19th value.
        let t: Vec<Option<f64>> = (1..=20).map(|k| Some(k as f64)).collect();
        assert_eq!(blanking_window(&t).unwrap().window_s, Some(19.0));
        // Ten pulses: ⌈9.5⌉ = 10th, the largest.
        let t: Vec<Option<f64>> = (1..=10).map(|k| Some(k as f64 / 10.0)).collect();
        assert_eq!(blanking_window(&t).unwrap().window_s, Some(1.0));
    }

    #[test]
    fn a_percentile_on_an_unsettled_pulse_gives_no_window() {
        let t = vec![Some(0.1), None, None];
        let w = blanking_window(&t).unwrap();
        assert_eq!(w.window_s, None);
        assert_eq!(w.unsettled, 2);
        assert!(blanking_window(&[]).is_none());
    }
}
