//! Flight parameters of a plan with several magnetometers: each `[[magnetometer]]` gets
//! its own entry (hard iron, W, `sensor_to_body`, rod coupling at it) from the steps that
//! read it (a closeout step's `sensor`), assembled exactly as a single magnetometer's;
//! the rods, the blanking window and the worked examples are merged into one file set.

use super::{FlightParams, MagnetometerParams, Source, TestVector};
use crate::check::FlightPart;
use crate::Error;

/// The note every assembly adds about gyros; written once in a merged file.
const GYRO_NOTE_START: &str = "gyro bias and scale";

impl FlightParams {
    /// Assemble the parameters of a plan with several magnetometers: `sensors[i]` names
    /// the magnetometer `src.parts[i]` read (`None`: none, as a polarity check with the
    /// external probe). Each magnetometer is assembled from its own parts with the plan
    /// narrowed to it; a magnetometer no part read is listed with its plan mounting and
    /// no calibration (the header then leaves the per-magnetometer calibration arrays
    /// out, and its named block says why). The rods come from the first polarity check;
    /// the blanking window is the largest any gave.
    pub fn assemble_per_sensor(
        src: &super::FlightSources<'_>,
        sensors: &[Option<String>],
    ) -> Result<Self, Error> {
        let plan = src.plan.ok_or_else(|| {
            Error::Internal("per-magnetometer flight parameters need a plan".into())
        })?;
        if sensors.len() != src.parts.len() {
            return Err(Error::Internal("one sensor per flight part".into()));
        }
        if let Some(k) = (0..sensors.len())
            .find(|&k| sensors[k].is_none() && matches!(src.parts[k], FlightPart::Calibration(_)))
        {
            return Err(Error::Usage(format!(
                "calibration {} of the run reads no named magnetometer, and the plan lists \
                 several: give its step sensor = \"NAME\"",
                k + 1
            )));
        }
        let mut merged: Option<FlightParams> = None;
        let mut mags = Vec::new();
        let mut vectors = Vec::new();
        let mut notes = Vec::new();
        for m in &plan.magnetometers {
            let name = m.name.clone().unwrap_or_default();
            let parts = parts_of(src, sensors, Some(&name));
            if parts.is_empty() {
                notes.push(format!(
                    "magnetometer {name}: no step of this run read it; its hard iron and W \
                     are not given"
                ));
                mags.push(bare(m));
                continue;
            }
            let mut narrowed = plan.clone();
            narrowed.select_sensor(Some(&name))?;
            let one = FlightParams::assemble(&super::FlightSources {
                plan: Some(&narrowed),
                parts,
                ..src.clone()
            })?;
            let k = mags.len();
            mags.extend(one.magnetometers.iter().cloned());
            vectors.extend(one.test_vectors.iter().cloned().map(|v| TestVector {
                magnetometer: k,
                ..v
            }));
            notes.extend(
                one.notes
                    .iter()
                    .filter(|n| !n.starts_with(GYRO_NOTE_START))
                    .map(|n| format!("magnetometer {name}: {n}")),
            );
            merged = Some(merge_rods(merged, one));
        }
        let probe_parts = parts_of(src, sensors, None);
        if !probe_parts.is_empty() {
            let probe_plan = plan.clone();
            let one = FlightParams::assemble(&super::FlightSources {
                plan: Some(&probe_plan),
                parts: probe_parts,
                ..src.clone()
            })?;
            notes.extend(one.notes.iter().filter(|n| n.contains("[probe]")).cloned());
            merged = Some(merge_rods(merged, one));
        }
        let mut out = merged.ok_or_else(|| {
            Error::Usage("no flight parameters: the run has no calibrate or polarity result".into())
        })?;
        let rods = out.rod_order.len();
        for v in &mut vectors {
            v.commands.resize(rods, 0.0); // a magnetometer without coupling: rods off
        }
        notes.extend(
            out.notes
                .iter()
                .filter(|n| n.starts_with(GYRO_NOTE_START))
                .cloned(),
        );
        out.magnetometers = mags;
        out.test_vectors = vectors;
        out.notes = notes;
        Ok(out)
    }
}

/// The parts read by the magnetometer `name` (`None`: by none).
fn parts_of<'a>(
    src: &super::FlightSources<'a>,
    sensors: &[Option<String>],
    name: Option<&str>,
) -> Vec<FlightPart<'a>> {
    src.parts
        .iter()
        .zip(sensors)
        .filter(|(_, s)| s.as_deref() == name)
        .map(|(p, _)| *p)
        .collect()
}

/// A magnetometer no step read: its plan mounting, nothing measured.
fn bare(m: &crate::log::plan::Magnetometer) -> MagnetometerParams {
    MagnetometerParams {
        name: m.name.clone().unwrap_or_default(),
        serial: m.serial.clone(),
        calibration: None,
        sensor_to_body: std::array::from_fn(|i| {
            std::array::from_fn(|j| super::clean(m.sensor_to_body[(i, j)]))
        }),
        sensor_to_body_source: Source::Plan,
        rod_coupling_nt_per_command: None,
        rod_coupling_sigma_nt_per_command: None,
    }
}

/// Keep the first assembly that has rods (their dipoles and windows); the blanking
/// window is the largest of all.
fn merge_rods(acc: Option<FlightParams>, next: FlightParams) -> FlightParams {
    let Some(mut acc) = acc else {
        return next;
    };
    if acc.rods.is_empty() && !next.rods.is_empty() {
        acc.rods = next.rods;
        acc.rod_order = next.rod_order;
        acc.rod_lag_s = next.rod_lag_s;
        acc.blanking_window_s = next.blanking_window_s;
    } else if let (Some(a), Some(b)) = (acc.blanking_window_s, next.blanking_window_s) {
        acc.blanking_window_s = Some(a.max(b));
    }
    acc
}
