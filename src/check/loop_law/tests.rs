//! Tests of the loop check: round trips through the closed-loop simulator (known faults
//! → verdicts), and the B-dot power against its closed form.

use nalgebra::Vector3;

use super::*;
use crate::check::{CheckInput, InputOptions};
use crate::log::plan::parse_plan;
use crate::sim::loop_law::{simulate_loop, LoopFault, LoopSimConfig};

fn run_text(csv: &str, plan: &str) -> LoopResult {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("loop.csv");
    std::fs::write(&log, csv).unwrap();
    let plan = parse_plan(plan, &dir.path().join("plan.toml")).unwrap();
    let input = CheckInput::read(&log, Some(&plan), &InputOptions::default()).unwrap();
    run_loop(&CheckRequest::new(
        &input,
        Some(&plan),
        LoopOptions::default(),
    ))
    .unwrap()
}

fn run_sim(cfg: &LoopSimConfig, seed: u64) -> LoopResult {
    let sim = simulate_loop(cfg, seed, "loop.csv").unwrap();
    run_text(&sim.csv, &sim.plan_toml)
}

fn verdicts(r: &LoopResult) -> Vec<&'static str> {
    r.rods.iter().map(|f| f.verdict.word()).collect()
}

#[test]
fn a_correct_bdot_law_passes_and_removes_energy() {
    let r = run_sim(&LoopSimConfig::default(), 11);
    assert_eq!(r.verdict, Verdict::Pass, "{:?}", r.gates);
    assert_eq!(r.energy, Energy::Removes);
    assert!(r.power_mean_w < 0.0);
    assert_eq!(verdicts(&r), ["consistent"; 3]);
    assert_eq!(r.rate_source, RateSource::Gyro);
}

#[test]
fn a_wrong_software_sign_on_y_is_reversed() {
    let cfg = LoopSimConfig {
        faults: vec![LoopFault::RodSign(1)],
        ..LoopSimConfig::default()
    };
    let r = run_sim(&cfg, 12);
    assert_eq!(verdicts(&r), ["consistent", "reversed", "consistent"]);
    assert_eq!(r.verdict, Verdict::Fail);
    assert!(r.rods[1].correlation.unwrap() < -0.8);
}

#[test]
fn a_swapped_sensor_mapping_is_cross_wired_or_reversed() {
    let cfg = LoopSimConfig {
        faults: vec![LoopFault::SwapSensor(0, 1)],
        ..LoopSimConfig::default()
    };
    let r = run_sim(&cfg, 13);
    assert_eq!(r.verdict, Verdict::Fail);
    for f in &r.rods[..2] {
        assert!(
            matches!(f.verdict, RodVerdict::CrossWired | RodVerdict::Reversed),
            "{f:?}"
        );
    }
    assert_eq!(r.rods[2].verdict, RodVerdict::Consistent);
}

#[test]
fn a_gyro_sign_fault_under_the_rate_law_is_caught() {
    let cfg = LoopSimConfig {
        law: ControlLaw::Rate,
        faults: vec![LoopFault::GyroSign(2)],
        ..LoopSimConfig::default()
    };
    let r = run_sim(&cfg, 14);
    assert_eq!(r.verdict, Verdict::Fail, "{:?}", r.rods);
    assert!(r.rods.iter().any(|f| f.verdict != RodVerdict::Consistent));
    // The same law without the fault passes.
    let ok = run_sim(
        &LoopSimConfig {
            law: ControlLaw::Rate,
            ..LoopSimConfig::default()
        },
        14,
    );
    assert_eq!(ok.verdict, Verdict::Pass, "{:?}", ok.gates);
}

#[test]
fn too_little_motion_is_inconclusive_not_a_pass_or_a_fail() {
    let cfg = LoopSimConfig {
        rate0_deg_s: Vector3::new(0.02, -0.01, 0.03),
        ..LoopSimConfig::default()
    };
    let r = run_sim(&cfg, 15);
    assert_eq!(r.verdict, Verdict::Inconclusive, "{:?}", r.gates);
    assert!(r.rods.iter().all(|f| f.verdict == RodVerdict::Inconclusive));
}

#[test]
fn without_a_gyro_the_rate_comes_from_the_field_and_the_law_still_passes() {
    let cfg = LoopSimConfig {
        log_gyro: false,
        ..LoopSimConfig::default()
    };
    let r = run_sim(&cfg, 16);
    assert_eq!(r.rate_source, RateSource::FieldDerivative);
    assert_eq!(r.verdict, Verdict::Pass, "{:?}", r.gates);
    assert!(r.warnings.contains(&LoopWarning::RateFromField));
}

