//! The plan's `[orbit]` table: the two-line element set `orbit` propagates, the
//! reference temperature of its fit, and the circular orbit `dipole` judges torques on.

use serde::Deserialize;

use super::rod_bench::Check;
use crate::log::PlanError;
use crate::physics::orbit::Orbit;

/// `[orbit]` as written.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOrbit {
    tle: Option<Vec<String>>,
    altitude_km: Option<f64>,
    inclination_deg: Option<f64>,
    reference_temperature_c: Option<f64>,
}

/// `[orbit]`.
#[derive(Debug, Clone, Default)]
pub struct OrbitPlan {
    /// Two-line element set (lines 1 and 2), checked when `orbit` propagates it.
    pub tle: Option<[String; 2]>,
    /// Altitude of a circular orbit, km (for `dipole`).
    pub altitude_km: Option<f64>,
    /// Inclination, deg, 0..180 (for `dipole`).
    pub inclination_deg: Option<f64>,
    /// Temperature the orbit fit's hard iron refers to, °C (default: the log's mean).
    pub reference_temperature_c: Option<f64>,
}

/// Validate `[orbit]`: every refused value is named by file, line and key
/// (`orbit.tle[1]`, `orbit.altitude_km`), and the element set is parsed with SGP4 here,
/// so a bad checksum or a bad field is found when the plan is read, on its line.
pub(super) fn orbit(v: &dyn Check, raw: RawOrbit) -> Result<OrbitPlan, PlanError> {
    let tle = raw.tle.map(|lines| element_set(v, lines)).transpose()?;
    in_range(
        v,
        "orbit.altitude_km",
        raw.altitude_km,
        (100.0, 40_000.0),
        "km",
    )?;
    in_range(
        v,
        "orbit.inclination_deg",
        raw.inclination_deg,
        (0.0, 180.0),
        "deg",
    )?;
    in_range(
        v,
        "orbit.reference_temperature_c",
        raw.reference_temperature_c,
        (-150.0, 150.0),
        "°C",
    )?;
    Ok(OrbitPlan {
        tle,
        altitude_km: raw.altitude_km,
        inclination_deg: raw.inclination_deg,
        reference_temperature_c: raw.reference_temperature_c,
    })
}

/// An optional value that, when given, is finite and within `lo..=hi` (in `unit`).
fn in_range(
    v: &dyn Check,
    key: &str,
    x: Option<f64>,
    (lo, hi): (f64, f64),
    unit: &str,
) -> Result<(), PlanError> {
    match x {
        Some(x) if !(x.is_finite() && (lo..=hi).contains(&x)) => {
            Err(v.invalid(key, format!("must lie in {lo}..{hi} {unit}, found {x}")))
        }
        _ => Ok(()),
    }
}

/// The two lines of an element set: each the right line of the set, and the pair one
/// SGP4 accepts (checksums and fields checked by the `sgp4` crate).
fn element_set(v: &dyn Check, lines: Vec<String>) -> Result<[String; 2], PlanError> {
    let [a, b]: [String; 2] = lines.try_into().map_err(|l: Vec<String>| {
        v.invalid(
            "orbit.tle",
            format!("must hold two lines, found {}", l.len()),
        )
    })?;
    for (k, (line, first)) in [(&a, '1'), (&b, '2')].into_iter().enumerate() {
        let t = line.trim();
        if !t.starts_with(first) || t.len() < 69 || t.chars().any(|c| c.is_control()) {
            return Err(v.invalid(
                &format!("orbit.tle[{k}]"),
                format!(
                    "must be the element set's line {first}: 69 characters starting with \
                     \"{first} \", found \"{}\"",
                    t.escape_debug()
                ),
            ));
        }
    }
    if let Err(e) = Orbit::from_tle(&a, &b) {
        return Err(v.invalid("orbit.tle", e.to_string()));
    }
    Ok([a, b])
}

#[cfg(test)]
mod tests {
    use std::path::Path;

    use crate::log::plan::parse_plan;
    use crate::log::PlanError;
    use crate::sim::orbit::DEMO_TLE;

    /// The error of a plan whose `[orbit]` table is `orbit` (written from line 4 on).
    fn refusal(orbit: &str) -> String {
        let text = format!("[article]\nserial = \"X\"\nbuild = \"1\"\n[orbit]\n{orbit}");
        match parse_plan(&text, Path::new("p.toml")) {
            Err(e @ PlanError::InvalidAt { .. }) => e.to_string(),
            other => panic!("expected a refusal with a line, got {other:?}"),
        }
    }

    fn tle(line1: &str, line2: &str) -> String {
        format!("tle = [\n  \"{line1}\",\n  \"{line2}\",\n]\n")
    }

    #[test]
    fn a_good_element_set_and_orbit_parse() {
        let text = format!(
            "[orbit]\n{}altitude_km = 525.0\ninclination_deg = 97.52\n",
            tle(DEMO_TLE[0], DEMO_TLE[1])
        );
        let p = parse_plan(&text, Path::new("p.toml")).unwrap();
        let o = p.orbit.unwrap();
        assert_eq!(o.tle.unwrap()[1], DEMO_TLE[1]);
        assert_eq!(o.altitude_km, Some(525.0));
    }

    #[test]
    fn a_bad_checksum_is_named_by_line_and_key() {
        // The last digit of line 1 is its checksum (modulo 10 of its digits, a minus
        // counting one): changing it breaks the set as the TLE format defines it.
        let bad = DEMO_TLE[0].replace("0  9993", "0  9994");
        let e = refusal(&tle(&bad, DEMO_TLE[1]));
        assert!(e.starts_with("p.toml:5: key \"orbit.tle\""), "{e}");
        assert!(e.contains("does not parse"), "{e}");
    }

    #[test]
    fn a_wrong_line_of_the_set_is_named_by_its_own_line() {
        let e = refusal(&tle(DEMO_TLE[0], &DEMO_TLE[1].replacen('2', "3", 1)));
        assert!(e.starts_with("p.toml:7: key \"orbit.tle[1]\""), "{e}");
        let e = refusal("tle = [\"1 only one line\"]\n");
        assert!(e.starts_with("p.toml:5: key \"orbit.tle\""), "{e}");
        assert!(e.contains("two lines, found 1"), "{e}");
    }

    #[test]
    fn out_of_range_orbit_values_are_named_by_line_and_key() {
        let e = refusal("inclination_deg = 51.6\naltitude_km = -500.0\n");
        assert!(e.starts_with("p.toml:6: key \"orbit.altitude_km\""), "{e}");
        assert!(e.contains("found -500"), "{e}");
        let e = refusal("altitude_km = 500.0\ninclination_deg = 181.0\n");
        assert!(
            e.starts_with("p.toml:6: key \"orbit.inclination_deg\""),
            "{e}"
        );
        let e = refusal("reference_temperature_c = nan\n");
        assert!(
            e.starts_with("p.toml:5: key \"orbit.reference_temperature_c\""),
            "{e}"
        );
    }
}
