//! Synthetic logs with known truth, for rehearsal, tests and the demo scenario.
pub mod dipole;

pub mod polarity;
