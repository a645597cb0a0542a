//! Check-specific report sections: each builder turns one result struct into a
//! [`Section`](super::Section) with figures of merit (units, ±1σ), tables with verdict
//! words, warnings, notes, plots and the result JSON. The writers in the parent module only
//! lay sections out; nothing here recomputes a fitted number.

mod align;
mod align_plots;
pub mod assumptions;
mod calibration;
pub mod change_text;
mod dipole;
mod history;
mod loop_law;
mod orbit;
mod polarity;
mod polarity_stack;
mod rod;
pub mod sign_chain;

pub use align::align_section;
pub use assumptions::assumptions_section;
pub use calibration::calibration_section;
pub use dipole::dipole_section;
pub use history::{history_section, history_text_section};
pub use loop_law::loop_section;
pub use orbit::orbit_section;
pub use polarity::polarity_section;
pub use rod::rod_section;
pub use sign_chain::sign_chain_section;

use super::model::{Figure, Tone};
use crate::Error;

/// A figure from an SVG and its caption.
fn figure(file_name: &str, caption: &str, svg: String) -> Figure {
    Figure {
        file_name: file_name.to_string(),
        caption: caption.to_string(),
        svg,
    }
}

/// The JSON of a result.
fn to_json(value: &impl serde::Serialize) -> Result<serde_json::Value, Error> {
    serde_json::to_value(value).map_err(|e| Error::Internal(format!("result JSON: {e}")))
}

/// The gates behind a verdict: name, value, limit and the word for each (every gate,
/// failed or not).
pub(crate) fn gates_table(gates: &[crate::check::Gate]) -> super::Table {
    use crate::check::GateRole;
    let rows = gates
        .iter()
        .map(|g| {
            let (word, tone) = match (g.ok, g.role) {
                (true, _) => ("met", Tone::Good),
                (false, GateRole::Article) => ("FAILED", Tone::Bad),
                (false, GateRole::Data) => ("cannot tell", Tone::Warn),
            };
            vec![
                super::Cell::plain(g.name.replace('_', " ")),
                super::Cell::plain(short(g.value)),
                super::Cell::plain(format!("{} {}", g.bound.symbol(), short(g.limit))),
                super::Cell::toned(word, tone),
            ]
        })
        .collect();
    super::Table {
        caption: "Gates behind the verdict (a failed article gate fails the check; a \
                  failed data gate makes it inconclusive)"
            .into(),
        header: vec![
            "gate".into(),
            "value".into(),
            "limit".into(),
            "result".into(),
        ],
        rows,
    }
}

/// Tone of a verdict.
fn verdict_tone(v: super::Verdict) -> Tone {
    match v {
        super::Verdict::Pass => Tone::Good,
        super::Verdict::Fail => Tone::Bad,
        super::Verdict::Inconclusive | super::Verdict::NoLimit => Tone::Warn,
    }
}

/// `value ± sigma unit` via the terminal formatter, or the value alone without a σ.
fn pm(value: f64, sigma: Option<f64>, unit: &str) -> String {
    match sigma {
        Some(s) if s.is_finite() && s > 0.0 => {
            let big = value.abs().max(s);
            if (1e-3..1e6).contains(&big) {
                super::terminal::value_sigma(value, s, unit)
            } else {
                let exp = big.log10().floor() as i32;
                let scale = 10f64.powi(exp);
                let d = super::terminal::decimals_for(s / scale);
                format!("({:.d$} ± {:.d$})e{exp} {unit}", value / scale, s / scale)
            }
        }
        _ => format!("{} {unit}", short(value)),
    }
}

/// A number with about four significant digits.
fn short(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let a = v.abs();
    if (1e-3..1e6).contains(&a) {
        let d = (3 - a.log10().floor() as i32).clamp(0, 9) as usize;
        format!("{v:.d$}")
    } else {
        format!("{v:.3e}")
    }
}
