//! Round trips through `sim::polarity`: known wiring faults, lag, drift and noise must
//! come back as the right verdicts and numbers.

use std::path::Path;

use approx::assert_relative_eq;
use nalgebra::Vector3;

use super::*;
use crate::log::plan::parse_plan;
use crate::log::read_sweep_from;
use crate::sim::polarity::{simulate_polarity, PolarityConfig, PolaritySim};

fn check(sim: &PolaritySim) -> PolarityResult {
    let plan = parse_plan(&sim.plan_toml, Path::new("sim.plan.toml")).unwrap();
    let log = read_sweep_from(
        sim.csv.as_bytes(),
        Path::new("sim.csv"),
        &Default::default(),
        &mut |_| {},
    )
    .unwrap();
    // The plan's magnetometer range applies, as closeout reads a polarity log.
    let range_nt = plan.magnetometer.as_ref().and_then(|m| m.range_nt);
    let input = crate::check::CheckInput::screen(log, Default::default(), range_nt).unwrap();
    run_polarity(&CheckRequest::new(
        &input,
        Some(&plan),
        PolarityOptions::default(),
    ))
    .unwrap()
}

fn verdicts(r: &PolarityResult) -> Vec<&'static str> {
    r.rods.iter().map(|r| r.verdict.as_str()).collect()
}

#[test]
fn healthy_rods_pass_with_coupling_lag_and_gain() {
    let sim = simulate_polarity(&PolarityConfig::default(), 11).unwrap();
    let r = check(&sim);
    eprintln!("{}", serde_json::to_string_pretty(&r).unwrap());
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
    assert!(r.pass);
    for (rod, truth) in r.rods.iter().zip(&sim.truth.rods) {
        let c = Vector3::from(rod.coupling_nt_per_command);
        let t = Vector3::from(truth.coupling_nt_per_command);
        assert!((c - t).norm() < 0.03 * t.norm(), "{}: {c} vs {t}", rod.name);
        assert_relative_eq!(
            rod.gain_ratio.unwrap(),
            truth.gain_ratio,
            max_relative = 0.03
        );
        assert!(rod.angle_to_expected_deg.unwrap() < 2.0);
    }
    assert!((r.lag_s - sim.truth.lag_s).abs() < 0.02, "lag {}", r.lag_s);
}

fn assert_close(got: [f64; 3], want: [f64; 3], tol_nt: f64, what: &str) {
    let d = Vector3::from(got) - Vector3::from(want);
    assert!(d.norm() < tol_nt, "{what}: got {got:?}, want {want:?}");
}

#[test]
fn remanence_and_settle_time_are_measured() {
    let sim = simulate_polarity(&PolarityConfig::default(), 12).unwrap();
    let r = check(&sim);
    for (rod, truth) in r.rods.iter().zip(&sim.truth.rods) {
        let rem = rod.remanent_offset_nt.unwrap();
        assert_close(rem, truth.remanent_offset_nt, 3.0, &rod.name);
        // Lag 0.03 s plus a 0.02 s first-order fall to within 3σ (3·3 nT of ~2000 nT:
        // ln(2000/9) ≈ 5.4 time constants ≈ 0.11 s), sampled every 0.02 s.
        let settle = rod.settle_time_s.unwrap();
        assert!(
            settle > 0.08 && settle < 0.25,
            "{}: settle {settle}",
            rod.name
        );
    }
}

fn run(cfg: &PolarityConfig, seed: u64) -> (PolaritySim, PolarityResult) {
    let sim = simulate_polarity(cfg, seed).unwrap();
    let r = check(&sim);
    (sim, r)
}

#[test]
fn reversed_rod_is_called_reversed_and_fails() {
    let mut cfg = PolarityConfig::default();
    cfg.rods[1].reversed = true;
    let (sim, r) = run(&cfg, 21);
    assert_eq!(verdicts(&r), ["ok", "reversed", "ok"]);
    assert!(!r.pass);
    let y = &r.rods[1];
    assert!(y.angle_to_expected_deg.unwrap() > 178.0);
    assert_close(
        y.coupling_nt_per_command,
        sim.truth.rods[1].coupling_nt_per_command,
        40.0,
        "y",
    );
}

