//! Words for a change between builds, the same in every writer: a human label for the
//! quantity (`hard iron x`, `|dipole|`, `rod y`) derived from its stable name, and the
//! amount (`+60.0 ± 10.0 nT (6.0σ)`, `ok → reversed`).

use crate::ledger::{Change, Flag};

/// Unit tags that end quantity names, dropped from labels (the unit is shown apart, so
/// a label never names a unit of its own: `bias_i_solar_x_nt_per_unit` is shown as
/// "bias i solar x" with its unit nT/A, not as "… nt per unit"). Longer tags first.
const UNIT_TAGS: [&str; 11] = [
    "_nt_per_unit",
    "_nt_per_c",
    "_am2_per_a",
    "_pct",
    "_nt",
    "_am2",
    "_deg_s",
    "_uw",
    "_deg",
    "_s",
    "_1",
];

/// A human label for a quantity's stable name.
pub fn change_label(c: &Change) -> String {
    let q = c.quantity.as_str();
    if q == "soft_iron_max_element" {
        return match &c.detail {
            Some(d) => format!("soft iron {}", d.trim_start_matches("element ")),
            None => "soft iron".into(),
        };
    }
    if let Some(rc) = q.strip_prefix("soft_iron_") {
        if rc.len() == 2 && rc.chars().all(|c| c.is_ascii_digit()) {
            return format!("soft iron W[{}][{}]", &rc[..1], &rc[1..]);
        }
    }
    if let Some(kind) = q.strip_suffix("_pass") {
        return format!("{} verdict", kind.replace('_', " "));
    }
    if let Some(stem) = q.strip_suffix("_verdict") {
        return stem.replace('_', " ");
    }
    let bare = UNIT_TAGS
        .iter()
        .find_map(|t| q.strip_suffix(t))
        .unwrap_or(q);
    match bare.strip_suffix("_magnitude") {
        Some(stem) => format!("|{}|", stem.replace('_', " ")),
        None => bare.replace('_', " "),
    }
}

/// Decimals for about three significant digits of the larger of `a` and `b`.
fn decimals(a: f64, b: f64) -> usize {
    let m = a.abs().max(b.abs());
    if m == 0.0 || !m.is_finite() {
        return 1;
    }
    (2 - m.log10().floor() as i64).clamp(0, 9) as usize
}

/// `value ± sigma unit`, e.g. `+30.0 ± 5.0 nT`; `signed` puts a + on positive values;
/// a dimensionless unit (`1`) is not written.
pub fn fmt_pm(value: f64, sigma: Option<f64>, unit: &str, signed: bool) -> String {
    let d = decimals(value, sigma.unwrap_or(0.0));
    let v = if signed {
        format!("{value:+.d$}")
    } else {
        format!("{value:.d$}")
    };
    let unit = if unit == "1" { "" } else { unit };
    let sep = if unit.is_empty() { "" } else { " " };
    match sigma {
        Some(s) => format!("{v} ± {s:.d$}{sep}{unit}"),
        None => format!("{v}{sep}{unit}"),
    }
}

fn word(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::Bool(true) => "pass".into(),
        serde_json::Value::Bool(false) => "fail".into(),
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Null => "(none)".into(),
        other => other.to_string(),
    }
}

/// The change itself: `+30.0 ± 5.0 nT (6.0σ)` or `ok → reversed`.
pub fn change_amount(c: &Change) -> String {
    match c.delta {
        Some(d) => {
            let mut s = fmt_pm(d, c.sigma, &c.unit, true);
            if let Some(sig) = c.sigma.filter(|s| *s > 0.0) {
                s += &format!(" ({:.1}σ)", d.abs() / sig);
            }
            s
        }
        None if c.flag == Flag::Unchanged => word(&c.to),
        None => format!("{} → {}", word(&c.from), word(&c.to)),
    }
}

/// The flag's word, with `!` when it needs attention.
pub fn flag_text(f: Flag) -> String {
    if f.is_alert() {
        format!("{} !", f.as_str())
    } else {
        f.as_str().to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_carry_three_significant_digits_and_their_unit() {
        assert_eq!(fmt_pm(30.0, Some(5.0), "nT", true), "+30.0 ± 5.0 nT");
        assert_eq!(
            fmt_pm(0.004, Some(0.00014), "A·m²", false),
            "0.00400 ± 0.00014 A·m²"
        );
        assert_eq!(fmt_pm(812.44, None, "nT", false), "812 nT");
        assert_eq!(fmt_pm(0.02, None, "1", true), "+0.0200");
    }

    #[test]
    fn labels_are_words_and_a_dimensionless_change_has_no_bare_unit() {
        let c = Change {
            serial: "QX-7".into(),
            kind: "calibrate".into(),
            from_build: "B1".into(),
            to_build: "B2".into(),
            quantity: "soft_iron_00".into(),
            unit: "1".into(),
            delta: Some(0.01),
            sigma: Some(0.001),
            flag: Flag::Significant,
            from: serde_json::Value::Null,
            to: serde_json::Value::Null,
            from_run: crate::ledger::RunId(1),
            to_run: crate::ledger::RunId(2),
            detail: None,
        };
        assert_eq!(change_label(&c), "soft iron W[0][0]");
        // Unit words never stay in a label: the unit is shown beside it.
        for (q, label) in [
            ("bias_i_solar_x_nt_per_unit", "bias i solar x"),
            ("temperature_slope_z_nt_per_c", "temperature slope z"),
            ("rod_moment_per_amp_am2_per_a", "rod moment per amp"),
            ("rod_linearity_max_dev_pct", "rod linearity max dev"),
            ("rod_time_constant_s", "rod time constant"),
            ("gyro_bias_x_deg_s", "gyro bias x"),
            ("loop_power_mean_uw", "loop power mean"),
        ] {
            let c = Change {
                quantity: q.into(),
                ..c.clone()
            };
            assert_eq!(change_label(&c), label);
        }
        // A dimensionless change is written without a bare "1".
        assert_eq!(change_amount(&c), "+0.0100 ± 0.0010 (10.0σ)");
    }
}
