//! `magproof simulate`: each kind of synthetic log goes through its check, and the check
//! recovers the simulator's truth within the uncertainty it reports (the round trip).
//! The truth is known by construction, so the comparison is independent of the fit.

use super::util::{assert_code, assert_stderr_has, json_stdout, TestDir};
use serde_json::Value;

/// Numbers of a JSON array (panics on a wrong shape: a test failure, not user data).
fn nums(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("not an array: {v}"))
        .iter()
        .flat_map(|x| match x {
            Value::Array(_) => nums(x),
            _ => vec![x.as_f64().unwrap_or_else(|| panic!("not a number: {x}"))],
        })
        .collect()
}

/// |fit − truth| ≤ k·σ for every element, with k = 4 (a 4σ miss happens ~1 in 16 000
/// per element for Gaussian errors; the seeds are fixed, so the test is repeatable).
fn assert_within(what: &str, fit: &Value, sigma: &Value, truth: &Value) {
    let (f, s, t) = (nums(fit), nums(sigma), nums(truth));
    assert_eq!(f.len(), t.len(), "{what}: shapes differ");
    assert_eq!(f.len(), s.len(), "{what}: shapes differ");
    for i in 0..f.len() {
        assert!(s[i] > 0.0, "{what}[{i}]: σ must be positive, got {}", s[i]);
        assert!(
            (f[i] - t[i]).abs() <= 4.0 * s[i],
            "{what}[{i}]: fit {} vs truth {} (σ {})",
            f[i],
            t[i],
            s[i]
        );
    }
}

fn simulate(dir: &TestDir, args: &[&str]) -> Value {
    let run = dir.run(args);
    assert_code(&run, 0);
    let out = args
        .iter()
        .position(|a| *a == "--out")
        .map(|i| args[i + 1])
        .expect("--out given");
    let text = std::fs::read_to_string(dir.join(out).join("truth.json")).expect("truth.json");
    serde_json::from_str(&text).expect("truth is JSON")
}