#[test]
fn swapped_rods_are_wrong_axis_and_name_each_other() {
    let cfg = PolarityConfig {
        swapped: Some((0, 1)),
        ..Default::default()
    };
    let (_, r) = run(&cfg, 22);
    assert_eq!(verdicts(&r), ["wrong-axis", "wrong-axis", "ok"]);
    assert_eq!(r.rods[0].matches_rod.as_deref(), Some("y"));
    assert_eq!(r.rods[1].matches_rod.as_deref(), Some("x"));
    assert_eq!(r.rods[0].matches_reversed, Some(false));
}

#[test]
fn dead_rod_is_no_response() {
    let mut cfg = PolarityConfig::default();
    cfg.rods[2].gain = 0.0;
    cfg.rods[2].remanent_am2 = 0.0;
    let (_, r) = run(&cfg, 23);
    assert_eq!(verdicts(&r), ["ok", "ok", "no-response"]);
    assert!(r.rods[2].snr < 5.0);
}

// Pure delay of 2.5 samples with edges on the sample grid: a step is only seen at the
// next sample, so the estimate can be off by up to half a sample.
#[test]
fn pure_delay_is_found_within_half_a_sample() {
    let cfg = PolarityConfig {
        lag_s: 0.05,
        rise_time_s: 0.0,
        ..Default::default()
    };
    let (_, r) = run(&cfg, 24);
    assert!((r.lag_s - 0.05).abs() <= 0.0101, "lag {}", r.lag_s);
}

// With a first-order rise of time constant τ the response's main step comes between the
// pure delay and delay + τ.
#[test]
fn long_lag_with_rise_time_is_found_and_applied() {
    let cfg = PolarityConfig {
        lag_s: 0.2,
        rise_time_s: 0.02,
        ..Default::default()
    };
    let (sim, r) = run(&cfg, 25);
    assert!(r.lag_s > 0.19 && r.lag_s < 0.23, "lag {}", r.lag_s);
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
    for (rod, t) in r.rods.iter().zip(&sim.truth.rods) {
        let c = Vector3::from(rod.coupling_nt_per_command);
        assert!((c - Vector3::from(t.coupling_nt_per_command)).norm() < 0.01 * c.norm());
    }
}

// Strong drift and noise: couplings agree with the truth within their stated 1σ (4σ
// allowed per axis) and the verdicts hold.
#[test]
fn strong_drift_and_noise_do_not_leak_into_couplings() {
    let cfg = PolarityConfig {
        drift_nt_per_s: Vector3::new(25.0, -40.0, 10.0),
        wander_nt: 400.0,
        wander_period_s: 30.0,
        noise_nt: 40.0,
        cycles: 4,
        ..Default::default()
    };
    let (sim, r) = run(&cfg, 26);
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
    for (rod, t) in r.rods.iter().zip(&sim.truth.rods) {
        for a in 0..3 {
            let err = rod.coupling_nt_per_command[a] - t.coupling_nt_per_command[a];
            let s = rod.coupling_sigma_nt_per_command[a];
            assert!(
                err.abs() < 4.0 * s,
                "{} axis {a}: error {err} vs σ {s}",
                rod.name
            );
        }
    }
    assert!((r.noise_sigma_nt[0] - 40.0).abs() < 6.0);
}

// Broadside to a rod the field opposes its dipole: a healthy rod must be "ok" although
// its coupling is negative along its own axis (a bare-sign check would call it reversed).
#[test]
fn broadside_sensor_sees_opposite_field_and_still_passes() {
    let mut cfg = PolarityConfig::default();
    cfg.rods.truncate(1);
    cfg.rods[0].position_m = Vector3::zeros();
    cfg.sensor_position_m = Vector3::new(0.0, 0.0, 0.3);
    let (_, r) = run(&cfg, 27);
    let x = &r.rods[0];
    assert_eq!(x.verdict, Verdict::Ok);
    assert!(x.coupling_nt_per_command[0] < 0.0);
    // Textbook broadside field −μ0 m/(4π r³) per A·m², here along −x.
    assert_relative_eq!(
        x.expected_nt_per_am2[0],
        -100.0 / 0.027,
        max_relative = 1e-12
    );
}

