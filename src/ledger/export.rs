//! CSV export of the ledger for spreadsheets: the values of every run (one row per run and
//! quantity, "long" layout) and the build-to-build changes (one row per change).
//! A control character in a cell (text of a ledger written before plans refused them)
//! is written as its escape (`\u{1b}`), so the CSV shown on a terminal cannot act on it.

use std::io::Write;

use super::history::Change;
use super::quantity::QuantityValue;
use super::Run;

/// Columns of [`write_values_csv`].
pub const VALUES_HEADER: [&str; 10] = [
    "serial",
    "build",
    "kind",
    "run_id",
    "recorded_at",
    "quantity",
    "value",
    "sigma",
    "unit",
    "pass",
];

/// Columns of [`write_changes_csv`].
pub const CHANGES_HEADER: [&str; 11] = [
    "serial",
    "from_build",
    "to_build",
    "kind",
    "quantity",
    "from",
    "to",
    "delta",
    "sigma",
    "unit",
    "flag",
];

fn cell(v: Option<f64>) -> String {
    v.map(|x| format!("{x}")).unwrap_or_default()
}

fn opt_bool(v: Option<bool>) -> &'static str {
    match v {
        Some(true) => "true",
        Some(false) => "false",
        None => "",
    }
}

/// One row per run and quantity (numbers with σ and unit; verdicts as words), in
/// recorded order. Empty cells mean "none".
pub fn write_values_csv(runs: &[Run], out: &mut dyn Write) -> Result<(), csv::Error> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record(VALUES_HEADER)?;
    for run in runs {
        for q in &run.quantities {
            let (value, sigma) = match &q.value {
                QuantityValue::Number { value, sigma } => (format!("{value}"), cell(*sigma)),
                QuantityValue::Verdict(s) => (s.clone(), String::new()),
                QuantityValue::Pass(b) => (b.to_string(), String::new()),
            };
            w.write_record(
                [
                    run.serial.as_str(),
                    &run.build,
                    run.kind.as_str(),
                    &run.id.0.to_string(),
                    &run.recorded_at,
                    &q.name,
                    &value,
                    &sigma,
                    &q.unit,
                    opt_bool(run.pass),
                ]
                .map(crate::text::printable),
            )?;
        }
    }
    w.flush()?;
    Ok(())
}

fn value_cell(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::Null => String::new(),
        serde_json::Value::String(s) => s.clone(),
        serde_json::Value::Number(n) => n.as_f64().map(|x| format!("{x}")).unwrap_or_default(),
        other => other.to_string(),
    }
}

/// One row per change.
pub fn write_changes_csv(changes: &[Change], out: &mut dyn Write) -> Result<(), csv::Error> {
    let mut w = csv::Writer::from_writer(out);
    w.write_record(CHANGES_HEADER)?;
    for c in changes {
        w.write_record(
            [
                c.serial.as_str(),
                &c.from_build,
                &c.to_build,
                c.kind.as_str(),
                &c.quantity,
                &value_cell(&c.from),
                &value_cell(&c.to),
                &cell(c.delta),
                &cell(c.sigma),
                &c.unit,
                c.flag.as_str(),
            ]
            .map(crate::text::printable),
        )?;
    }
    w.flush()?;
    Ok(())
}
