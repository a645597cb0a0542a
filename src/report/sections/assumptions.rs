//! What the verdicts rest on, echoed from the plan (and from the results where a check
//! assumed something itself, such as the orbit of the dipole torque): the article and
//! who tested it where, the mounting of the magnetometer, the rods' and probes'
//! positions, the site, the orbit and the calibration applied to the readings. A
//! reviewer compares these with the drawings before signing.
//!
//! The HTML report shows this section first; the terminal summary leaves it out.

use nalgebra::{Matrix3, Vector3};

use super::super::model::{Cell, Section, Table, Verdict};
use super::short;
use crate::log::Plan;

/// The section's kind.
pub const KIND: &str = "assumptions";

fn v3(v: &Vector3<f64>) -> String {
    format!("({}, {}, {})", short(v[0]), short(v[1]), short(v[2]))
}

/// A rotation as the plan's axis shorthand when it is a signed permutation, else rows.
fn rotation(m: &Matrix3<f64>) -> String {
    let mut axes = Vec::new();
    for i in 0..3 {
        let row = m.row(i);
        match (0..3).find(|&j| (row[j].abs() - 1.0).abs() < 1e-9) {
            Some(j) => axes.push(format!(
                "{}{}",
                if row[j] > 0.0 { "+" } else { "-" },
                ["x", "y", "z"][j]
            )),
            None => {
                let rows: Vec<String> = (0..3)
                    .map(|r| v3(&Vector3::new(m[(r, 0)], m[(r, 1)], m[(r, 2)])))
                    .collect();
                return rows.join(" ");
            }
        }
    }
    format!("[{}]", axes.join(", "))
}

/// A row; the part is named with its serial when the plan gives one.
fn row(part: &str, serial: Option<&str>, what: &str, value: String, unit: &str) -> Vec<Cell> {
    let part = match serial {
        Some(s) => format!("{part} (serial {s})"),
        None => part.to_string(),
    };
    vec![
        Cell::plain(part),
        Cell::plain(what),
        Cell::plain(value),
        Cell::plain(unit),
    ]
}

fn article_table(plan: &Plan) -> Table {
    let mut rows = Vec::new();
    let mut add = |k: &str, v: Option<&str>| {
        rows.push(vec![Cell::plain(k), Cell::plain(v.unwrap_or("not given"))]);
    };
    let a = plan.article.as_ref();
    add("serial", a.map(|a| a.serial.as_str()));
    add("build", a.map(|a| a.build.as_str()));
    add("operator", a.and_then(|a| a.operator.as_deref()));
    add("facility", a.and_then(|a| a.facility.as_deref()));
    add("notes", a.and_then(|a| a.notes.as_deref()));
    add("plan", Some(&plan.path.display().to_string()));
    if let Some(gyro) = &plan.gyro {
        add("gyro serial", gyro.serial.as_deref());
    }
    Table {
        caption: "Article, operator and facility ([article] of the plan)".into(),
        header: vec!["item".into(), "as given".into()],
        rows,
    }
}

/// One rod's rows: axis, centre, nominal dipole, length, settle time.
fn rod_rows(r: &crate::log::plan::Rod) -> Vec<Vec<Cell>> {
    let mut rows = Vec::new();
    let s = r.serial.as_deref();
    let part = format!("rod {}", r.name);
    rows.push(row(
        &part,
        s,
        "positive dipole axis, body frame",
        v3(&r.axis_body),
        "unit vector",
    ));
    rows.push(row(&part, s, "centre, body frame", v3(&r.position_m), "m"));
    if let Some(d) = r.dipole_per_command_am2 {
        rows.push(row(
            &part,
            s,
            "nominal dipole per command",
            short(d),
            "A·m² per command unit",
        ));
    }
    if let Some(l) = r.length_m {
        rows.push(row(&part, s, "length", short(l), "m"));
    }
    let settle = r.settle_s.map_or(
        format!(
            "{} (default)",
            short(crate::check::calibrate::DEFAULT_SETTLE_S)
        ),
        short,
    );
    rows.push(row(
        &part,
        s,
        "settle time blanked in a calibration",
        settle,
        "s",
    ));
    rows
}

