//! Per rod: does the flight software command it as its law says?
//!
//! The law's ideal dipole per row (body frame, up to a positive gain): B-dot
//! m ∝ −Ḃ_body; rate m ∝ ω × B; spin intent m ∝ (ω_t − ω·a)(B × a), which makes the
//! torque about a, τ·a = m·(B × a), push the rate about a towards ω_t. A rod's ideal
//! command is that dipole along its axis. The rod's logged command and its ideal are
//! each scaled to unit RMS; `slope` is the least-squares slope of the one on the other
//! through the origin and `correlation` Pearson's r, both signed and dimensionless.
//!
//! Verdicts (thresholds our own choice, common practice for "clearly follows"):
//! `consistent` r ≥ 0.5 and ahead of every other rod's ideal by 0.2; `reversed`
//! r ≤ −0.5; `cross-wired` another rod's ideal explains the command better (|r| larger
//! by 0.2 and at least 0.5); `not-driven` none of these; `unused` a rod the spin law
//! never needs (its ideal is nearly zero); `inconclusive` too few independent swings:
//! neighbouring samples of a smooth rotation are alike, so the count of independent
//! evidence is the number of half-swings of the ideal command (sign changes with a
//! hysteresis of a tenth of its RMS) — each is one independent chance for the command
//! to agree or disagree in sign. The autocorrelation-based effective N of Bretherton et
//! al. 1999 was tried and rejected: a smooth periodic signal drives the lag-1 ρ to 1 and
//! the estimate to a handful of samples however many turns the log holds.
//!
//! Saturation: a command at its limit (`[[rod]] command_max`, else the log's largest
//! |command| when at least 2 % of the rows sit there) carries only its sign. Saturated
//! rows are left out of the regression and counted; when fewer than
//! [`MIN_UNSATURATED`] rows remain, the rod is judged by sign agreement instead
//! (r = 2p − 1, p the share of rows where command and ideal agree in sign, over rows with
//! |ideal| above a tenth of its RMS), and `slope` is null.

use nalgebra::Vector3;
use serde::Serialize;

/// Least |r| to call a rod consistent or reversed.
pub const R_MIN: f64 = 0.5;
/// Margin by which the own ideal must beat every other rod's (and vice versa for
/// cross-wired).
pub const LEAD_MIN: f64 = 0.2;
/// Fewest unsaturated rows for a regression.
pub const MIN_UNSATURATED: usize = 30;
/// Fewest independent half-swings of the ideal command to judge a rod.
pub const MIN_EFFECTIVE: f64 = 6.0;
/// Share of rows at the log's largest |command| that marks a plateau (saturation).
const PLATEAU_SHARE: f64 = 0.02;
/// Relative tolerance of "at the limit".
const AT_LIMIT: f64 = 1e-3;

/// A rod's verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RodVerdict {
    /// Follows its own ideal command.
    Consistent,
    /// Follows it with the opposite sign.
    Reversed,
    /// Follows no ideal command.
    NotDriven,
    /// Follows another rod's ideal command better.
    CrossWired,
    /// Not needed by the law (spin intent).
    Unused,
    /// Too few independent samples to tell.
    Inconclusive,
}

impl RodVerdict {
    /// The word as in the JSON.
    pub fn word(self) -> &'static str {
        match self {
            RodVerdict::Consistent => "consistent",
            RodVerdict::Reversed => "reversed",
            RodVerdict::NotDriven => "not-driven",
            RodVerdict::CrossWired => "cross-wired",
            RodVerdict::Unused => "unused",
            RodVerdict::Inconclusive => "inconclusive",
        }
    }
}

/// How a rod was compared.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Comparison {
    /// Regression on unsaturated rows.
    Regression,
    /// Sign agreement (mostly saturated).
    SignAgreement,
}

/// One rod's finding (the `rods` entries of the JSON).
#[derive(Debug, Clone, Serialize)]
pub struct RodFinding {
    /// Rod name (`cmd_<name>` in the log).
    pub name: String,
    /// Verdict.
    pub verdict: RodVerdict,
    /// Slope of the command on its ideal, both at unit RMS (null under sign agreement).
    pub slope: Option<f64>,
    /// Signed correlation with its own ideal (2p − 1 under sign agreement).
    pub correlation: Option<f64>,
    /// The other rod whose ideal it follows best, and that correlation.
    pub best_other: Option<(String, f64)>,
    /// How it was compared.
    pub comparison: Comparison,
    /// Rows at the command limit (left out of the regression).
    pub saturated: usize,
    /// The command limit used, command units.
    pub command_limit: Option<f64>,
    /// Rows compared.
    pub samples: usize,
    /// Independent half-swings of the ideal command over the compared rows.
    pub effective_samples: f64,
}

/// What the judge needs of one rod.
pub struct RodInput<'a> {
    /// Name.
    pub name: &'a str,
    /// Command per row, command units.
    pub command: &'a [f64],
    /// Unit axis, body frame.
    pub axis_body: Vector3<f64>,
    /// The plan's command limit.
    pub command_max: Option<f64>,
}