#[test]
fn rotated_probe_geometry_is_used() {
    let cfg = PolarityConfig {
        as_probe: true,
        sensor_position_m: Vector3::new(0.25, 0.1, 0.05),
        sensor_to_body: crate::physics::frames::rotation_from_axes(&["+y", "-x", "+z"]).unwrap(),
        ..Default::default()
    };
    let (_, r) = run(&cfg, 28);
    assert_eq!(r.sensor, SensorChoice::Probe);
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
}

#[test]
fn rods_with_parallel_expected_fields_are_inconclusive() {
    let mut cfg = PolarityConfig::default();
    // Rod y turned to point along x, next to rod x: both give fields along nearly the
    // same line at the sensor.
    cfg.rods[1].axis_body = Vector3::x();
    cfg.rods[1].position_m = Vector3::new(0.0, 0.06, 0.0);
    let (_, r) = run(&cfg, 29);
    assert_eq!(verdicts(&r), ["inconclusive", "inconclusive", "ok"]);
    assert!(!r.pass);
    assert!(r
        .warnings
        .iter()
        .any(|w| w.to_string().contains("cannot be seen")));
}

#[test]
fn close_sensor_uses_the_two_pole_model_and_default_limit_is_said() {
    let mut cfg = PolarityConfig {
        angle_max_deg: None,
        finite_rod_radius_m: Some(0.0),
        ..Default::default()
    };
    cfg.rods[0].length_m = 0.1;
    cfg.rods[1].length_m = 0.04;
    let (_, r) = run(&cfg, 30);
    assert_eq!(
        r.rods[0].expected_model,
        super::finite::RodFieldModel::TwoPole
    );
    assert_eq!(
        r.rods[1].expected_model,
        super::finite::RodFieldModel::PointDipole
    );
    assert_eq!(r.rods[0].gain_reliable, Some(true));
    assert_eq!(r.rods[1].gain_reliable, Some(true));
    assert_eq!(r.angle_max_source, "default");
    assert!(r.warnings.iter().any(|w| w.to_string().contains("30°")));
    assert!(r
        .warnings
        .iter()
        .any(|w| w.to_string().contains("two-pole model")));
}

fn request_error(csv: &str, plan: &str) -> String {
    let plan = parse_plan(plan, Path::new("p.toml")).unwrap();
    let log = read_sweep_from(
        csv.as_bytes(),
        Path::new("s.csv"),
        &Default::default(),
        &mut |_| {},
    )
    .unwrap();
    let input = match crate::check::CheckInput::screen(log, Default::default(), None) {
        Ok(i) => i,
        Err(e) => return e.to_string(),
    };
    run_polarity(&CheckRequest::new(
        &input,
        Some(&plan),
        PolarityOptions::default(),
    ))
    .unwrap_err()
    .to_string()
}

const ONE_ROD: &str = "[magnetometer]\nposition_m = [0, 0, 0.3]\n[[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\n";

#[test]
fn refusals_name_their_reason() {
    let quiet = "t,bx,by,bz,cmd_x\n0,1,2,3,0\n1,1,2,3,0\n2,1,2,3,0\n";
    assert!(request_error(quiet, ONE_ROD).contains("no pulses"));
    let no_col = "t,bx,by,bz,cmd_y\n0,1,2,3,0\n1,1,2,3,1\n2,1,2,3,0\n";
    assert!(request_error(no_col, ONE_ROD).contains("cmd_x"));
    let plan_no_rod = "[magnetometer]\nposition_m = [0, 0, 0.3]\n";
    assert!(request_error(quiet, plan_no_rod).contains("[rod]"));
    let plan_no_pos = ONE_ROD.replace("position_m = [0, 0, 0.3]\n", "unit = \"nT\"\n");
    assert!(request_error(quiet, &plan_no_pos).contains("magnetometer.position_m"));
}

