//! The bundled demo scenario: an invented 3U vehicle, "Tamarin" (serial `TMR-0207`),
//! through three builds, each with a test plan, a tumble log, a torque-rod pulse log and
//! a turntable log, all simulated from fixed seeds with the simulators of this module.
//!
//! - B1: the y torque rod is wired backwards; the polarity step catches it. The flight
//!   software's y command sign is wrong too (the two cancel on the air bearing); the
//!   loop step catches that as a `reversed` rod, and the sign chain names the pair. The
//!   morning's first turntable run found the magnetometer harness reversed on one axis
//!   (see `scenario_align`); the plan lists the repeat after it was re-terminated.
//! - B2: the harness is fixed; every step passes.
//! - B3: a battery-heater bracket with a magnetised steel insert was added in the lower
//!   bay; the residual dipole jumps well beyond its combined uncertainty (history flags
//!   it "significant") while staying inside the plan's limit.
//!
//! Every number here is invented; nothing comes from a real vehicle. [`sample_files`]
//! returns the files as text; `examples/make_sample_logs.rs` writes them to
//! `sample-logs/`, and a test checks that the committed files are byte-identical.

use std::fmt::Write as _;

use nalgebra::{Matrix3, Vector3};

use crate::physics::igrf::igrf_field;
use crate::sim::dipole::{simulate_turntable, SimMount, TurntableConfig};
use crate::sim::polarity::{simulate_polarity, PolarityConfig, SimRod};
use crate::sim::tumble::{simulate_tumble, write_tumble_csv, SimCoverage, TumbleConfig};
use crate::Error;

/// Vehicle serial number of the scenario.
pub const SERIAL: &str = "TMR-0207";

/// Test site (invented): geodetic latitude, deg.
pub const SITE_LAT_DEG: f64 = 46.2;
/// Test site: longitude, deg east.
pub const SITE_LON_DEG: f64 = 7.3;
/// Test site: altitude above the WGS-84 ellipsoid, m.
pub const SITE_ALT_M: f64 = 510.0;

/// Residual-dipole limit written into every plan, A·m².
pub const DIPOLE_LIMIT_AM2: f64 = 0.008;

/// What one build is, in truth.
#[derive(Debug, Clone)]
pub struct BuildTruth {
    /// Build label ("B1", …).
    pub build: &'static str,
    /// Folder name under `sample-logs/`.
    pub folder: &'static str,
    /// Test date, YYYY-MM-DD.
    pub date: &'static str,
    /// True magnetometer hard iron, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// True residual dipole, body frame, A·m².
    pub moment_body_am2: Vector3<f64>,
    /// Is the y rod wired backwards?
    pub y_rod_reversed: bool,
    /// Seeds of the tumble, pulse and turntable logs.
    pub seeds: [u64; 3],
    /// One line of story for the plan's header comment.
    pub story: &'static str,
}

/// The three builds, in order.
pub fn builds() -> [BuildTruth; 3] {
    let m_base = Vector3::new(0.0021, -0.0014, 0.0011);
    // The bracket adds about 3.3 mA·m², mostly along +x and +y.
    let bracket = Vector3::new(0.0026, 0.0019, -0.0006);
    [
        BuildTruth {
            build: "B1",
            folder: "tmr-0207-b1",
            date: "2026-03-10",
            hard_iron_nt: Vector3::new(1_180.0, -760.0, 430.0),
            moment_body_am2: m_base,
            y_rod_reversed: true,
            seeds: [1101, 1102, 1103],
            story: "first integration; the y torque rod's harness is wired backwards",
        },
        BuildTruth {
            build: "B2",
            folder: "tmr-0207-b2",
            date: "2026-04-21",
            hard_iron_nt: Vector3::new(1_180.0, -760.0, 430.0),
            moment_body_am2: m_base,
            y_rod_reversed: false,
            seeds: [2201, 2202, 2203],
            story: "y rod harness re-pinned; nothing else changed",
        },
        BuildTruth {
            build: "B3",
            folder: "tmr-0207-b3",
            date: "2026-06-02",
            hard_iron_nt: Vector3::new(1_195.0, -748.0, 426.0),
            moment_body_am2: m_base + bracket,
            y_rod_reversed: false,
            seeds: [3301, 3302, 3303],
            story: "battery-heater bracket (steel insert) added in the lower bay",
        },
    ]
}

/// Magnetometer mounting: sensor x along body +y, sensor y along body −x (a 90° turn
/// about z), `v_b = sensor_to_body · v_s`.
pub(crate) fn sensor_to_body() -> Matrix3<f64> {
    Matrix3::new(0.0, -1.0, 0.0, 1.0, 0.0, 0.0, 0.0, 0.0, 1.0)
}

