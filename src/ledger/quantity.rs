//! The numbers and verdicts a run's §7 result carries, under stable names, with units
//! and 1σ where the result gives one. History compares these; the CSV export lists them.

use serde::Serialize;
use serde_json::Value;

use super::Run;
use crate::log::plan::StepKind;

/// One number or verdict a run carries, under a stable name.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Quantity {
    /// Stable name, e.g. `hard_iron_x_nt`, `soft_iron_01`, `rod_x_verdict`.
    pub name: String,
    /// Unit: `nT`, `A·m²`, `1` (dimensionless) or empty for verdicts.
    pub unit: &'static str,
    /// The value.
    pub value: QuantityValue,
}

/// Value of a [`Quantity`].
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(untagged)]
pub enum QuantityValue {
    /// A number with its 1σ uncertainty when the result gave one.
    Number {
        /// The value, in the quantity's unit.
        value: f64,
        /// 1σ uncertainty, same unit.
        sigma: Option<f64>,
    },
    /// A rod verdict (`ok`, `reversed`, …).
    Verdict(String),
    /// A check's overall `pass`.
    Pass(bool),
}

const AXES: [&str; 3] = ["x", "y", "z"];

fn vec3(v: Option<&Value>) -> Option<[f64; 3]> {
    let a = v?.as_array()?;
    if a.len() != 3 {
        return None;
    }
    let mut out = [0.0; 3];
    for (o, x) in out.iter_mut().zip(a) {
        *o = x.as_f64().filter(|f| f.is_finite())?;
    }
    Some(out)
}

fn mat3(v: Option<&Value>) -> Option<[[f64; 3]; 3]> {
    let a = v?.as_array()?;
    if a.len() != 3 {
        return None;
    }
    Some([vec3(a.first())?, vec3(a.get(1))?, vec3(a.get(2))?])
}

fn number(name: String, unit: &'static str, value: f64, sigma: Option<f64>) -> Quantity {
    Quantity {
        name,
        unit,
        value: QuantityValue::Number { value, sigma },
    }
}

/// A vector's components and magnitude, the magnitude's σ by first-order propagation:
/// σ|v|² = Σ (vᵢ/|v|)² σᵢ² (undefined at |v| = 0).
fn vector_quantities(
    out: &mut Vec<Quantity>,
    stem: &str,
    unit: &'static str,
    unit_tag: &str,
    v: [f64; 3],
    s: Option<[f64; 3]>,
    magnitude: Option<f64>,
) {
    for i in 0..3 {
        out.push(number(
            format!("{stem}_{}_{unit_tag}", AXES[i]),
            unit,
            v[i],
            s.map(|s| s[i]),
        ));
    }
    let norm = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    let sigma = s.and_then(|s| {
        (norm > 0.0).then(|| ((0..3).map(|i| (v[i] / norm * s[i]).powi(2)).sum::<f64>()).sqrt())
    });
    out.push(number(
        format!("{stem}_magnitude_{unit_tag}"),
        unit,
        magnitude.unwrap_or(norm),
        sigma,
    ));
}