/// The B-dot law's power against its closed form (derivation from Stickler & Alfriend
/// 1976 and Avanzini & Giulietti 2012, both cited from memory):
///
/// B fixed in space, so in the body frame Ḃ = −ω × B. With m = −k Ḃ = k (ω × B),
/// τ = m × B = k (ω × B) × B, and
/// P = ω·τ = k ω·((ω × B) × B) = −k |ω × B|²   (since a·(b × c) = (a × b)·c with
/// a = ω, b = ω × B, c = B gives (ω × (ω × B))·B = −|ω × B|²),
/// never positive: B-dot only ever removes energy, at the rate k |ω × B|².
///
/// A steady spin ω about body z in a field with a component along z: the log is written
/// from the analytic field, the commands from m = k ω × B exactly (the ideal B-dot with a
/// perfect derivative); the check's power must equal −k |ω × B|² computed here.
#[test]
fn bdot_power_matches_the_closed_form_on_a_worked_example() {
    let w = Vector3::new(0.0, 0.0, 0.2_f64); // rad/s about body z
    let (bh, bz) = (30_000.0_f64, 40_000.0_f64); // nT, horizontal and along the spin axis
    let k_am2_per_nt_s = 2.0e-5; // gain, A·m² per nT/s
    let per_cmd = 0.15; // A·m² per command
    let mut csv = String::from("t,bx,by,bz,gx [rad/s],gy [rad/s],gz [rad/s],cmd_x,cmd_y,cmd_z\n");
    for i in 0..2000 {
        let t = i as f64 * 0.05;
        let a = w.z * t;
        // Body sees the inertial field turn backwards: B_b = (bh cos a, −bh sin a, bz).
        // A few nT of dither on z keeps the screens from taking the axis for stuck or
        // railed; ω × B has no z part of B in it, so the closed form is untouched.
        let dither = 5.0 * (i as f64 * 1.7).sin();
        let b = Vector3::new(bh * a.cos(), -bh * a.sin(), bz + dither);
        let m = w.cross(&b) * k_am2_per_nt_s; // −k Ḃ with Ḃ = −ω × B
        let c = m / per_cmd;
        csv += &format!(
            "{t},{},{},{},0,0,{},{},{},{}\n",
            b.x, b.y, b.z, w.z, c.x, c.y, c.z
        );
    }
    let plan = "[control]\nlaw = \"bdot\"\n\
        [[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\ndipole_per_command_am2 = 0.15\n\
        [[rod]]\nname = \"y\"\naxis_body = [0, 1, 0]\nposition_m = [0, 0, 0]\ndipole_per_command_am2 = 0.15\n\
        [[rod]]\nname = \"z\"\naxis_body = [0, 0, 1]\nposition_m = [0, 0, 0]\ndipole_per_command_am2 = 0.15\n";
    let r = run_text(&csv, plan);
    // |ω × B| = ω·bh (B's part ⊥ ω), in T/s; k in A·m² per T/s is k·1e9.
    let closed_form_w = -(k_am2_per_nt_s * 1e9) * (w.z * bh * 1e-9).powi(2);
    let rel = (r.power_mean_w - closed_form_w).abs() / closed_form_w.abs();
    assert!(
        rel < 1e-3,
        "check {} W, closed form {closed_form_w} W",
        r.power_mean_w
    );
    assert_eq!(r.energy, Energy::Removes);
    assert_eq!(verdicts(&r)[..2], ["consistent", "consistent"]);
    // z is never commanded (ω × B has no z part here): not driven, and the check fails.
    assert_eq!(r.rods[2].verdict, RodVerdict::NotDriven);
}

/// The energy word from a mean and its σ: beyond 3σ below zero removes, beyond 3σ above
/// adds, within 3σ (or not finite) none (the 3σ rule: common practice).
#[test]
fn the_energy_word_needs_three_sigma_either_way() {
    assert_eq!(energy_of(-4.0e-6, 1.0e-6), Energy::Removes);
    assert_eq!(energy_of(4.0e-6, 1.0e-6), Energy::Adds);
    assert_eq!(energy_of(-2.9e-6, 1.0e-6), Energy::None);
    assert_eq!(energy_of(2.9e-6, 1.0e-6), Energy::None);
    assert_eq!(energy_of(-1.0, f64::NAN), Energy::None);
    assert_eq!(energy_of(f64::NAN, 1.0), Energy::None);
}

#[test]
fn a_law_reversed_on_every_rod_adds_energy_and_fails() {
    let cfg = LoopSimConfig {
        faults: vec![
            LoopFault::RodSign(0),
            LoopFault::RodSign(1),
            LoopFault::RodSign(2),
        ],
        ..LoopSimConfig::default()
    };
    let sim = simulate_loop(&cfg, 17, "loop.csv").unwrap();
    // The truth: the simulated body gained energy.
    assert!(sim.truth.energy_end_j > sim.truth.energy_start_j);
    let r = run_text(&sim.csv, &sim.plan_toml);
    assert_eq!(
        r.energy,
        Energy::Adds,
        "{} ± {}",
        r.power_mean_w,
        r.power_sigma_w
    );
    assert!(r.power_mean_w > 3.0 * r.power_sigma_w);
    assert_eq!(verdicts(&r), ["reversed"; 3]);
    assert_eq!(r.verdict, Verdict::Fail);
    let added = r
        .gates
        .iter()
        .find(|g| g.name == "power_added_sigmas")
        .unwrap();
    assert!(!added.ok, "{added:?}");
}