fn sensor_position_m() -> Vector3<f64> {
    Vector3::new(0.02, 0.015, 0.21)
}

fn rods(y_reversed: bool) -> Vec<SimRod> {
    let rod = |name: &str, axis: [f64; 3], pos: [f64; 3], k: f64| SimRod {
        name: name.into(),
        axis_body: Vector3::from(axis),
        position_m: Vector3::from(pos),
        dipole_per_command_am2: k,
        length_m: 0.05,
        gain: 1.0,
        reversed: false,
        remanent_am2: 0.0015,
    };
    let mut r = vec![
        rod("x", [1.0, 0.0, 0.0], [0.0, 0.035, 0.03], 0.15),
        rod("y", [0.0, 1.0, 0.0], [0.035, 0.0, 0.03], 0.15),
        rod("z", [0.0, 0.0, 1.0], [-0.03, -0.03, 0.05], 0.12),
    ];
    r[1].reversed = y_reversed;
    r
}

fn mounts() -> Vec<SimMount> {
    vec![
        SimMount {
            label: "upright".into(),
            body_to_table: Matrix3::identity(),
        },
        SimMount {
            label: "on-side".into(),
            body_to_table: Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0),
        },
    ]
}

const PROBE_TABLE_M: [f64; 3] = [0.45, 0.0, 0.0];

fn parse_date(s: &str) -> Result<time::Date, Error> {
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    time::Date::parse(s, &fmt).map_err(|e| Error::Internal(format!("scenario date {s}: {e}")))
}

fn vec3(v: &Vector3<f64>) -> String {
    format!("[{}, {}, {}]", v.x, v.y, v.z)
}

fn mat3(m: &Matrix3<f64>) -> String {
    let row = |i: usize| format!("[{}, {}, {}]", m[(i, 0)], m[(i, 1)], m[(i, 2)]);
    format!("[{}, {}, {}]", row(0), row(1), row(2))
}

fn plan_toml(b: &BuildTruth) -> Result<String, Error> {
    let mut s = format!(
        "# Test plan of the invented 3U vehicle \"Tamarin\", serial {SERIAL}, build {}.\n\
         # {}.\n# Simulated data (magproof's simulators); see ../README.md.\n\n\
         [article]\nserial = \"{SERIAL}\"\nbuild = \"{}\"\n\n",
        b.build, b.story, b.build
    );
    let _ = writeln!(
        s,
        "[magnetometer]\nsensor_to_body = {}\nposition_m = {}\nunit = \"nT\"\n",
        mat3(&sensor_to_body()),
        vec3(&sensor_position_m())
    );
    let _ = writeln!(
        s,
        "[site]\nlat_deg = {SITE_LAT_DEG}\nlon_deg = {SITE_LON_DEG}\nalt_m = {SITE_ALT_M}\ndate = \"{}\"\n",
        b.date
    );
    let _ = writeln!(
        s,
        "# The planned orbit: the dipole torque is judged in it, not in an assumed one.\n\
         [orbit]\naltitude_km = {ORBIT_ALTITUDE_KM:.1}\ninclination_deg = {ORBIT_INCLINATION_DEG}\n"
    );
    for r in rods(false) {
        let _ = writeln!(
            s,
            "[[rod]]\nname = \"{}\"\naxis_body = {}\nposition_m = {}\n\
             dipole_per_command_am2 = {}\nlength_m = {}\n",
            r.name,
            vec3(&r.axis_body),
            vec3(&r.position_m),
            r.dipole_per_command_am2,
            r.length_m
        );
    }
    let _ = writeln!(
        s,
        "[dipole_test]\nprobe_position_m = [{}, {}, {}]",
        PROBE_TABLE_M[0], PROBE_TABLE_M[1], PROBE_TABLE_M[2]
    );
    for m in mounts() {
        let _ = writeln!(
            s,
            "[[dipole_test.mount]]\nlabel = \"{}\"\nbody_to_table = {}",
            m.label,
            mat3(&m.body_to_table)
        );
    }
    // The closed-loop run on the air bearing: the flight law and its gyro.
    let _ = writeln!(
        s,
        "\n[gyro]\nsensor_to_body = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]\n\n\
         [control]\nlaw = \"bdot\"\ngain = {LOOP_GAIN:e}\n"
    );
    // The turntable run of the morning (its own folder; in B1 the repeat after the
    // harness was re-terminated): the sensor axes and the gyro against the body.
    s.push_str(&super::scenario_align::align_test_toml()?);
    let align_log = super::scenario_align::build_step_log(b.build);
    for (kind, log) in [
        ("align", align_log.as_str()),
        ("calibrate", "tumble.csv"),
        ("polarity", "rod-pulses.csv"),
        ("dipole", "turntable.csv"),
        ("loop", "loop.csv"),
    ] {
        let _ = write!(s, "\n[[step]]\nkind = \"{kind}\"\nlog = \"{log}\"\n");
    }
    let _ = write!(
        s,
        "\n[limits]\nresidual_dipole_max_am2 = {DIPOLE_LIMIT_AM2}\n\
         calibration_residual_max_nt = 150.0\npolarity_angle_max_deg = 30.0\n"
    );
    Ok(s)
}

