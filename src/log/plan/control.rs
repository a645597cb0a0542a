//! `[control]` (docs/loop.md): the magnetic control law the flight software runs while
//! `loop` watches it — B-dot or rate feedback, damping or spinning up about an axis —
//! and the inertia `simulate loop` turns. Also the two `[[rod]]` keys only `loop` reads
//! (`coupling_nt_per_command`, `command_max`).

use nalgebra::Vector3;
use serde::Deserialize;

use super::parse::Validator;
use crate::log::error::PlanError;

/// `[control]` as written.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawControl {
    law: String,
    intent: Option<String>,
    spin_axis_body: Option<[f64; 3]>,
    spin_rate_deg_s: Option<f64>,
    gain: Option<f64>,
    inertia_kg_m2: Option<[f64; 3]>,
}

/// The law the flight software closes from magnetometer (and gyro) to rods.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ControlLaw {
    /// m ∝ −Ḃ_body (Stickler & Alfriend 1976).
    Bdot,
    /// m ∝ ω × B (rate feedback; needs the body rate).
    Rate,
}

/// What the law is meant to do with the rotation.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "kebab-case", tag = "intent")]
pub enum ControlIntent {
    /// Remove rotational energy (detumble).
    Damp,
    /// Drive the rate about `axis_body` towards `rate_rad_s`.
    Spin {
        /// Unit spin axis, body frame (B).
        axis_body: [f64; 3],
        /// Target rate about it, rad/s (signed, right-handed about the axis).
        rate_rad_s: f64,
    },
}

/// `[control]`.
#[derive(Debug, Clone)]
pub struct ControlPlan {
    /// The law.
    pub law: ControlLaw,
    /// Its intent.
    pub intent: ControlIntent,
    /// The law's gain as the flight software sets it (A·m² per nT/s for B-dot, A·m² per
    /// rad/s·nT for rate), when given; informational.
    pub gain: Option<f64>,
    /// Principal moments of inertia, body frame, kg·m² (for `simulate loop`).
    pub inertia_kg_m2: Option<Vector3<f64>>,
}

/// Largest spin-rate target, deg/s (a faster spin is a unit or typing error).
const MAX_SPIN_DEG_S: f64 = 3600.0;
/// Largest principal moment of inertia, kg·m² (a large spacecraft is thousands).
const MAX_INERTIA_KG_M2: f64 = 1.0e6;

