//! Integration tests that drive the built `magproof` binary, one module per theme
//! (files under tests/cli/).

#[path = "cli/util.rs"]
mod util;

#[path = "cli/history.rs"]
mod history;