/// Reference field magnitude at the site on the build's date (IGRF-14), nT.
pub fn reference_nt(b: &BuildTruth) -> Result<f64, Error> {
    let f = igrf_field(SITE_LAT_DEG, SITE_LON_DEG, SITE_ALT_M, parse_date(b.date)?)
        .map_err(|e| Error::Internal(format!("scenario reference field: {e}")))?;
    Ok(f.total_nt)
}

/// Every file of one build: (path relative to `sample-logs/`, text).
pub fn build_files(b: &BuildTruth) -> Result<Vec<(String, String)>, Error> {
    let dir = b.folder;
    let tumble_cfg = TumbleConfig {
        samples: 3000,
        rate_hz: 10.0,
        reference_nt: reference_nt(b)?,
        hard_iron_nt: b.hard_iron_nt,
        soft_iron: Matrix3::new(
            1.032, 0.012, -0.018, 0.012, 0.975, 0.009, -0.018, 0.009, 1.011,
        ),
        noise_nt: 20.0,
        outlier_rate: 0.005,
        outlier_nt: Vector3::new(0.0, 0.0, 2_500.0),
        coverage: SimCoverage::FullSphere,
        temp_range_c: None,
        temp_slope_nt_per_c: Vector3::zeros(),
    };
    let tumble = simulate_tumble(&tumble_cfg, b.seeds[0])?;
    let mut tumble_csv = Vec::new();
    write_tumble_csv(&tumble, &mut tumble_csv)
        .map_err(|e| Error::Internal(format!("tumble CSV: {e}")))?;
    let tumble_csv =
        String::from_utf8(tumble_csv).map_err(|e| Error::Internal(format!("tumble CSV: {e}")))?;

    let pol_cfg = PolarityConfig {
        rods: rods(b.y_rod_reversed),
        sensor_position_m: sensor_position_m(),
        sensor_to_body: sensor_to_body(),
        ..PolarityConfig::default()
    };
    let pol = simulate_polarity(&pol_cfg, b.seeds[1])?;

    let mut tt = TurntableConfig {
        probe_position_m: Vector3::from(PROBE_TABLE_M),
        mounts: mounts(),
        ..TurntableConfig::default()
    };
    tt.article.moment_body_am2 = b.moment_body_am2;
    tt.article.noise_nt = 0.4;
    tt.article.ambient_nt = Vector3::new(22_240.0, 1_260.0, 42_410.0);
    let turn = simulate_turntable(&tt, b.seeds[2])?;

    Ok(vec![
        (format!("{dir}/plan.toml"), plan_toml(b)?),
        (format!("{dir}/tumble.csv"), tumble_csv),
        (format!("{dir}/rod-pulses.csv"), pol.csv),
        (format!("{dir}/turntable.csv"), turn.log_csv),
        (format!("{dir}/loop.csv"), loop_csv(b)?),
    ])
}

/// The B-dot gain of the vehicle's flight software, A·m² per nT/s.
const LOOP_GAIN: f64 = 2.0e-5;

/// The closed-loop run of a build on the air bearing: the flight B-dot law at 10 Hz for
/// 300 s, from a tumble of about 11 deg/s. In B1 the software's y command sign is wrong as well as the y harness — the
/// two cancel and the article detumbles, which is why each is proved on its own.
fn loop_csv(b: &BuildTruth) -> Result<String, Error> {
    use crate::sim::loop_law::{simulate_loop, LoopFault, LoopSimConfig};
    let cfg = LoopSimConfig {
        duration_s: 300.0,
        rate0_deg_s: Vector3::new(6.0, -5.0, 8.0),
        gain: LOOP_GAIN,
        sensor_to_body: sensor_to_body(),
        hard_iron_nt: b.hard_iron_nt,
        field_inertial_nt: Vector3::new(22_240.0, 1_260.0, 42_410.0),
        faults: if b.y_rod_reversed {
            vec![LoopFault::RodSign(1), LoopFault::RodWiring(1)]
        } else {
            Vec::new()
        },
        ..LoopSimConfig::default()
    };
    Ok(simulate_loop(&cfg, b.seeds[2] + 50, "loop.csv")?.csv)
}

