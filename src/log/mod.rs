//! Readers for what the user brings: sweep logs (CSV) and test plans (TOML), both
//! described in `docs/formats.md`. Units are converted here, once, to the internal ones
//! (nT, m, s, rad).

mod bytes;
mod column_kind;
mod columns;
pub mod encoding;
mod error;
mod fast_row;
#[cfg(test)]
mod forms_tests;
pub mod hash;
mod header;
pub mod layout;
mod lines;
mod names;
mod number;
mod parallel;
pub mod plan;
mod row;
mod row_lines;
#[cfg(test)]
mod row_paths_tests;
mod sweep;
mod sweep_log;
#[cfg(test)]
mod sweep_tests;
pub mod telemetry;
pub mod units;

pub use error::{LogError, PlanError, Shown};
pub use header::parse_iso8601;
pub use layout::LogLayout;
pub use plan::{read_plan, Plan, RodBench};
pub use row_lines::RowLines;
pub use sweep::{read_sweep, read_sweep_from, read_sweep_with_progress, ReadOptions};
pub use sweep_log::{CommandColumn, SkippedRow, SweepLog, UsedColumn};
pub use units::FieldUnit;
