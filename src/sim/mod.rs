//! Synthetic logs with known truth, for rehearsal, tests and the demo scenario.

pub mod align;
pub mod align_gyro;
pub mod cage;
pub mod dipole;
pub mod loop_law;
pub mod orbit;
pub mod polarity;
pub mod tumble;
pub mod workload;

pub use cage::{simulate_cage, write_cage_csv, CageConfig, CageGrid, CageSim, CageTruth};
pub use tumble::{
    simulate_tumble, write_tumble_csv, SimCoverage, TumbleConfig, TumbleSim, TumbleTruth,
};
pub mod rod;
pub mod scenario;
pub mod scenario_align;
pub mod scenario_rods;
