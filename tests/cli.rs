//! Integration tests that drive the built `magproof` binary, one module per theme
//! (tests/cli/<theme>.rs).

#[path = "cli/util.rs"]
mod util;

#[path = "cli/polarity.rs"]
mod polarity;
