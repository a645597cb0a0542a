//! Run the dipole moment-and-offset fit once on `N` simulated samples and print the
//! result: a fixed, repeatable workload for instruction counting, e.g.
//!
//! ```text
//! cargo build --release --example dipole_fit_once
//! valgrind --tool=callgrind --toggle-collect='*fit_moment_and_offset*' \
//!     target/release/examples/dipole_fit_once 100000
//! ```
//!
//! The samples are those of `benches/dipole.rs` (`dipole_fit` group): two mounts, four
//! full turns, 1 nT noise, seed 7.

use magproof::fit::dipole::{fit_moment_and_offset, model_field_nt, DipoleSample};
use magproof::physics::frames::rotation_z;
use nalgebra::{Matrix3, Vector3};
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let n: usize = match std::env::args().nth(1) {
        Some(a) => a.parse().map_err(|e| format!("N: {e}"))?,
        None => 10_000,
    };
    let m = Vector3::new(0.012, -0.007, 0.009);
    let o = Vector3::new(0.02, -0.01, 0.01);
    let on_side = Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0);
    let mut rng = StdRng::seed_from_u64(7);
    let noise = Normal::new(0.0, 1.0)?;
    let mut data = Vec::with_capacity(n);
    for i in 0..n {
        let mount = if i % 2 == 0 {
            Matrix3::identity()
        } else {
            on_side
        };
        let angle = std::f64::consts::TAU * i as f64 / n as f64 * 4.0;
        let mut s = DipoleSample {
            probe_m: Vector3::new(0.6, 0.0, 0.05),
            body_to_table: rotation_z(angle) * mount,
            b_nt: Vector3::zeros(),
        };
        s.b_nt = model_field_nt(&s, &m, &o).ok_or("probe at the dipole")?
            + Vector3::from_fn(|_, _| noise.sample(&mut rng));
        data.push(s);
    }
    let fit = fit_moment_and_offset(&data)?;
    println!(
        "n = {n}: moment {:.6?} A·m², offset {:.5?} m, {} iterations, rms {:.4} nT",
        fit.moment_body_am2.as_slice(),
        fit.offset_body_m.as_slice(),
        fit.iterations,
        fit.residual_rms_nt
    );
    Ok(())
}
