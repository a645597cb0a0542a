//! Fuzz the test-plan parser: any UTF-8 text. It must never panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = magproof::log::plan::parse_plan(text, std::path::Path::new("fuzz.toml"));
    }
});
