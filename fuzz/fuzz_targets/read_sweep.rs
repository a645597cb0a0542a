//! Fuzz the sweep-log reader: any bytes, with and without --skip-bad-rows. It must
//! never panic; it reads or refuses.
#![no_main]

use libfuzzer_sys::fuzz_target;
use magproof::log::{read_sweep_from, ReadOptions};

fuzz_target!(|data: &[u8]| {
    for skip in [false, true] {
        let opts = ReadOptions {
            skip_bad_rows: skip,
            ..ReadOptions::default()
        };
        let _ = read_sweep_from(data, std::path::Path::new("fuzz.csv"), &opts, &mut |_| {});
    }
});
