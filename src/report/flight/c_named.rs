//! Per-magnetometer blocks of the C header for a run with several magnetometers: each
//! magnetometer's hard iron, W and `sensor_to_body` under its own name
//! (`MAGPROOF_MAG_<NAME>_HARD_IRON_NT`, `_SOFT_IRON`, `_SENSOR_TO_BODY`), beside the
//! indexed arrays (`MAGPROOF_MAG_HARD_IRON_NT[MAGPROOF_MAG_INDEX_<NAME>]`), so flight
//! code can take one sensor's numbers by name, and the rod coupling at it
//! (`MAGPROOF_MAG_<NAME>_ROD_COUPLING_NT_PER_CMD[rod][axis]`) when a polarity check
//! measured it there, even when the indexed coupling array (which needs every
//! magnetometer) is left out. A magnetometer that was not calibrated has no hard-iron or
//! W block, and a comment says so.

use std::collections::HashSet;
use std::fmt::Write as _;

use super::c_header::{arrays, c_ident, comment, Nest};
use super::{FlightParams, PREFIX};
use crate::Error;

/// The named blocks (nothing for a run with one magnetometer: the indexed arrays are its).
pub(super) fn named_blocks(s: &mut String, p: &FlightParams) -> Result<(), Error> {
    if p.magnetometers.len() < 2 {
        return Ok(());
    }
    for mag in &p.magnetometers {
        let id = c_ident(&mag.name);
        let who = comment(&mag.name);
        let _ = writeln!(s, "/* Magnetometer {who}: its numbers by name. */");
        match &mag.calibration {
            Some(cal) => {
                arrays(
                    s,
                    &format!("{who}: hard iron c, sensor frame, nT."),
                    &format!("MAG_{id}_HARD_IRON_NT"),
                    "[3]",
                    &Nest::v3(&cal.hard_iron_nt),
                )?;
                arrays(
                    s,
                    &format!("{who}: soft-iron correction W, row-major, sensor frame."),
                    &format!("MAG_{id}_SOFT_IRON"),
                    "[3][3]",
                    &Nest::m3(&cal.soft_iron),
                )?;
            }
            None => {
                let _ = writeln!(
                    s,
                    "/* {who} was not calibrated in this run: {PREFIX}_MAG_{id}_HARD_IRON_NT \
                     and {PREFIX}_MAG_{id}_SOFT_IRON are not defined. */\n"
                );
            }
        }
        if let Some(rows) = mag
            .rod_coupling_nt_per_command
            .as_ref()
            .filter(|r| !r.is_empty())
        {
            arrays(
                s,
                &format!("{who}: rod coupling, sensor frame, nT per command unit: [rod][axis]."),
                &format!("MAG_{id}_ROD_COUPLING_NT_PER_CMD"),
                &format!("[{}][3]", rows.len()),
                &Nest::List(rows.iter().map(Nest::v3).collect()),
            )?;
        }
        arrays(
            s,
            &format!(
                "{who}: rotation sensor -> body, row-major (source: {}).",
                format!("{:?}", mag.sensor_to_body_source).to_lowercase()
            ),
            &format!("MAG_{id}_SENSOR_TO_BODY"),
            "[3][3]",
            &Nest::m3(&mag.sensor_to_body),
        )?;
    }
    Ok(())
}

/// Refuse a header that defines one name twice (a magnetometer or rod name that, made
/// a C name, meets another name of the header): the compiler would refuse it, or worse,
/// a macro would silently take another's value.
pub(super) fn refuse_duplicate_names(text: &str) -> Result<(), Error> {
    // The one name defined in both branches of an `#if`: the attribute macro.
    let unused = format!("{PREFIX}_UNUSED");
    let mut seen = HashSet::new();
    for line in text.lines() {
        let name = if let Some(rest) = line.strip_prefix("#define ") {
            rest.split_whitespace().next()
        } else if let Some(rest) = line.strip_prefix("static const ") {
            rest.split_whitespace()
                .nth(1)
                .map(|n| n.split('[').next().unwrap_or(n))
        } else {
            None
        };
        if let Some(n) = name.filter(|n| *n != unused) {
            if !seen.insert(n.to_string()) {
                return Err(Error::Usage(format!(
                    "the C header would define {n} twice: a magnetometer or rod name meets \
                     another name of the header; rename it in the plan to write a C header"
                )));
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_name_defined_twice_is_refused() {
        let ok = "#define MAGPROOF_A 1\nstatic const double MAGPROOF_B[3] X = { 1 };\n";
        assert!(refuse_duplicate_names(ok).is_ok());
        let twice = format!("{ok}static const float MAGPROOF_B[3] X = {{ 1 }};\n");
        let e = refuse_duplicate_names(&twice).unwrap_err();
        assert!(e.to_string().contains("MAGPROOF_B twice"), "{e}");
    }
}