fn geometry_rows(plan: &Plan) -> Vec<Vec<Cell>> {
    let mut rows = Vec::new();
    if let Some(m) = &plan.magnetometer {
        let s = m.serial.as_deref();
        rows.push(row(
            "magnetometer",
            s,
            "mounting (sensor axes along body x, y, z)",
            rotation(&m.sensor_to_body),
            "axes (sensor → body)",
        ));
        if let Some(p) = &m.position_m {
            rows.push(row("magnetometer", s, "position, body frame", v3(p), "m"));
        }
    }
    rows.extend(plan.rods.iter().flat_map(rod_rows));
    if let Some(p) = &plan.probe {
        rows.push(row(
            "probe",
            None,
            "position, body frame",
            v3(&p.position_m),
            "m",
        ));
        rows.push(row(
            "probe",
            None,
            "mounting (sensor axes along body x, y, z)",
            rotation(&p.sensor_to_body),
            "axes (probe → body)",
        ));
    }
    if let Some(c) = &plan.cage {
        rows.push(row(
            "cage",
            None,
            "mounting (body axes along cage x, y, z)",
            rotation(&c.article_to_cage),
            "axes (body → cage)",
        ));
    }
    if let Some(d) = &plan.dipole_test {
        if let Some(p) = &d.probe_position_m {
            rows.push(row(
                "turntable probe",
                None,
                "position, table frame",
                v3(p),
                "m",
            ));
        }
        for m in &d.mounts {
            rows.push(row(
                "turntable mount",
                None,
                &format!("mount \"{}\" (body axes along table x, y, z)", m.label),
                rotation(&m.body_to_table),
                "axes (body → table)",
            ));
        }
    }
    rows
}

fn site_orbit_rows(plan: &Plan, results: &[&serde_json::Value]) -> Vec<Vec<Cell>> {
    let mut rows = Vec::new();
    if let Some(s) = &plan.site {
        rows.push(row(
            "site",
            None,
            "latitude",
            short(s.lat_deg),
            "° (geodetic)",
        ));
        rows.push(row("site", None, "longitude", short(s.lon_deg), "° east"));
        rows.push(row("site", None, "altitude", short(s.alt_m), "m (WGS-84)"));
        rows.push(row(
            "site",
            None,
            "date",
            s.date
                .map_or("not given (model epoch)".into(), |d| d.to_string()),
            "date (UTC)",
        ));
        if let Some(r) = s.reference_nt {
            rows.push(row(
                "site",
                None,
                "reference |B| (overrides the model)",
                short(r),
                "nT",
            ));
        }
    }
    for r in results {
        if let (Some(alt), Some(inc)) = (r["altitude_km"].as_f64(), r["inclination_deg"].as_f64()) {
            let model = r["orbit_field_model"].as_str().unwrap_or("");
            rows.push(row(
                "orbit (dipole torque)",
                None,
                &format!("altitude; field model {model}"),
                short(alt),
                "km",
            ));
            rows.push(row(
                "orbit (dipole torque)",
                None,
                "inclination",
                short(inc),
                "°",
            ));
        }
    }
    rows
}

/// The assumptions of a run under `plan`; `results` are the JSON of its checks.
/// The section, for the checks whose report sections are `kinds` (`calibrate`,
/// `polarity`, …) and whose JSON results are `results`.
pub fn assumptions_section(plan: &Plan, kinds: &[&str], results: &[&serde_json::Value]) -> Section {
    let mut rows = geometry_rows(plan);
    rows.extend(site_orbit_rows(plan, results));
    let mut tables = vec![article_table(plan)];
    if !rows.is_empty() {
        tables.push(Table {
            caption: "Mounting, positions, site and orbit the verdicts rest on (the plan's, \
                      unless a check says it measured them)"
                .into(),
            header: vec![
                "part".into(),
                "quantity".into(),
                "value".into(),
                "unit".into(),
            ],
            rows,
        });
    }
    let mut notes = vec![calibration_note(kinds)];
    notes.push(
        "Compare every position and mounting above with the vehicle's drawings: a \
         verdict is only as good as the geometry it was judged against."
            .into(),
    );
    Section {
        kind: KIND.into(),
        title: "Assumptions".into(),
        verdict: Verdict::NoLimit,
        figures_of_merit: Vec::new(),
        tables,
        figures: Vec::new(),
        warnings: Vec::new(),
        notes,
        result: serde_json::Value::Null,
    }
}

/// What calibration each check present applied to the readings it judged.
fn calibration_note(kinds: &[&str]) -> String {
    let has = |k: &str| kinds.contains(&k);
    let mut parts = Vec::new();
    if has("calibrate") || has("polarity") {
        parts.push("calibration and polarity read the raw magnetometer readings (sensor frame)");
    }
    if has("dipole") {
        parts.push("the dipole test reads its own probe");
    }
    if has("rod") {
        parts.push("the rod bench reads its probe's raw readings less the rod-off background");
    }
    if has("orbit") {
        parts.push("the orbit fit reads raw telemetry and fits its own calibration");
    }
    if parts.is_empty() {
        return "Calibration applied to the readings: none.".into();
    }
    format!(
        "Calibration applied to the readings: none; {}.",
        parts.join("; ")
    )
}
