//! The numbers and verdicts a run carries, under stable names, with units and 1σ where
//! the result gives one. Each check's result says which (`CheckResult::quantities`); the
//! ledger stores them beside the run, history compares them and the CSV export lists
//! them. [`legacy_quantities`] reads them back out of the JSON of runs recorded before
//! the ledger stored them (used once, by the migration that back-fills them).

use serde::Serialize;
use serde_json::Value;

/// One number or verdict a run carries, under a stable name.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Quantity {
    /// Stable name, e.g. `hard_iron_x_nt`, `soft_iron_01`, `rod_x_verdict`.
    pub name: String,
    /// Unit: `nT`, `A·m²`, `1` (dimensionless) or empty for verdicts.
    pub unit: String,
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
    /// A verdict word (`ok`, `reversed`, …).
    Verdict(String),
    /// A check's overall `pass`.
    Pass(bool),
}

impl Quantity {
    /// A number with its unit and optional 1σ.
    pub fn number(name: String, unit: &str, value: f64, sigma: Option<f64>) -> Self {
        Quantity {
            name,
            unit: unit.to_string(),
            value: QuantityValue::Number { value, sigma },
        }
    }

    /// A verdict word.
    pub fn verdict(name: String, word: &str) -> Self {
        Quantity {
            name,
            unit: String::new(),
            value: QuantityValue::Verdict(word.to_string()),
        }
    }

    /// A check's overall pass, named `<kind>_pass`.
    pub fn pass(kind: &str, pass: bool) -> Self {
        Quantity {
            name: format!("{kind}_pass"),
            unit: String::new(),
            value: QuantityValue::Pass(pass),
        }
    }

    /// A vector's components `<stem>_{x,y,z}_<tag>` and magnitude
    /// `<stem>_magnitude_<tag>` (the given one, else the norm), the magnitude's σ by
    /// first-order propagation: σ|v|² = Σ (vᵢ/|v|)² σᵢ² (undefined at |v| = 0).
    pub fn vector(
        stem: &str,
        unit: &str,
        tag: &str,
        v: [f64; 3],
        s: Option<[f64; 3]>,
        magnitude: Option<f64>,
    ) -> Vec<Self> {
        let mut out = Vec::with_capacity(4);
        vector_quantities(&mut out, stem, unit, tag, v, s, magnitude);
        out
    }

    /// A calibration's `hard_iron_{x,y,z}_nt` and `hard_iron_magnitude_nt` (nT) and
    /// `soft_iron_{r}{c}` (dimensionless), each with its 1σ: the names `calibrate` and
    /// `orbit` share, so history sets ground and orbit side by side.
    pub fn iron(
        hard_iron_nt: [f64; 3],
        hard_iron_sigma_nt: [f64; 3],
        soft_iron: &[[f64; 3]; 3],
        soft_iron_sigma: &[[f64; 3]; 3],
    ) -> Vec<Self> {
        let mut out = Self::vector(
            "hard_iron",
            "nT",
            "nt",
            hard_iron_nt,
            Some(hard_iron_sigma_nt),
            None,
        );
        for (i, row) in soft_iron.iter().enumerate() {
            for (j, x) in row.iter().enumerate() {
                out.push(Self::number(
                    format!("soft_iron_{i}{j}"),
                    "1",
                    *x,
                    Some(soft_iron_sigma[i][j]),
                ));
            }
        }
        out
    }

