//! Fuzz the sweep-log reader: any bytes, with and without --skip-bad-rows, in the plain
//! layout and with decimal commas, held commands and raw counts. It must never panic;
//! it reads or refuses.
#![no_main]

use libfuzzer_sys::fuzz_target;
use magproof::log::{read_sweep_from, LogLayout, ReadOptions};

fuzz_target!(|data: &[u8]| {
    let forms = LogLayout {
        decimal_comma: true,
        hold_commands: true,
        nt_per_count: Some([0.5, 0.25, 2.0]),
        counts_by_default: true,
        ..LogLayout::default()
    };
    for skip in [false, true] {
        for layout in [LogLayout::default(), forms.clone()] {
            let opts = ReadOptions {
                skip_bad_rows: skip,
                layout,
                ..ReadOptions::default()
            };
            let _ = read_sweep_from(data, std::path::Path::new("fuzz.csv"), &opts, &mut |_| {});
        }
    }
});
