//! Test-plan reader (format: `docs/formats.md`): the article, its geometry and its
//! limits, in TOML.
//!
//! Unknown keys are refused by name so that a typo never passes silently; rotations are
//! checked to be proper (orthonormal, det +1, within 1e-6); every vector is finite.
//!
//! The files depend on each other one way: `types.rs` holds the validated public types,
//! `raw.rs` the TOML shapes as written (using `types`), and `parse.rs` the checks that
//! turn one into the other (using both; `parse_logs.rs` and `parse_limits.rs` hold the
//! checks of the log sections and of `[limits]`).

mod align;
mod control;
mod locate;
mod orbit;
mod parse;
mod parse_limits;
mod parse_logs;
mod raw;
mod rod_bench;
#[cfg(test)]
mod tests;
mod types;

pub use align::AlignTest;
pub use control::{ControlIntent, ControlLaw, ControlPlan};
pub use orbit::OrbitPlan;
pub use parse::{parse_plan, read_plan};
pub use rod_bench::{RodBench, RodLimits, RodPosition};
pub use types::{
    Article, Cage, DipoleTest, GateLimits, Gyro, Limits, LogSettings, Magnetometer, Mount, Plan,
    Probe, Rod, Site, Step,
};
