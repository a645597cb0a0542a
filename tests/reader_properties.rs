//! Property tests of the log and plan readers: on arbitrary bytes and on
//! mutated valid files they never panic; they either read the input or refuse it with a
//! message that names the file (and, for row problems, the line).
//!
//! Case counts are set so the whole file runs well under a minute in the normal suite
//! (≥ 100 000 cases in all). Longer runs: the cargo-fuzz targets in `fuzz/`.

use std::path::Path;

use magproof::log::plan::parse_plan;
use magproof::log::{read_sweep_from, LogError, ReadOptions};
use proptest::prelude::*;

const VALID: &str = "# rig 2\nt,bx [uT],by [uT],bz [uT],temp,cmd_x,angle,mount\n\
0,21.3,-3.1,42.8,21.4,0,0,upright\n\
0.01,21.2,-3.0,42.9,21.4,1,15,upright\n\
\n\
0.02,21.1,-2.9,43.0,21.5,0,30,\n\
0.03,21.0,-2.8,43.1,21.5,-1,45,none\n";

fn check_log(bytes: &[u8], skip: bool) {
    let opts = ReadOptions {
        skip_bad_rows: skip,
        ..ReadOptions::default()
    };
    match read_sweep_from(bytes, Path::new("p.csv"), &opts, &mut |_| {}) {
        Ok(log) => {
            // Every column has one entry per kept row, and every value is finite.
            let n = log.len();
            assert!(n > 0);
            if let Some(b) = &log.b_nt {
                for axis in b {
                    assert_eq!(axis.len(), n);
                    assert!(axis.iter().all(|v| v.is_finite()));
                }
            }
            if let Some(t) = &log.t_s {
                assert_eq!(t.len(), n);
                assert!(t.windows(2).all(|w| w[1] >= w[0]), "time went backwards");
            }
            for c in &log.commands {
                assert_eq!(c.values.len(), n);
            }
        }
        Err(e) => {
            let msg = e.to_string();
            assert!(
                msg.starts_with("p.csv"),
                "message does not name the file: {msg}"
            );
            if let LogError::Cell { line, .. } | LogError::RowLength { line, .. } = &e {
                assert!(msg.contains(&format!(":{line}:")), "{msg}");
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 40_000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..256), skip in any::<bool>()) {
        check_log(&bytes, skip);
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 40_000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn mutated_valid_logs_never_panic(
        edits in proptest::collection::vec((any::<prop::sample::Index>(), any::<u8>(), 0u8..3), 1..6),
        skip in any::<bool>(),
    ) {
        let mut bytes = VALID.as_bytes().to_vec();
        for (at, byte, op) in edits {
            let len = bytes.len();
            let i = at.index(len.max(1));
            match op {
                0 if len > 0 => bytes[i.min(len - 1)] = byte,
                1 => bytes.insert(i.min(len), byte),
                _ if len > 0 => { bytes.remove(i.min(len - 1)); }
                _ => {}
            }
        }
        check_log(&bytes, skip);
    }
}

const PLAN: &str = "[article]\nserial = \"QX-7\"\nbuild = \"B1\"\n[magnetometer]\n\
sensor_to_body = [\"+x\", \"-z\", \"+y\"]\nposition_m = [0.02, 0.01, 0.2]\n\
[[rod]]\nname = \"x\"\naxis_body = [1.0, 0.0, 0.0]\nposition_m = [0.0, 0.04, 0.0]\n\
[limits]\npolarity_angle_max_deg = 30.0\n";

proptest! {
    #![proptest_config(ProptestConfig { cases: 25_000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn mutated_plans_never_panic(
        edits in proptest::collection::vec((any::<prop::sample::Index>(), proptest::char::any(), any::<bool>()), 1..5),
    ) {
        let mut text: Vec<char> = PLAN.chars().collect();
        for (at, c, insert) in edits {
            let i = at.index(text.len().max(1)).min(text.len().saturating_sub(1));
            if insert || text.is_empty() { text.insert(i.min(text.len()), c) } else { text[i] = c }
        }
        let text: String = text.into_iter().collect();
        if let Err(e) = parse_plan(&text, Path::new("plan.toml")) {
            let msg = e.to_string();
            prop_assert!(msg.starts_with("plan.toml"), "{}", msg);
        }
    }
}
