//! Integration tests: each drives the built `magproof` binary, as a user would.
//! One test crate, modules by theme (reader inputs, checks, ledger, reports).

#[path = "cli/util.rs"]
mod util;

#[path = "cli/input.rs"]
mod input;