    /// Replace a number's 1σ (no effect on a verdict).
    pub fn set_sigma(&mut self, new: f64) {
        if let QuantityValue::Number { sigma, .. } = &mut self.value {
            *sigma = Some(new);
        }
    }
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

fn number(name: String, unit: &str, value: f64, sigma: Option<f64>) -> Quantity {
    Quantity::number(name, unit, value, sigma)
}

/// A vector's components and magnitude, the magnitude's σ by first-order propagation:
/// σ|v|² = Σ (vᵢ/|v|)² σᵢ² (undefined at |v| = 0).
fn vector_quantities(
    out: &mut Vec<Quantity>,
    stem: &str,
    unit: &str,
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

/// The quantities in the JSON result of a run recorded before the ledger stored them
/// (the three first kinds; any other kind has none). Keys that are absent or not
/// numbers are skipped, never guessed.
///
/// - calibrate: `hard_iron_{x,y,z}_nt`, `hard_iron_magnitude_nt` (σ from
///   `hard_iron_sigma_nt`), `soft_iron_{r}{c}` (σ from `soft_iron_sigma` when a result
///   carries one), `calibration_residual_rms_nt`;
/// - polarity: `rod_<name>_verdict`;
/// - dipole: `dipole_{x,y,z}_am2`, `dipole_magnitude_am2` (σ from `moment_sigma_am2`).
pub fn legacy_quantities(kind: &str, r: &Value) -> Vec<Quantity> {
    let mut out = Vec::new();
    match kind {
        "calibrate" => {
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
        "polarity" => {
            for rod in r
                .get("rods")
                .and_then(Value::as_array)
                .into_iter()
                .flatten()
            {
                let name = rod.get("name").and_then(Value::as_str);
                let verdict = rod.get("verdict").and_then(Value::as_str);
                if let (Some(name), Some(verdict)) = (name, verdict) {
                    out.push(Quantity::verdict(format!("rod_{name}_verdict"), verdict));
                }
            }
        }
        "dipole" => {
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
        _ => {}
    }
    out
}

/// Store one quantity of run `run_id` (table `quantities`, schema v3).
pub(crate) fn insert(
    conn: &rusqlite::Connection,
    run_id: i64,
    q: &Quantity,
) -> rusqlite::Result<()> {
    let (value, sigma, word): (Option<f64>, Option<f64>, Option<String>) = match &q.value {
        QuantityValue::Number { value, sigma } => (Some(*value), *sigma, None),
        QuantityValue::Verdict(w) => (None, None, Some(w.clone())),
        QuantityValue::Pass(p) => (Some(if *p { 1.0 } else { 0.0 }), None, Some("pass".into())),
    };
    conn.execute(
        "INSERT OR REPLACE INTO quantities (run_id, name, unit, value, sigma, word)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
        rusqlite::params![run_id, q.name, q.unit, value, sigma, word],
    )?;
    Ok(())
}

/// The quantities stored for run `run_id`, in the order they were stored.
/// Every quantity of the runs matching `serial` and `kind` (`None` matches all), as
/// (run id, quantity), by run id and then in recorded order: one query for any number
/// of runs.
pub(crate) fn read_all(
    conn: &rusqlite::Connection,
    serial: Option<&str>,
    kind: Option<&str>,
) -> rusqlite::Result<Vec<(i64, Quantity)>> {
    let mut stmt = conn.prepare_cached(
        "SELECT q.name, q.unit, q.value, q.sigma, q.word, q.run_id
         FROM quantities q JOIN runs r ON r.id = q.run_id
         WHERE (?1 IS NULL OR r.serial = ?1) AND (?2 IS NULL OR r.kind = ?2)
         ORDER BY q.run_id, q.rowid",
    )?;
    let rows = stmt.query_map(rusqlite::params![serial, kind], |r| {
        Ok((r.get(5)?, from_row(r, 0)?))
    })?;
    rows.collect()
}

/// A quantity from the columns name, unit, value, sigma, word starting at `at`.
fn from_row(r: &rusqlite::Row<'_>, at: usize) -> rusqlite::Result<Quantity> {
    let name: String = r.get(at)?;
    let unit: String = r.get(at + 1)?;
    let value: Option<f64> = r.get(at + 2)?;
    let sigma: Option<f64> = r.get(at + 3)?;
    let word: Option<String> = r.get(at + 4)?;
    let value = match (value, word) {
        (Some(v), Some(w)) if w == "pass" => QuantityValue::Pass(v > 0.5),
        (_, Some(w)) => QuantityValue::Verdict(w),
        (v, None) => QuantityValue::Number {
            // A NaN is stored by SQLite as NULL.
            value: v.unwrap_or(f64::NAN),
            sigma,
        },
    };
    Ok(Quantity { name, unit, value })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn missing_or_malformed_keys_are_skipped_not_guessed() {
        let bad = json!({"hard_iron_nt": [1.0, "two", 3.0], "soft_iron": [[1.0]], "pass": true});
        let q = legacy_quantities("calibrate", &bad);
        assert!(q.is_empty(), "{q:?}");
    }

    #[test]
    fn a_dipole_magnitude_sigma_follows_first_order_propagation() {
        // m = (3, 4, 0) mA·m², σ = (0.1, 0.2, 0.3) mA·m²: σ|m|² = (0.6·0.1)² + (0.8·0.2)².
        let r =
            json!({"moment_body_am2": [3e-3, 4e-3, 0.0], "moment_sigma_am2": [1e-4, 2e-4, 3e-4]});
        let q = legacy_quantities("dipole", &r);
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