#[test]
fn tumble_round_trip_recovers_hard_and_soft_iron() {
    let d = TestDir::new();
    let t = simulate(
        &d,
        &[
            "simulate",
            "tumble",
            "--seed",
            "11",
            "--out",
            "t",
            "--hard-iron-nt",
            "900,-1500,250",
            "--soft-iron",
            "1.05,0.96,1.01,0.02,-0.01,0.015",
            "--noise-nt",
            "25",
            "--outlier-rate",
            "0.01",
            "--samples",
            "2500",
            "--reference-nt",
            "49500",
        ],
    );
    let run = d.run(&[
        "calibrate",
        "t/tumble.csv",
        "--plan",
        "t/plan.toml",
        "--json",
    ]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    assert_eq!(r["reference_nt"].as_f64(), Some(49_500.0));
    let truth = &t["truth"];
    assert_within(
        "hard iron",
        &r["hard_iron_nt"],
        &r["hard_iron_sigma_nt"],
        &truth["hard_iron_nt"],
    );
    assert_within(
        "soft iron",
        &r["soft_iron"],
        &r["soft_iron_sigma"],
        &truth["soft_iron"],
    );
    // Outliers are injected (1 %) and the robust fit rejects about that many.
    let injected = truth["outliers"].as_u64().expect("outliers");
    let rejected = r["samples_rejected"].as_u64().expect("rejected");
    assert!(
        injected > 5 && rejected >= injected / 2,
        "{injected} injected, {rejected} rejected"
    );
}

#[test]
fn cage_round_trip_recovers_the_full_correction() {
    let d = TestDir::new();
    let t = simulate(
        &d,
        &[
            "simulate",
            "cage",
            "--seed",
            "12",
            "--out",
            "c",
            "--hard-iron-nt",
            "-400,700,1200",
        ],
    );
    let run = d.run(&["calibrate", "c/cage.csv", "--plan", "c/plan.toml", "--json"]);
    assert_code(&run, 0);
    let r = json_stdout(&run);
    let truth = &t["truth"];
    assert_within(
        "hard iron",
        &r["hard_iron_nt"],
        &r["hard_iron_sigma_nt"],
        &truth["hard_iron_nt"],
    );
    // W = A⁻¹ includes the 1° misalignment, so it is not symmetric: a cage sees it.
    assert_within(
        "W",
        &r["soft_iron"],
        &r["soft_iron_sigma"],
        &truth["soft_iron"],
    );
}

#[test]
fn polarity_round_trip_finds_the_reversed_rod_and_the_couplings() {
    let d = TestDir::new();
    let t = simulate(
        &d,
        &[
            "simulate",
            "polarity",
            "--seed",
            "13",
            "--out",
            "p",
            "--reverse",
            "y",
            "--lag-s",
            "0.05",
        ],
    );
    let run = d.run(&[
        "polarity",
        "p/pulses.csv",
        "--plan",
        "p/plan.toml",
        "--json",
    ]);
    assert_code(&run, 1);
    let r = json_stdout(&run);
    assert_eq!(r["pass"], Value::Bool(false));
    for (fit, truth) in r["rods"]
        .as_array()
        .unwrap()
        .iter()
        .zip(t["truth"]["rods"].as_array().unwrap())
    {
        assert_eq!(fit["name"], truth["name"]);
        assert_eq!(fit["verdict"], truth["verdict"], "rod {}", fit["name"]);
        assert_within(
            "coupling",
            &fit["coupling_nt_per_command"],
            &fit["coupling_sigma_nt_per_command"],
            &truth["coupling_nt_per_command"],
        );
    }
    assert_eq!(r["rods"][1]["verdict"], "reversed");
}

#[test]
fn polarity_swapped_rods_are_wrong_axis() {
    let d = TestDir::new();
    let t = simulate(
        &d,
        &[
            "simulate", "polarity", "--seed", "14", "--out", "p", "--swap", "x,z",
        ],
    );
    let run = d.run(&[
        "polarity",
        "p/pulses.csv",
        "--plan",
        "p/plan.toml",
        "--json",
    ]);
    assert_code(&run, 1);
    let r = json_stdout(&run);
    let verdicts: Vec<&str> = r["rods"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["verdict"].as_str().unwrap())
        .collect();
    let truth: Vec<&str> = t["truth"]["rods"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["verdict"].as_str().unwrap())
        .collect();
    assert_eq!(truth, ["wrong-axis", "ok", "wrong-axis"]);
    assert_eq!(verdicts, truth);
}

#[test]
fn dipole_round_trip_recovers_the_moment_turntable_and_static() {
    for method in ["turntable", "static"] {
        let d = TestDir::new();
        let t = simulate(
            &d,
            &[
                "simulate",
                "dipole",
                "--seed",
                "15",
                "--out",
                "m",
                "--method",
                method,
                "--moment-am2",
                "0.004,-0.0025,0.0015",
                "--noise-nt",
                "0.3",
            ],
        );
        let log = format!("m/{}", t["log"].as_str().unwrap());
        let run = d.run(&["dipole", &log, "--plan", "m/plan.toml", "--json"]);
        assert_code(&run, 0);
        let r = json_stdout(&run);
        assert_within(
            &format!("{method} moment"),
            &r["moment_body_am2"],
            &r["moment_sigma_am2"],
            &t["truth"]["moment_body_am2"],
        );
    }
}

#[test]
fn same_seed_same_bytes_and_an_occupied_folder_is_refused() {
    let d = TestDir::new();
    simulate(
        &d,
        &[
            "simulate",
            "tumble",
            "--seed",
            "3",
            "--out",
            "a",
            "--samples",
            "200",
        ],
    );
    simulate(
        &d,
        &[
            "simulate",
            "tumble",
            "--seed",
            "3",
            "--out",
            "b",
            "--samples",
            "200",
        ],
    );
    for f in ["tumble.csv", "plan.toml", "truth.json"] {
        let a = std::fs::read(d.join("a").join(f)).unwrap();
        let b = std::fs::read(d.join("b").join(f)).unwrap();
        assert!(a == b, "{f} differs between two runs with the same seed");
    }
    let again = d.run(&["simulate", "tumble", "--seed", "4", "--out", "a"]);
    assert_code(&again, 2);
    assert_stderr_has(&again, &["not empty", "--force"]);
    let forced = d.run(&["simulate", "tumble", "--seed", "4", "--out", "a", "--force"]);
    assert_code(&forced, 0);
}

#[test]
fn bad_options_are_usage_errors() {
    let d = TestDir::new();
    let r = d.run(&[
        "simulate",
        "polarity",
        "--seed",
        "1",
        "--out",
        "p",
        "--reverse",
        "w",
    ]);
    assert_code(&r, 2);
    assert_stderr_has(&r, &["no rod named"]);
    assert!(
        !d.join("p").exists(),
        "a refused run must not leave a folder behind"
    );
    let r = d.run(&[
        "simulate",
        "tumble",
        "--seed",
        "1",
        "--out",
        "t",
        "--soft-iron",
        "1,1",
    ]);
    assert_code(&r, 2);
    let r = d.run(&[
        "simulate",
        "tumble",
        "--seed",
        "1",
        "--out",
        "t",
        "--outlier-rate",
        "2",
    ]);
    assert_code(&r, 2);
}
