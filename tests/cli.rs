//! Integration tests: drive the built `magproof` binary. One test crate, one module per
//! theme under tests/cli/; helpers in tests/cli/util.rs.

#[path = "cli/util.rs"]
mod util;

#[path = "cli/dipole.rs"]
mod dipole;