#[test]
fn commands_sent_to_the_wrong_rods_are_cross_wired() {
    let cfg = LoopSimConfig {
        faults: vec![LoopFault::SwapCommands(0, 1)],
        ..LoopSimConfig::default()
    };
    let r = run_sim(&cfg, 18);
    assert_eq!(verdicts(&r), ["cross-wired", "cross-wired", "consistent"]);
    assert_eq!(r.rods[0].best_other.as_ref().unwrap().0, "y");
    assert_eq!(r.rods[1].best_other.as_ref().unwrap().0, "x");
    assert_eq!(r.verdict, Verdict::Fail);
}

/// A spin-up about body z, worked by hand. The body turns at ω ≈ 0.2 rad/s about z
/// (a small wobble keeps the samples from being identical) towards a target of 20 deg/s;
/// the field B_b = (bh cos a, −bh sin a, bz). The software commands
/// m = g (ω_t − ω_z)(B × z) per rod, so τ·z = (m × B)·z = m·(B × z)
/// = g (ω_t − ω_z) |B × z|² (scalar triple product), and the spin term
/// (ω_z − ω_t)(τ·z) = −g (ω_t − ω_z)² bh² (|B × z| = bh): negative, the rate is driven
/// towards the target. z is never commanded (B × z has no z part): `unused`. The same
/// law with its sign reversed must fail.
#[test]
fn a_spin_law_matches_its_closed_form_and_a_reversed_one_fails() {
    let target = 20.0_f64.to_radians();
    let (bh, bz) = (30_000.0_f64, 40_000.0_f64); // nT
    let g = 2.0e-6; // command per (rad/s · nT)
    let per_cmd = 0.15; // A·m² per command
    let log = |sign: f64| -> (String, f64) {
        let mut csv =
            String::from("t,bx,by,bz,gx [rad/s],gy [rad/s],gz [rad/s],cmd_x,cmd_y,cmd_z\n");
        let mut closed = 0.0;
        let n = 2000;
        for i in 0..n {
            let t = i as f64 * 0.05;
            let wz = 0.2 + 0.002 * (i as f64 * 1.3).sin();
            let a = 0.2 * t;
            let dither = 5.0 * (i as f64 * 1.7).sin();
            let b = Vector3::new(bh * a.cos(), -bh * a.sin(), bz + dither);
            let c = b.cross(&Vector3::z()) * (g * (target - wz) * sign);
            // Per sample: (ω_z − ω_t) · per_cmd · c·(B × z) in W (B in T).
            closed += (wz - target) * per_cmd * c.dot(&b.cross(&Vector3::z())) * 1e-9;
            csv += &format!(
                "{t},{},{},{},0,0,{wz},{},{},{}\n",
                b.x, b.y, b.z, c.x, c.y, c.z
            );
        }
        (csv, closed / n as f64)
    };
    let plan = "[control]\nlaw = \"rate\"\nintent = \"spin\"\nspin_axis_body = [0, 0, 1]\n\
        spin_rate_deg_s = 20.0\n\
        [[rod]]\nname = \"x\"\naxis_body = [1, 0, 0]\nposition_m = [0, 0, 0]\ndipole_per_command_am2 = 0.15\n\
        [[rod]]\nname = \"y\"\naxis_body = [0, 1, 0]\nposition_m = [0, 0, 0]\ndipole_per_command_am2 = 0.15\n\
        [[rod]]\nname = \"z\"\naxis_body = [0, 0, 1]\nposition_m = [0, 0, 0]\ndipole_per_command_am2 = 0.15\n";
    let (csv, closed_w) = log(1.0);
    // Leading term by hand: −g (ω_t − ω_z)² bh² per_cmd, B in T.
    let by_hand = -g * (target - 0.2).powi(2) * bh * bh * per_cmd * 1e-9;
    assert!(((closed_w - by_hand) / by_hand).abs() < 1e-3);
    let r = run_text(&csv, plan);
    let spin = r.spin.unwrap();
    assert!(
        ((spin.mean_w - closed_w) / closed_w).abs() < 1e-2,
        "check {} W, closed form {closed_w} W",
        spin.mean_w
    );
    assert_eq!(verdicts(&r), ["consistent", "consistent", "unused"]);
    assert_eq!(r.verdict, Verdict::Pass, "{:?}", r.gates);
    // Spinning up adds energy, which is what a spin law is for.
    assert_eq!(r.energy, Energy::Adds);
    let r = run_text(&log(-1.0).0, plan);
    assert_eq!(verdicts(&r), ["reversed", "reversed", "unused"]);
    assert_eq!(r.verdict, Verdict::Fail);
}