/// The quantities a run's result carries, by kind (keys of DESIGN §7). Keys that are
/// absent or not numbers are skipped, never guessed.
///
/// - calibrate: `hard_iron_{x,y,z}_nt`, `hard_iron_magnitude_nt` (σ from
///   `hard_iron_sigma_nt`), `soft_iron_{r}{c}` (σ from `soft_iron_sigma` when a result
///   carries one), `calibration_residual_rms_nt`, `calibrate_pass`;
/// - polarity: `rod_<name>_verdict`, `polarity_pass`;
/// - dipole: `dipole_{x,y,z}_am2`, `dipole_magnitude_am2` (σ from `moment_sigma_am2`),
///   `dipole_pass`.
pub fn quantities(run: &Run) -> Vec<Quantity> {
    let r = &run.result;
    let mut out = Vec::new();
    match run.kind {
        StepKind::Calibrate => {
            if let Some(h) = vec3(r.get("hard_iron_nt")) {
                vector_quantities(
                    &mut out,
                    "hard_iron",
                    "nT",
                    "nt",
                    h,
                    vec3(r.get("hard_iron_sigma_nt")),
                    None,
                );
            }
            if let Some(w) = mat3(r.get("soft_iron")) {
                let s = mat3(r.get("soft_iron_sigma"));
                for (i, row) in w.iter().enumerate() {
                    for (j, x) in row.iter().enumerate() {
                        out.push(number(
                            format!("soft_iron_{i}{j}"),
                            "1",
                            *x,
                            s.map(|s| s[i][j]),
                        ));
                    }
                }
            }
            if let Some(rms) = r.get("residual_rms_nt").and_then(Value::as_f64) {
                out.push(number(
                    "calibration_residual_rms_nt".into(),
                    "nT",
                    rms,
                    None,
                ));
            }
        }
        StepKind::Polarity => {
            for rod in r
                .get("rods")
                .and_then(Value::as_array)
                .into_iter()
                .flatten()
            {
                let name = rod.get("name").and_then(Value::as_str);
                let verdict = rod.get("verdict").and_then(Value::as_str);
                if let (Some(name), Some(verdict)) = (name, verdict) {
                    out.push(Quantity {
                        name: format!("rod_{name}_verdict"),
                        unit: "",
                        value: QuantityValue::Verdict(verdict.to_string()),
                    });
                }
            }
        }
        StepKind::Dipole => {
            if let Some(m) = vec3(r.get("moment_body_am2")) {
                let mag = r.get("magnitude_am2").and_then(Value::as_f64);
                vector_quantities(
                    &mut out,
                    "dipole",
                    "A·m²",
                    "am2",
                    m,
                    vec3(r.get("moment_sigma_am2")),
                    mag,
                );
            }
        }
    }
    if let Some(pass) = run.pass {
        out.push(Quantity {
            name: format!("{}_pass", run.kind.as_str()),
            unit: "",
            value: QuantityValue::Pass(pass),
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::RunId;
    use serde_json::json;

    fn run(kind: StepKind, result: Value) -> Run {
        Run {
            id: RunId(1),
            serial: "KST-002".into(),
            build: "B3".into(),
            kind,
            recorded_at: "2026-11-20T09:00:00.000Z".into(),
            tool_version: None,
            pass: result.get("pass").and_then(Value::as_bool),
            result,
            inputs: vec![],
        }
    }

    #[test]
    fn missing_or_malformed_keys_are_skipped_not_guessed() {
        let bad = json!({"hard_iron_nt": [1.0, "two", 3.0], "soft_iron": [[1.0]], "pass": true});
        let q = quantities(&run(StepKind::Calibrate, bad));
        assert_eq!(q.len(), 1);
        assert_eq!(q[0].name, "calibrate_pass");
    }

    #[test]
    fn a_dipole_magnitude_sigma_follows_first_order_propagation() {
        // m = (3, 4, 0) mA·m², σ = (0.1, 0.2, 0.3) mA·m²: σ|m|² = (0.6·0.1)² + (0.8·0.2)².
        let r =
            json!({"moment_body_am2": [3e-3, 4e-3, 0.0], "moment_sigma_am2": [1e-4, 2e-4, 3e-4]});
        let q = quantities(&run(StepKind::Dipole, r));
        let mag = q.iter().find(|x| x.name == "dipole_magnitude_am2").unwrap();
        let QuantityValue::Number { value, sigma } = mag.value else {
            panic!("{mag:?}")
        };
        approx::assert_relative_eq!(value, 5e-3, epsilon = 1e-15);
        approx::assert_relative_eq!(
            sigma.unwrap(),
            (0.06e-3f64.powi(2) + 0.16e-3f64.powi(2)).sqrt(),
            epsilon = 1e-15
        );
    }
}
