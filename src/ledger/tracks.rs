//! Which magnetometer a run read, for history to compare like with like.
//!
//! A run recorded with a named sensor (a plan's `[[magnetometer]]`, chosen by `--sensor`
//! or a step's `sensor`) carries the name in its quantities, `hard_iron_x_nt@MAG-A`
//! (the ledger's `runs.sensor` column holds it too). Names of quantities and rods never
//! hold `@` (rod names are letters, digits, `_` and `-`), so the suffix is unambiguous.
//! Soft-iron elements keep their plain names: history folds them into one change.

use super::quantity::Quantity;
use super::Run;

/// The sensor a run read, from its quantities' suffix; `None` for an unnamed one.
pub fn sensor_of(run: &Run) -> Option<&str> {
    run.quantities
        .iter()
        .find_map(|q| q.name.split_once('@').map(|(_, s)| s))
}

/// The sensors runs of `kind` read, in order of first appearance (`None` first when
/// runs without a named sensor are there).
pub fn sensors_of<'a>(runs: &'a [Run], kind: &str) -> Vec<Option<&'a str>> {
    let mut out: Vec<Option<&str>> = Vec::new();
    for r in runs.iter().filter(|r| r.kind == kind) {
        let s = sensor_of(r);
        if !out.contains(&s) {
            out.push(s);
        }
    }
    out
}

/// Tag the quantities of a run that read the sensor `name` (soft-iron elements aside).
pub fn tag_quantities(quantities: &mut [Quantity], name: &str) {
    for q in quantities
        .iter_mut()
        .filter(|q| !q.name.starts_with("soft_iron_"))
    {
        q.name = format!("{}@{name}", q.name);
    }
}
