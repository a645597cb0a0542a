//! Integration tests that drive the built `magproof` binary, one module per theme under
//! tests/cli/ (the inline `mod cli` makes Rust look for them there).

mod cli {
    mod calibrate;
    mod util;
}
