//! Integration tests: each drives the built `magproof` binary, as a user would.
//! One test crate, modules by theme under tests/cli/; helpers in tests/cli/util.rs.

#[path = "cli/util.rs"]
mod util;

#[path = "cli/align.rs"]
mod align;
#[path = "cli/align_gyro.rs"]
mod align_gyro;
#[path = "cli/battery_input.rs"]
mod battery_input;
#[path = "cli/battery_ledger.rs"]
mod battery_ledger;
#[path = "cli/battery_numbers.rs"]
mod battery_numbers;
#[path = "cli/battery_old_ledger.rs"]
mod battery_old_ledger;
#[path = "cli/battery_outputs.rs"]
mod battery_outputs;
#[path = "cli/battery_versions.rs"]
mod battery_versions;
#[path = "cli/cage_amps.rs"]
mod cage_amps;
#[path = "cli/calibrate.rs"]
mod calibrate;
#[path = "cli/closeout.rs"]
mod closeout;
#[path = "cli/demo.rs"]
mod demo;
#[path = "cli/dipole.rs"]
mod dipole;
#[path = "cli/field.rs"]
mod field;
#[path = "cli/flight_params.rs"]
mod flight_params;
#[path = "cli/flight_two_mags.rs"]
mod flight_two_mags;
#[path = "cli/history.rs"]
mod history;
#[path = "cli/input.rs"]
mod input;
#[path = "cli/log_forms.rs"]
mod log_forms;
#[path = "cli/loop_law.rs"]
mod loop_law;
#[path = "cli/orbit.rs"]
mod orbit;
#[path = "cli/orbit_ground.rs"]
mod orbit_ground;
#[path = "cli/polarity.rs"]
mod polarity;
#[path = "cli/reliability.rs"]
mod reliability;
#[path = "cli/report.rs"]
mod report;
#[path = "cli/report_units.rs"]
mod report_units;
#[path = "cli/rod.rs"]
mod rod;
#[path = "cli/sensors.rs"]
mod sensors;
#[path = "cli/sign_chain.rs"]
mod sign_chain;
#[path = "cli/simulate.rs"]
mod simulate;
#[path = "cli/units_agree.rs"]
mod units_agree;
#[path = "cli/verdicts.rs"]
mod verdicts;