#[test]
fn readings_at_the_range_are_left_out_and_reported() {
    let mut sim = simulate_polarity(&PolarityConfig::default(), 31).unwrap();
    // bz sits near −41 µT and the z rod adds about ±4 µT: the negative pulses reach
    // beyond 44 µT.
    sim.plan_toml = sim
        .plan_toml
        .replace("unit = \"nT\"", "unit = \"nT\"\nrange_nt = 44000.0");
    let full = check(&simulate_polarity(&PolarityConfig::default(), 31).unwrap());
    let r = check(&sim);
    assert!(
        r.warnings
            .iter()
            .any(|w| w.to_string().contains("saturated")),
        "{:?}",
        r.warnings
    );
    assert!(r.samples_used < full.samples_used);
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
}

// A logger clock that runs late on the command column makes the response appear to
// lead: the lag comes out negative and is still applied. Here the delay is exactly five
// samples, so rounding puts some steps at the fourth sample and some at the fifth: the
// estimate is good to one sample.
#[test]
fn negative_lag_is_reported_as_negative() {
    let cfg = PolarityConfig {
        lag_s: -0.1,
        rise_time_s: 0.0,
        ..Default::default()
    };
    let (_, r) = run(&cfg, 32);
    assert!((r.lag_s + 0.1).abs() <= 0.0201, "lag {}", r.lag_s);
    assert_eq!(verdicts(&r), ["ok", "ok", "ok"]);
}

// An hour-scale log (far more rows than the evenly thinned series keeps) with one
// sample 3000 nT high inside a pulse: the stacked view's rows are kept at full
// resolution, so the spike is in the plot series although the thinning stride skips it.
#[test]
fn a_one_sample_spike_inside_a_pulse_is_kept_in_the_plot_series() {
    let cfg = PolarityConfig {
        cycles: 12,
        sample_rate_hz: 100.0,
        ..PolarityConfig::default()
    };
    let mut sim = simulate_polarity(&cfg, 5).unwrap();
    let lines: Vec<&str> = sim.csv.lines().collect();
    let h = lines.iter().position(|l| !l.starts_with('#')).unwrap();
    let header: Vec<&str> = lines[h].split(',').collect();
    let cmd = header.iter().position(|h| h.starts_with("cmd_")).unwrap();
    let bx = header.iter().position(|h| h.starts_with("bx")).unwrap();
    let rows = lines.len() - h - 1;
    let stride = rows.div_ceil(PolaritySeries::MAX_POINTS);
    assert!(stride >= 2, "{rows} rows: the log must be thinned");
    // A row well inside the second pulse of the first command column, off the stride.
    let on: Vec<usize> = (h + 1..lines.len())
        .filter(|&i| {
            lines[i]
                .split(',')
                .nth(cmd)
                .unwrap()
                .parse::<f64>()
                .unwrap()
                != 0.0
        })
        .collect();
    let second = on
        .iter()
        .position(|&i| i > on[0] + 1 && !on.contains(&(i - 1)))
        .unwrap();
    let mut row = on[second] + 20;
    while (row - h - 1) % stride == 0 {
        row += 1;
    }
    let mut cells: Vec<String> = lines[row].split(',').map(String::from).collect();
    let spiked = cells[bx].parse::<f64>().unwrap() + 3000.0;
    cells[bx] = format!("{spiked}");
    let t_spike: f64 = cells[0].parse().unwrap();
    let mut text: Vec<String> = lines.iter().map(|l| l.to_string()).collect();
    text[row] = cells.join(",");
    sim.csv = text.join("\n") + "\n";
    let r = check(&sim);
    let s = &r.series;
    let k = s
        .t_s
        .iter()
        .position(|t| (t - t_spike).abs() < 1e-9)
        .unwrap();
    assert!(!s.thinned[k], "the spike's row is off the thinning stride");
    let before = s.field_minus_drift_nt[0][k - 1];
    assert!(
        s.field_minus_drift_nt[0][k] - before > 2500.0,
        "{} after {before}",
        s.field_minus_drift_nt[0][k]
    );
    assert!(s.thinned.iter().filter(|x| **x).count() <= PolaritySeries::MAX_POINTS);
}
