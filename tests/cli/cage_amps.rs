//! A cage sweep logged as coil currents (`ix iy iz`) through the binary: with the
//! plan's `[cage] nt_per_amp` (and `ambient_nt`) it gives the answer of the same sweep
//! logged as applied fields, which is checked against numpy.linalg.lstsq
//! (tests/data/calib_refs.json, "cage", made by tests/data/gen/calibration_refs.py).

use nalgebra::{Matrix3, Vector3};

use crate::util::{assert_code, assert_stderr_has, json_stdout, TestDir};

const DATA: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data");

/// An invented cage: about 20 µT per ampere per axis with a little cross-coupling
/// (common practice for a cage of a metre or two), and an ambient field.
fn coil_constant() -> Matrix3<f64> {
    Matrix3::new(
        20_000.0, 150.0, -80.0, //
        120.0, 19_500.0, 60.0, //
        -90.0, 40.0, 21_000.0,
    )
}
const AMBIENT_NT: [f64; 3] = [1200.0, -3400.0, 800.0];

/// `calib_cage.csv` with each applied field `h` written as the currents
/// `i = K⁻¹ (h − ambient)`, A, to 15 significant digits.
fn currents_log(dir: &TestDir, ambient: bool) -> std::path::PathBuf {
    let text = std::fs::read_to_string(format!("{DATA}/calib_cage.csv")).unwrap();
    let k_inv = coil_constant().try_inverse().unwrap();
    let a = if ambient {
        Vector3::from(AMBIENT_NT)
    } else {
        Vector3::zeros()
    };
    let mut out = String::from("t [s],ix [A],iy [A],iz [A],bx [nT],by [nT],bz [nT]\n");
    for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let c: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        let i = k_inv * (Vector3::new(c[1], c[2], c[3]) - a);
        out.push_str(&format!(
            "{},{:.15e},{:.15e},{:.15e},{},{},{}\n",
            c[0], i[0], i[1], i[2], c[4], c[5], c[6]
        ));
    }
    dir.write("amps.csv", out)
}

fn plan(dir: &TestDir, cage: &str) -> std::path::PathBuf {
    let k = coil_constant();
    let rows: Vec<String> = (0..3)
        .map(|r| format!("[{}, {}, {}]", k[(r, 0)], k[(r, 1)], k[(r, 2)]))
        .collect();
    dir.write(
        "plan.toml",
        format!(
            "[cage]\narticle_to_cage = [\"+x\", \"+y\", \"+z\"]\nnt_per_amp = [{}]\n{cage}",
            rows.join(", ")
        ),
    )
}

fn calibrate(
    dir: &TestDir,
    log: &std::path::Path,
    plan: Option<&std::path::Path>,
) -> serde_json::Value {
    let mut cmd = dir.magproof();
    cmd.args(["calibrate", "--json"]).arg(log);
    if let Some(p) = plan {
        cmd.arg("--plan").arg(p);
    }
    let out = cmd.output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    json_stdout(&out)
}

fn f(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap()
}

#[test]
fn cage_in_amps_gives_the_answer_of_the_sweep_logged_as_fields() {
    let dir = TestDir::new();
    let refs: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(format!("{DATA}/calib_refs.json")).unwrap())
            .unwrap();
    let fit = &refs["cage"]["fit"];
    let fields = calibrate(
        &dir,
        &std::path::PathBuf::from(format!("{DATA}/calib_cage.csv")),
        None,
    );
    let log = currents_log(&dir, true);
    let p = plan(&dir, &format!("ambient_nt = {AMBIENT_NT:?}\n"));
    let amps = calibrate(&dir, &log, Some(&p));
    assert_eq!(amps["method"], "cage");
    // Numerical noise only: the currents carry 15 digits, the fields 4 decimals.
    for a in 0..3 {
        let (o, t) = (f(&amps["hard_iron_nt"][a]), f(&fields["hard_iron_nt"][a]));
        assert!((o - t).abs() < 1e-6, "b0[{a}] {o} vs {t}");
        let numpy = f(&fit["hard_iron_nt"][a]);
        assert!((o - numpy).abs() < 1e-6, "b0[{a}] {o} vs numpy {numpy}");
        for b in 0..3 {
            let (o, t) = (f(&amps["soft_iron"][a][b]), f(&fields["soft_iron"][a][b]));
            assert!((o - t).abs() < 1e-10, "W[{a}][{b}] {o} vs {t}");
        }
    }
    let (o, t) = (f(&amps["residual_rms_nt"]), f(&fields["residual_rms_nt"]));
    assert!((o - t).abs() < 1e-6, "rms {o} vs {t}");
    assert!(!amps["warnings"].to_string().contains("ambient"));
}

#[test]
fn without_ambient_the_ambient_folds_into_the_hard_iron_and_the_report_says_so() {
    let dir = TestDir::new();
    let fields = calibrate(
        &dir,
        &std::path::PathBuf::from(format!("{DATA}/calib_cage.csv")),
        None,
    );
    // The same currents, but the plan does not give the ambient field: the fitted
    // offset is then b0 + A·ambient (b = A (K i + ambient) + b0).
    let log = currents_log(&dir, true);
    let p = plan(&dir, "");
    let amps = calibrate(&dir, &log, Some(&p));
    let resp = &fields["cage"]["response"];
    for a in 0..3 {
        let folded: f64 = (0..3).map(|b| f(&resp[a][b]) * AMBIENT_NT[b]).sum();
        let want = f(&fields["hard_iron_nt"][a]) + folded;
        let got = f(&amps["hard_iron_nt"][a]);
        assert!((got - want).abs() < 1e-5, "axis {a}: {got} vs {want}");
    }
    assert!(
        amps["warnings"]
            .to_string()
            .contains("folded into the hard"),
        "{}",
        amps["warnings"]
    );
}

#[test]
fn currents_without_a_coil_constant_are_refused_by_name() {
    let dir = TestDir::new();
    let log = currents_log(&dir, false);
    let out = dir.run(&["calibrate", log.to_str().unwrap()]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["ix [A]", "nt_per_amp"]);
    let p = dir.write(
        "p.toml",
        "[cage]\narticle_to_cage = [\"+x\", \"+y\", \"+z\"]\n",
    );
    let out = dir.run(&[
        "calibrate",
        log.to_str().unwrap(),
        "--plan",
        p.to_str().unwrap(),
    ]);
    assert_code(&out, 2);
    assert_stderr_has(&out, &["ix [A]", "nt_per_amp"]);
}