impl Validator<'_> {
    /// Validate `[control]`.
    pub(super) fn control(&self, c: RawControl) -> Result<ControlPlan, PlanError> {
        let law = match c.law.trim() {
            "bdot" => ControlLaw::Bdot,
            "rate" => ControlLaw::Rate,
            other => {
                return Err(self.invalid(
                    "control.law",
                    format!("expected \"bdot\" or \"rate\", found \"{other}\""),
                ))
            }
        };
        let intent = match c.intent.as_deref().map(str::trim) {
            None | Some("damp") => {
                for (key, given) in [
                    ("control.spin_axis_body", c.spin_axis_body.is_some()),
                    ("control.spin_rate_deg_s", c.spin_rate_deg_s.is_some()),
                ] {
                    if given {
                        return Err(self.invalid(
                            key,
                            "is read only with intent = \"spin\"; remove it or set the intent"
                                .into(),
                        ));
                    }
                }
                ControlIntent::Damp
            }
            Some("spin") => self.spin(&c)?,
            Some(other) => {
                return Err(self.invalid(
                    "control.intent",
                    format!("expected \"damp\" or \"spin\", found \"{other}\""),
                ))
            }
        };
        let gain = match c.gain {
            Some(g) if !(g.is_finite() && g != 0.0) => {
                return Err(self.invalid(
                    "control.gain",
                    format!("must be a finite, non-zero number, found {g}"),
                ))
            }
            g => g,
        };
        let inertia_kg_m2 = match c.inertia_kg_m2 {
            None => None,
            Some(j) => {
                let v = self.vec3("control.inertia_kg_m2", j)?;
                if v.iter().any(|x| !(*x > 0.0 && *x <= MAX_INERTIA_KG_M2)) {
                    return Err(self.invalid(
                        "control.inertia_kg_m2",
                        format!(
                            "each principal moment must lie in 0 < J ≤ {MAX_INERTIA_KG_M2:e} \
                             kg·m², found {j:?}"
                        ),
                    ));
                }
                let (a, b, cc) = (v.x, v.y, v.z);
                if a + b < cc || a + cc < b || b + cc < a {
                    return Err(self.invalid(
                        "control.inertia_kg_m2",
                        format!(
                            "{j:?} breaks the triangle inequality of principal moments (each \
                             at most the sum of the other two); no rigid body has them"
                        ),
                    ));
                }
                Some(v)
            }
        };
        Ok(ControlPlan {
            law,
            intent,
            gain,
            inertia_kg_m2,
        })
    }

    fn spin(&self, c: &RawControl) -> Result<ControlIntent, PlanError> {
        let axis = c.spin_axis_body.ok_or_else(|| {
            self.invalid(
                "control.spin_axis_body",
                "intent = \"spin\" needs spin_axis_body (a body-frame direction)".into(),
            )
        })?;
        let a = self.vec3("control.spin_axis_body", axis)?;
        let n = a.norm();
        if !(n.is_finite() && n > 1e-9) {
            return Err(self.invalid(
                "control.spin_axis_body",
                format!("{axis:?} is not a direction"),
            ));
        }
        let rate = c.spin_rate_deg_s.ok_or_else(|| {
            self.invalid(
                "control.spin_rate_deg_s",
                "intent = \"spin\" needs spin_rate_deg_s (the target rate about the axis)".into(),
            )
        })?;
        if !(rate.is_finite() && rate.abs() <= MAX_SPIN_DEG_S) {
            return Err(self.invalid(
                "control.spin_rate_deg_s",
                format!("must lie in ±{MAX_SPIN_DEG_S} deg/s, found {rate}"),
            ));
        }
        let u = a / n;
        Ok(ControlIntent::Spin {
            axis_body: [u.x, u.y, u.z],
            rate_rad_s: rate.to_radians(),
        })
    }

    /// `rod[i].coupling_nt_per_command`: finite, each below the largest plausible field.
    pub(super) fn rod_coupling(
        &self,
        i: usize,
        v: Option<[f64; 3]>,
    ) -> Result<Option<Vector3<f64>>, PlanError> {
        let key = format!("rod[{i}].coupling_nt_per_command");
        match v {
            None => Ok(None),
            Some(c) => {
                let c = self.vec3(&key, c)?;
                if c.amax() > crate::screen::plausible::MAX_FIELD_NT {
                    return Err(self.invalid(
                        &key,
                        "is beyond any plausible field per command; the unit is nT per \
                         command unit"
                            .into(),
                    ));
                }
                Ok(Some(c))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::log::plan::parse_plan;
    use crate::log::PlanError;
    use std::path::Path;

    fn plan(text: &str) -> Result<crate::log::Plan, PlanError> {
        parse_plan(text, Path::new("p.toml"))
    }

    #[test]
    fn a_bdot_damping_law_is_read_with_its_defaults() {
        let p = plan("[control]\nlaw = \"bdot\"\n").unwrap();
        let c = p.control.unwrap();
        assert_eq!(c.law, super::ControlLaw::Bdot);
        assert_eq!(c.intent, super::ControlIntent::Damp);
    }

    #[test]
    fn a_spin_intent_reads_a_unit_axis_and_the_rate_in_radians() {
        let p = plan(
            "[control]\nlaw = \"rate\"\nintent = \"spin\"\nspin_axis_body = [0, 0, 2]\n\
             spin_rate_deg_s = 90.0\n",
        )
        .unwrap();
        match p.control.unwrap().intent {
            super::ControlIntent::Spin {
                axis_body,
                rate_rad_s,
            } => {
                let off: f64 = axis_body
                    .iter()
                    .zip([0.0, 0.0, 1.0])
                    .map(|(a, b)| (a - b).abs())
                    .sum();
                assert!(off < 1e-15, "{axis_body:?}");
                assert!((rate_rad_s - std::f64::consts::FRAC_PI_2).abs() < 1e-12);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn a_bad_law_is_named_by_file_line_and_key() {
        let e = plan("[article]\nserial = \"A\"\nbuild = \"B\"\n\n[control]\nlaw = \"pid\"\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("p.toml"), "{e}");
        assert!(e.contains(":6") || e.contains("line 6"), "{e}");
        assert!(e.contains("control.law"), "{e}");
    }

    #[test]
    fn spin_without_its_axis_and_damp_with_one_are_refused() {
        let e = plan("[control]\nlaw = \"rate\"\nintent = \"spin\"\nspin_rate_deg_s = 5.0\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("control.spin_axis_body"), "{e}");
        let e = plan("[control]\nlaw = \"bdot\"\nspin_axis_body = [0, 0, 1]\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("control.spin_axis_body"), "{e}");
    }

    #[test]
    fn impossible_inertia_is_refused() {
        let e = plan("[control]\nlaw = \"bdot\"\ninertia_kg_m2 = [0.01, 0.01, 0.5]\n")
            .unwrap_err()
            .to_string();
        assert!(e.contains("triangle"), "{e}");
    }

    #[test]
    fn rod_coupling_and_command_limit_are_read() {
        let p = plan(
            "[[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\n\
             coupling_nt_per_command = [40.0, -5.0, 2.0]\ncommand_max = 1.0\n",
        )
        .unwrap();
        assert_eq!(p.rods[0].command_max, Some(1.0));
        assert!((p.rods[0].coupling_nt_per_command.unwrap().x - 40.0).abs() < 1e-12);
        let e = plan(
            "[[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\n\
             command_max = -1.0\n",
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("rod[0].command_max"), "{e}");
    }
}
