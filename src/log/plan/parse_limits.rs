//! Validation of the plan's `[limits]` table (`docs/formats.md`): the verdict limits of
//! each check, the gates' limits and a rod's limits, each positive (or a share between 0
//! and 1) and within its plausible range. Errors name the key.

use super::parse::Validator;
use super::raw::RawLimits;
use super::types::{GateLimits, Limits};
use super::types::{MAX_CONDITION, MAX_DIPOLE_AM2, MAX_SOFT_IRON};
use crate::log::error::PlanError;
use crate::screen::plausible::MAX_FIELD_NT;

impl Validator<'_> {
    /// The gates' limits of `[limits]`: shares between 0 and 1, positive values within
    /// their plausible ranges, `soft_iron_min` below `soft_iron_max`.
    fn gate_limits(&self, raw: &RawLimits) -> Result<GateLimits, PlanError> {
        let share = |key: &str, v: Option<f64>| -> Result<Option<f64>, PlanError> {
            match v {
                Some(x) if !(x.is_finite() && (0.0..=1.0).contains(&x)) => Err(self.invalid(
                    &format!("limits.{key}"),
                    format!("must be a share between 0 and 1, found {x}"),
                )),
                other => Ok(other),
            }
        };
        let g = GateLimits {
            coverage_min: share("coverage_min", raw.coverage_min)?,
            hard_iron_max_nt: self.positive_at_most(
                "limits.hard_iron_max_nt",
                raw.hard_iron_max_nt,
                MAX_FIELD_NT,
            )?,
            soft_iron_min: self.positive_at_most(
                "limits.soft_iron_min",
                raw.soft_iron_min,
                MAX_SOFT_IRON,
            )?,
            soft_iron_max: self.positive_at_most(
                "limits.soft_iron_max",
                raw.soft_iron_max,
                MAX_SOFT_IRON,
            )?,
            residual_max_fraction: share("residual_max_fraction", raw.residual_max_fraction)?,
            samples_used_min: share("samples_used_min", raw.samples_used_min)?,
            rods_on_share_max: share("rods_on_share_max", raw.rods_on_share_max)?,
            design_condition_max: self.positive_at_most(
                "limits.design_condition_max",
                raw.design_condition_max,
                MAX_CONDITION,
            )?,
            alignment_max_deg: self.positive_at_most(
                "limits.alignment_max_deg",
                raw.alignment_max_deg,
                180.0,
            )?,
        };
        if let (Some(lo), Some(hi)) = (g.soft_iron_min, g.soft_iron_max) {
            if lo >= hi {
                return Err(self.invalid(
                    "limits.soft_iron_min",
                    format!("must be below limits.soft_iron_max ({lo} ≥ {hi})"),
                ));
            }
        }
        Ok(g)
    }

    /// `[limits]`: the verdict limits of each check, its gates, and the rod's limits.
    pub(super) fn limits(&self, raw: RawLimits) -> Result<Limits, PlanError> {
        let limits = Limits {
            residual_dipole_max_am2: self.positive_at_most(
                "limits.residual_dipole_max_am2",
                raw.residual_dipole_max_am2,
                MAX_DIPOLE_AM2,
            )?,
            calibration_residual_max_nt: self.positive_at_most(
                "limits.calibration_residual_max_nt",
                raw.calibration_residual_max_nt,
                MAX_FIELD_NT,
            )?,
            polarity_angle_max_deg: self
                .positive("limits.polarity_angle_max_deg", raw.polarity_angle_max_deg)?,
            gates: self.gate_limits(&raw)?,
            rod: super::RodLimits::new(
                self.path,
                [
                    raw.rod_current_max_a,
                    raw.rod_moment_min_am2,
                    raw.rod_remanence_max_pct,
                    raw.rod_linearity_max_pct,
                ],
            )?,
        };
        if let Some(a) = limits.polarity_angle_max_deg {
            if a >= 90.0 {
                return Err(self.invalid(
                    "limits.polarity_angle_max_deg",
                    format!("must be below 90°, found {a}"),
                ));
            }
        }
        Ok(limits)
    }
}
