//! Which magnetometer an orbit run reads. The telemetry reader takes the field from
//! `bx by bz`; a plan's magnetometer logged under other columns cannot be read by it,
//! and is refused by name rather than calibrated from another sensor's columns.

use crate::log::Plan;
use crate::Error;

/// The field columns the telemetry reader reads.
pub const TELEMETRY_FIELD_COLUMNS: [&str; 3] = ["bx", "by", "bz"];

/// Refuse a selected magnetometer whose plan entry names field columns other than
/// `bx by bz`.
pub fn require_telemetry_columns(plan: Option<&Plan>) -> Result<(), Error> {
    let Some(m) = plan.and_then(|p| p.magnetometer.as_ref()) else {
        return Ok(());
    };
    match &m.columns {
        Some(c) if c.iter().zip(TELEMETRY_FIELD_COLUMNS).any(|(a, b)| a != b) => {
            Err(Error::Usage(format!(
                "magnetometer {} is logged in the columns {}, {}, {}; orbit reads the field \
                 from bx, by, bz: write the telemetry of this magnetometer under those names",
                m.name.as_deref().unwrap_or("(unnamed)"),
                c[0],
                c[1],
                c[2]
            )))
        }
        _ => Ok(()),
    }
}