/// Pearson's r and the slope through the origin of unit-RMS `c` on unit-RMS `i`.
fn regress(c: &[f64], i: &[f64]) -> Option<(f64, f64)> {
    let n = c.len() as f64;
    if c.len() < 3 {
        return None;
    }
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / n).sqrt();
    let (rc, ri) = (rms(c), rms(i));
    if !(rc > 0.0 && ri > 0.0) {
        return None;
    }
    let slope = c.iter().zip(i).map(|(a, b)| a / rc * b / ri).sum::<f64>() / n;
    let (mc, mi) = (c.iter().sum::<f64>() / n, i.iter().sum::<f64>() / n);
    let cov: f64 = c.iter().zip(i).map(|(a, b)| (a - mc) * (b - mi)).sum();
    let vc: f64 = c.iter().map(|a| (a - mc) * (a - mc)).sum();
    let vi: f64 = i.iter().map(|b| (b - mi) * (b - mi)).sum();
    let r = if vc > 0.0 && vi > 0.0 {
        cov / (vc * vi).sqrt()
    } else {
        0.0
    };
    Some((slope, r))
}

/// 2p − 1 for the share p of rows where `c` and `i` agree in sign (rows with |i| above a
/// tenth of its RMS and a non-zero command).
fn sign_agreement(c: &[f64], i: &[f64]) -> Option<f64> {
    let rms = (i.iter().map(|x| x * x).sum::<f64>() / i.len().max(1) as f64).sqrt();
    let (mut agree, mut n) = (0usize, 0usize);
    for (a, b) in c.iter().zip(i) {
        if b.abs() > 0.1 * rms && *a != 0.0 {
            n += 1;
            agree += usize::from(a.signum() == b.signum());
        }
    }
    (n >= 3).then(|| 2.0 * agree as f64 / n as f64 - 1.0)
}

/// The command limit and the rows at it.
fn saturation(rod: &RodInput, rows: &[usize]) -> (Option<f64>, Vec<bool>) {
    let peak = rows
        .iter()
        .map(|&k| rod.command[k].abs())
        .fold(0.0, f64::max);
    let at = |limit: f64| -> Vec<bool> {
        rows.iter()
            .map(|&k| rod.command[k].abs() >= limit * (1.0 - AT_LIMIT))
            .collect()
    };
    match rod.command_max {
        Some(l) => (Some(l), at(l)),
        None if peak > 0.0 => {
            let flags = at(peak);
            let share = flags.iter().filter(|f| **f).count() as f64 / rows.len().max(1) as f64;
            if share >= PLATEAU_SHARE {
                (Some(peak), flags)
            } else {
                (None, vec![false; rows.len()])
            }
        }
        None => (None, vec![false; rows.len()]),
    }
}

/// Judge every rod against the ideal dipole per used row (`ideal[k]`, body frame).
/// `excited`: the global data gates hold (enough motion, field, samples).
pub fn judge_rods(
    rods: &[RodInput],
    rows: &[usize],
    ideal: &[Vector3<f64>],
    spin: bool,
    excited: bool,
) -> Vec<RodFinding> {
    let ideals: Vec<Vec<f64>> = rods
        .iter()
        .map(|r| rows.iter().map(|&k| r.axis_body.dot(&ideal[k])).collect())
        .collect();
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / v.len().max(1) as f64).sqrt();
    let largest = ideals.iter().map(|v| rms(v)).fold(0.0, f64::max);
    rods.iter()
        .enumerate()
        .map(|(j, rod)| {
            let unused = spin && rms(&ideals[j]) < 0.05 * largest;
            judge_one(rod, j, rods, rows, &ideals, unused, excited)
        })
        .collect()
}

