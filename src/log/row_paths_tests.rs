//! Tests that the reader's row paths agree: plain rows read by the fast parser (one
//! thread or parallel parts) give exactly what the general parser gives. This test
//! module sits above `fast_row` and `sweep` and uses both, so neither imports the other.

use std::path::Path;

use proptest::prelude::*;

use super::sweep::{read_sweep_impl, RowPath};

/// Reading with the fast path, on one thread or in parallel parts, must give exactly
/// what the general parser alone gives: the same columns bit for bit, lines, skipped
/// rows, or the same error.
fn same_as_general(text: &str, skip: bool) {
    let opts = crate::log::ReadOptions {
        skip_bad_rows: skip,
        ..Default::default()
    };
    let read = |p| {
        read_sweep_impl(
            text.as_bytes(),
            Path::new("e.csv"),
            &opts,
            &mut |_| {},
            p,
            None,
        )
        .map(|log| format!("{log:?}"))
        .map_err(|e| e.to_string())
    };
    let general = read(RowPath::GeneralOnly);
    assert_eq!(read(RowPath::Fast), general, "{text:?}");
    // Blocks cut into parts read on several threads: same result.
    for parts in [2, 3, 7] {
        assert_eq!(read(RowPath::Parallel(parts)), general, "{parts}: {text:?}");
    }
}

fn cell() -> impl Strategy<Value = String> {
    prop_oneof![
        8 => (-1e5f64..1e5, 0usize..5).prop_map(|(x, d)| format!("{x:.d$}")),
        1 => any::<f64>().prop_map(|x| format!("{x:e}")),
        1 => prop::sample::select(vec![
            "", " 1", "2 ", "\"3\"", "nan", "inf", "-0", "1e400", "x", "1.2.3", "+.5",
            "\"4,5\"", "12345678901234567890.5", "0.00000000000000000000001",
            "1.", ".5", "-.5", "+3", "-", "--1", "12345678", "-123456789",
            "12345678.12345678", "-12345678901234567", "-0007.250", "1e5", "3\u{e9}",
        ])
        .prop_map(String::from),
    ]
}

fn row() -> impl Strategy<Value = String> {
    prop_oneof![
        12 => prop::collection::vec(cell(), 4..=4).prop_map(|c| c.join(",")),
        1 => prop::collection::vec(cell(), 3..=5).prop_map(|c| c.join(",")),
        1 => prop::sample::select(vec!["", "# note", "  ", "\r"]).prop_map(String::from),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 3_000, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn fast_and_general_paths_agree(
        header in prop::sample::select(vec!["t,bx,by,bz", "t [ms],bx [uT],by,rssi", "bx [G],by,bz,note"]),
        rows in prop::collection::vec((row(), 0u8..10), 1..30),
        crlf in any::<bool>(),
        skip in any::<bool>(),
    ) {
        let end = if crlf { "\r\n" } else { "\n" };
        let mut text = format!("{header}{end}");
        let mut t = 0.0f64;
        for (r, dt) in rows {
            // Time mostly goes forward, sometimes back: the first cell becomes t.
            t += f64::from(dt) - 1.5;
            let r = if header.starts_with('t') && dt > 1 {
                match r.split_once(',') {
                    Some((_, rest)) => format!("{t:.2},{rest}"),
                    None => r,
                }
            } else {
                r
            };
            text.push_str(&r);
            text.push_str(end);
        }
        same_as_general(&text, skip);
    }
}

#[test]
fn hand_written_logs_agree() {
    for text in [
        "t,bx,by,bz\n0,1,2,3\n1,1,2,3\n0.5,1,2,3\n2,1,2,3\n",
        "t;bx;by;bz\r\n0;1;2;3\r\n1;1;x;3\r\n2;1;2;3",
        "t,bx,by,bz\n2026-01-01T00:00:00Z,1,2,3\n5,1,2,3\n",
        "t,bx,by,bz\n5,1,2,3\n2026-01-01T00:00:00Z,1,2,3\n6,1,2,3\n",
        "\u{feff}t,bx,by,bz,mount\n0,1,2,3,a\n1,1,2,3,\"b, c\"\n2,1,2,3,a\n",
        "bx [T],by,bz\n1e300,1,1\n1,1,1\n",
    ] {
        same_as_general(text, false);
        same_as_general(text, true);
    }
}