/// Every file of the scenario except the README: (path relative to `sample-logs/`, text).
pub fn sample_files() -> Result<Vec<(String, String)>, Error> {
    let mut out = Vec::new();
    for b in builds() {
        out.extend(build_files(&b)?);
    }
    out.extend(super::scenario_rods::rod_batch_files()?);
    out.extend(orbit_files()?);
    out.extend(super::scenario_align::align_files()?);
    Ok(out)
}

/// Folder of the on-orbit pass under `sample-logs/`.
pub const ORBIT_FOLDER: &str = "tmr-0207-orbit";

/// On orbit, the hard iron moved from B3's by this much (sensor frame, nT): launch loads
/// shifted the heater bracket's steel insert. Invented, like everything here.
pub const ORBIT_HARD_IRON_SHIFT_NT: [f64; 3] = [35.0, 310.0, -20.0];

/// The vehicle's planned orbit (both the ground plans and the on-orbit plan give it):
/// altitude above the mean Earth radius, km, and inclination, deg.
pub const ORBIT_ALTITUDE_KM: f64 = 525.0;
/// See [`ORBIT_ALTITUDE_KM`].
pub const ORBIT_INCLINATION_DEG: f64 = 97.52;

/// Bias per ampere of solar-array current on orbit (sensor frame, nT/A).
pub const ORBIT_SOLAR_NT_PER_A: [f64; 3] = [-160.0, 240.0, 95.0];

/// The on-orbit pass after B3: 50 minutes of 1 Hz telemetry (no positions: the plan's
/// element set is propagated), with a solar-array current and the shifted hard iron.
pub fn orbit_files() -> Result<Vec<(String, String)>, Error> {
    use crate::sim::orbit::{simulate_orbit, OrbitSimConfig, SimPositions};
    let b3 = &builds()[2];
    let cfg = OrbitSimConfig {
        samples: 3000,
        hard_iron_nt: b3.hard_iron_nt + Vector3::from(ORBIT_HARD_IRON_SHIFT_NT),
        soft_iron: Matrix3::new(
            1.032, 0.012, -0.018, 0.012, 0.975, 0.009, -0.018, 0.009, 1.011,
        ),
        solar_nt_per_a: Vector3::from(ORBIT_SOLAR_NT_PER_A),
        rod_nt_per_command: None,
        temp_slope_nt_per_c: None,
        noise_nt: 25.0,
        positions: SimPositions::Tle,
        ..OrbitSimConfig::default()
    };
    let sim = simulate_orbit(&cfg, 4401)?;
    let plan = format!(
        "# On-orbit pass of the invented 3U vehicle \"Tamarin\", serial {SERIAL}, after B3.\n\
         # 50 minutes of 1 Hz telemetry with the solar-array current; positions from the\n\
         # element set. Simulated data (magproof's simulators); see ../README.md.\n\n\
         [article]\nserial = \"{SERIAL}\"\nbuild = \"orbit\"\n\n\
         [magnetometer]\nsensor_to_body = {}\nposition_m = {}\nunit = \"nT\"\n\n{}\
         altitude_km = {ORBIT_ALTITUDE_KM:.1}\ninclination_deg = {ORBIT_INCLINATION_DEG}\n\n\
         [[step]]\nkind = \"orbit\"\nlog = \"telemetry.csv\"\n",
        mat3(&sensor_to_body()),
        vec3(&sensor_position_m()),
        sim.plan_orbit
            .replace("reference_temperature_c = 20.0\n", "")
    );
    Ok(vec![
        (format!("{ORBIT_FOLDER}/plan.toml"), plan),
        (format!("{ORBIT_FOLDER}/telemetry.csv"), sim.csv),
    ])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plans_parse() {
        for b in builds() {
            let plan = crate::log::plan::parse_plan(
                &plan_toml(&b).unwrap(),
                std::path::Path::new("p.toml"),
            )
            .unwrap();
            assert_eq!(plan.rods.len(), 3);
            assert_eq!(plan.steps.len(), 5);
            assert_eq!(plan.align_test.unwrap().mounts.len(), 3);
            assert_eq!(plan.dipole_test.unwrap().mounts.len(), 2);
        }
    }

    /// The committed `sample-logs/` and this generator cannot drift apart: regenerating
    /// gives byte-identical files (`cargo run --example make_sample_logs` rewrites them).
    #[test]
    fn committed_sample_logs_match_the_generator() {
        let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-logs");
        for (rel, text) in sample_files().unwrap() {
            let committed = std::fs::read_to_string(root.join(&rel))
                .unwrap_or_else(|e| panic!("sample-logs/{rel}: {e}"));
            assert!(
                committed == text,
                "sample-logs/{rel} differs from the generator: run \
                 `cargo run --example make_sample_logs`"
            );
        }
    }
}