fn judge_one(
    rod: &RodInput,
    j: usize,
    rods: &[RodInput],
    rows: &[usize],
    ideals: &[Vec<f64>],
    unused: bool,
    excited: bool,
) -> RodFinding {
    let (limit, sat) = saturation(rod, rows);
    let saturated = sat.iter().filter(|s| **s).count();
    let keep: Vec<usize> = (0..rows.len()).filter(|&q| !sat[q]).collect();
    let comparison = if keep.len() >= MIN_UNSATURATED {
        Comparison::Regression
    } else {
        Comparison::SignAgreement
    };
    let cmd_all: Vec<f64> = rows.iter().map(|&k| rod.command[k]).collect();
    let compare = |ideal: &[f64]| -> Option<(Option<f64>, f64)> {
        match comparison {
            Comparison::Regression => {
                let c: Vec<f64> = keep.iter().map(|&q| cmd_all[q]).collect();
                let i: Vec<f64> = keep.iter().map(|&q| ideal[q]).collect();
                regress(&c, &i).map(|(s, r)| (Some(s), r))
            }
            Comparison::SignAgreement => sign_agreement(&cmd_all, ideal).map(|r| (None, r)),
        }
    };
    let own = compare(&ideals[j]);
    let best_other = ideals
        .iter()
        .enumerate()
        .filter(|(q, _)| *q != j)
        .filter_map(|(q, v)| compare(v).map(|(_, r)| (rods[q].name.to_string(), r)))
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()));
    let n = if comparison == Comparison::Regression {
        keep.len()
    } else {
        rows.len()
    };
    let compared: Vec<f64> = match comparison {
        Comparison::Regression => keep.iter().map(|&q| ideals[j][q]).collect(),
        Comparison::SignAgreement => ideals[j].clone(),
    };
    let effective_samples = half_swings(&compared) as f64;
    let driven = cmd_all.iter().any(|c| *c != 0.0);
    let r = own.map(|o| o.1);
    let verdict = if unused {
        RodVerdict::Unused
    } else if !driven {
        RodVerdict::NotDriven
    } else if !excited || effective_samples < MIN_EFFECTIVE || r.is_none() {
        RodVerdict::Inconclusive
    } else {
        classify(r.unwrap_or(0.0), best_other.as_ref().map(|b| b.1))
    };
    RodFinding {
        name: rod.name.to_string(),
        verdict,
        slope: own.and_then(|o| o.0),
        correlation: r,
        best_other,
        comparison,
        saturated,
        command_limit: limit,
        samples: n,
        effective_samples,
    }
}

/// Sign changes of `x` with a hysteresis of a tenth of its RMS.
pub fn half_swings(x: &[f64]) -> usize {
    let rms = (x.iter().map(|v| v * v).sum::<f64>() / x.len().max(1) as f64).sqrt();
    let band = 0.1 * rms;
    let mut state = 0i8;
    let mut swings = 0;
    for v in x {
        let s = if *v > band {
            1
        } else if *v < -band {
            -1
        } else {
            0
        };
        if s != 0 && s != state {
            if state != 0 {
                swings += 1;
            }
            state = s;
        }
    }
    swings
}

/// The verdict from the own correlation and the best other rod's (module doc).
pub fn classify(own: f64, other: Option<f64>) -> RodVerdict {
    let other = other.map_or(0.0, f64::abs);
    if other >= R_MIN && other >= own.abs() + LEAD_MIN {
        RodVerdict::CrossWired
    } else if own >= R_MIN {
        RodVerdict::Consistent
    } else if own <= -R_MIN {
        RodVerdict::Reversed
    } else {
        RodVerdict::NotDriven
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn half_swings_count_sign_changes_beyond_the_hysteresis() {
        let x: Vec<f64> = (0..1000).map(|k| (k as f64 * 0.0314159).sin()).collect();
        assert_eq!(half_swings(&x), 9); // ten half-periods, nine changes
        let wiggle = [1.0, 0.01, -0.01, 0.01, -0.01, 1.0];
        assert_eq!(half_swings(&wiggle), 0);
    }

    #[test]
    fn verdicts_follow_the_thresholds() {
        assert_eq!(classify(0.95, Some(0.1)), RodVerdict::Consistent);
        assert_eq!(classify(-0.9, Some(0.05)), RodVerdict::Reversed);
        assert_eq!(classify(0.1, Some(0.9)), RodVerdict::CrossWired);
        assert_eq!(classify(0.1, Some(-0.9)), RodVerdict::CrossWired);
        assert_eq!(classify(0.2, Some(0.3)), RodVerdict::NotDriven);
    }

    #[test]
    fn a_saturating_command_is_compared_on_its_unsaturated_rows() {
        // Ideal: a sine; command: the sine ×3 clipped at ±1 (most rows saturated),
        // limit from the plan.
        let n = 1000;
        let ideal: Vec<Vector3<f64>> = (0..n)
            .map(|k| Vector3::new((k as f64 * 0.05).sin(), 0.0, 0.0))
            .collect();
        let cmd: Vec<f64> = ideal.iter().map(|v| (3.0 * v.x).clamp(-1.0, 1.0)).collect();
        let rows: Vec<usize> = (0..n).collect();
        let rod = RodInput {
            name: "x",
            command: &cmd,
            axis_body: Vector3::x(),
            command_max: Some(1.0),
        };
        let f = judge_rods(&[rod], &rows, &ideal, false, true);
        assert_eq!(f[0].verdict, RodVerdict::Consistent);
        assert!(f[0].saturated > n / 2, "{:?}", f[0]);
        assert_eq!(f[0].comparison, Comparison::Regression);
        assert!(f[0].correlation.unwrap() > 0.99);
        // Fully bang-bang: judged by sign agreement, the slope null.
        let bang: Vec<f64> = ideal.iter().map(|v| -v.x.signum()).collect();
        let rod = RodInput {
            name: "x",
            command: &bang,
            axis_body: Vector3::x(),
            command_max: None,
        };
        let f = judge_rods(&[rod], &rows, &ideal, false, true);
        assert_eq!(f[0].comparison, Comparison::SignAgreement);
        assert_eq!(f[0].verdict, RodVerdict::Reversed);
        assert!(f[0].slope.is_none());
    }
}
