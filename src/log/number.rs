//! Fast decimal-number parsing for the sweep-log reader.
//!
//! Log cells are nearly always plain decimals such as `-30361.881`. For those,
//! [`parse_plain_decimal`] reads the digits into an integer mantissa `m` and a power of
//! ten `e`, and when `m ≤ 2⁵³` and `|e| ≤ 22` forms the value with ONE correctly rounded
//! IEEE-754 multiplication or division of two exactly representable numbers (Clinger's
//! fast path, W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990).
//! The result is then the correctly rounded value of the decimal, bit for bit what
//! `str::parse::<f64>` gives. Anything else (exponents, more than 19 digits, `inf`,
//! `nan`, stray bytes) is handed to the exact general parser by the caller.

/// Exact powers of ten 10⁰ … 10²² (all exactly representable in binary64).
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Largest mantissa the fast path takes: every integer up to 2⁵³ is exact in binary64.
const MAX_EXACT_MANTISSA: u64 = 1 << 53;

/// Outcome of scanning one cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Scan {
    /// A plain decimal, parsed exactly; the value and the position after it.
    Value(f64, usize),
    /// The cell starts like a number but needs the general parser (exponent, many
    /// digits, …); the position where the cell's number-like bytes end.
    General(usize),
    /// The cell holds something the fast path does not handle at all.
    Unusual,
}

/// Scan `[+-]?digits[.digits]` in `text` from `start`, stopping at the first byte that
/// cannot belong to a number. Returns [`Scan::General`] when the number-like run also
/// contains `e`/`E`, another sign or dot, or more than 19 significant digits, and
/// [`Scan::Unusual`] when there is no digit at all. Positions are indices into `text`.
#[inline]
pub(crate) fn scan_decimal(text: &[u8], start: usize) -> Scan {
    // The sign without a branch: in a field column it is as good as random, so a
    // branch on it is mispredicted about half the time (measured: docs/performance.md).
    let first = text.get(start).copied().unwrap_or(0);
    let negative = first == b'-';
    let mut i = start + usize::from(negative | (first == b'+'));
    let digits_start = i;
    let mut mantissa: u64 = 0;
    // Index of the dot, if any (digits after it are fraction digits).
    let mut dot = usize::MAX;
    while let Some(&c) = text.get(i) {
        let d = c.wrapping_sub(b'0');
        if d <= 9 {
            mantissa = mantissa.wrapping_mul(10).wrapping_add(u64::from(d));
        } else if c == b'.' && dot == usize::MAX {
            dot = i;
        } else {
            break;
        }
        i += 1;
    }
    let (digits, frac_digits) = if dot == usize::MAX {
        (i - digits_start, 0)
    } else {
        (i - digits_start - 1, i - dot - 1)
    };
    if digits == 0 {
        return Scan::Unusual;
    }
    if matches!(text.get(i), Some(b'e' | b'E' | b'+' | b'-' | b'.')) {
        // An exponent or a malformed run: let the general parser judge the whole run.
        while matches!(
            text.get(i),
            Some(b'0'..=b'9' | b'e' | b'E' | b'+' | b'-' | b'.')
        ) {
            i += 1;
        }
        return Scan::General(i);
    }
    // 19 digits always fit in u64 without wrapping; beyond that the mantissa may have
    // wrapped, so let the general parser do it.
    if digits > 19 || mantissa > MAX_EXACT_MANTISSA || frac_digits >= POW10.len() {
        return Scan::General(i);
    }
    // Division by 10⁰ = 1 is exact, and the quotient is not negative, so setting its
    // sign bit is the negation (−0.0 for "-0", as `str::parse` gives): no branch either.
    let v = mantissa as f64 / POW10[frac_digits];
    let v = f64::from_bits(v.to_bits() | (u64::from(negative) << 63));
    Scan::Value(v, i)
}

/// Parse a whole cell as a plain decimal with the fast path, or `None` when the cell is
/// anything else (the caller then uses the general parser).
#[cfg(test)]
pub(crate) fn parse_plain_decimal(cell: &[u8]) -> Option<f64> {
    match scan_decimal(cell, 0) {
        Scan::Value(v, used) if used == cell.len() => Some(v),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Fast path and `str::parse` must agree bit for bit whenever the fast path answers.
    fn agrees(s: &str) {
        let want: f64 = s.parse().unwrap_or_else(|e| panic!("{s}: {e}"));
        if let Some(got) = parse_plain_decimal(s.as_bytes()) {
            assert_eq!(got.to_bits(), want.to_bits(), "{s}: {got} vs {want}");
        }
    }

    #[test]
    fn hand_picked_values_agree_with_std() {
        for s in [
            "0",
            "-0",
            "+0",
            "0.0",
            "-0.000",
            "1",
            "-1",
            "1.",
            ".5",
            "-.5",
            "0.1",
            "0.2",
            "0.3",
            "9007199254740992",
            "9007199254740993",
            "123456789012345678",
            "1234567890123456789",
            "0.0000000000000000000001",
            "614.402",
            "-30361.881",
            "38759.713",
            "9999.99",
            "4503599627370497.5",
            "2.2250738585072014",
        ] {
            agrees(s);
        }
    }

    #[test]
    fn fast_path_answers_for_typical_cells() {
        assert_eq!(parse_plain_decimal(b"-30361.881"), Some(-30361.881));
        assert_eq!(parse_plain_decimal(b"0.01"), Some(0.01));
        assert_eq!(
            parse_plain_decimal(b"-0").map(f64::to_bits),
            Some((-0.0f64).to_bits())
        );
    }

    #[test]
    fn unusual_cells_are_left_to_the_general_parser() {
        for s in [
            "", "-", "+", ".", "1e5", "1E-3", "nan", "inf", "-inf", "1.2.3", "1-2", "x",
        ] {
            assert_eq!(parse_plain_decimal(s.as_bytes()), None, "{s}");
        }
        // More than 19 digits, or beyond 2^53, or 23+ decimals: general parser.
        assert_eq!(parse_plain_decimal(b"12345678901234567890"), None);
        assert_eq!(parse_plain_decimal(b"9007199254740993"), None);
        assert_eq!(parse_plain_decimal(b"0.00000000000000000000001"), None);
        assert_eq!(scan_decimal(b"1e5,2", 0), Scan::General(3));
        assert_eq!(scan_decimal(b"7,-1.5,2", 2), Scan::Value(-1.5, 6));
        assert_eq!(scan_decimal(b"12,3", 0), Scan::Value(12.0, 2));
        assert_eq!(scan_decimal(b",3", 0), Scan::Unusual);
    }

    /// `scan_decimal` on `cell` followed by each of several endings (end of buffer, a
    /// delimiter, CRLF, a byte ≥ 0x80, a letter): a value must be `str::parse` of the
    /// bytes it covers, its sign included; no scan runs past the cell; a cell refused
    /// outright is one `str::parse` refuses too.
    #[test]
    fn edge_cells_at_buffer_ends_and_before_odd_bytes() {
        let cells = [
            "0",
            "-0",
            "+0",
            "7",
            "-7",
            "+3",
            "-",
            "+",
            ".",
            "-.",
            "+.",
            "1.",
            "-1.",
            ".5",
            "-.5",
            "+.5",
            "1.2.3",
            "1e5",
            "-1E-3",
            "2-3",
            "4+5",
            "--1",
            "-+1",
            "+-1",
            "12345678",
            "-123456789",
            "12345678.5",
            "1.12345678",
            "1.123456789",
            "1234567890123456",
            "-12345678901234567",
            "00000000.00000001",
            "-00012.0300",
            "9007199254740992",
            "-9007199254740993",
            "99999999.99999999",
        ];
        let endings: [&[u8]; 8] = [b"", b",", b";", b"\t", b"\r\n", b"\x80", b"\xff1", b"x"];
        for cell in cells {
            for ending in endings {
                let buf = [cell.as_bytes(), ending].concat();
                let got = scan_decimal(&buf, 0);
                let digits = cell.bytes().filter(u8::is_ascii_digit).count();
                match got {
                    Scan::Value(v, end) => {
                        assert_eq!(end, cell.len(), "{cell:?}");
                        let want: f64 = cell.parse().unwrap();
                        assert_eq!(v.to_bits(), want.to_bits(), "{cell:?}");
                    }
                    Scan::General(end) => assert!(end <= cell.len() && digits > 0, "{cell:?}"),
                    Scan::Unusual => assert!(cell.parse::<f64>().is_err(), "{cell:?}"),
                }
                // A cell that `str::parse` reads with at most 15 digits and no exponent
                // must take the fast path.
                let plain = !cell.contains(['e', 'E']) && cell.parse::<f64>().is_ok();
                if plain && digits <= 15 {
                    assert!(matches!(got, Scan::Value(..)), "{cell:?} + {ending:?}");
                }
            }
        }
        // Signs: only one, only in front.
        assert_eq!(scan_decimal(b"--1", 0), Scan::Unusual);
        assert_eq!(scan_decimal(b"+-1", 0), Scan::Unusual);
        assert_eq!(scan_decimal(b"1,-2", 2), Scan::Value(-2.0, 4));
        match scan_decimal(b"-0", 0) {
            Scan::Value(v, 2) => assert_eq!(v.to_bits(), (-0.0f64).to_bits()),
            other => panic!("-0: {other:?}"),
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 20_000, failure_persistence: None, ..ProptestConfig::default() })]

        /// Random decimal strings: sign, integer digits, optional fraction.
        #[test]
        fn random_decimals_agree_with_std(
            sign in prop::sample::select(vec!["", "-", "+"]),
            int in "[0-9]{0,12}",
            frac in proptest::option::of("[0-9]{0,12}"),
        ) {
            let s = match &frac {
                Some(f) => format!("{sign}{int}.{f}"),
                None => format!("{sign}{int}"),
            };
            match s.parse::<f64>() {
                Ok(want) => {
                    if let Some(got) = parse_plain_decimal(s.as_bytes()) {
                        prop_assert_eq!(got.to_bits(), want.to_bits(), "{}", s);
                    }
                    // The fast path must answer for every short plain decimal.
                    if int.len() + frac.as_ref().map_or(0, |f| f.len()) <= 15 {
                        prop_assert!(parse_plain_decimal(s.as_bytes()).is_some(), "{}", s);
                    }
                }
                Err(_) => prop_assert_eq!(parse_plain_decimal(s.as_bytes()), None, "{}", s),
            }
        }

        /// Any f64 printed the ways loggers print it (shortest round-trip and fixed
        /// decimals) reads back identically through the fast path and `str::parse`.
        #[test]
        fn printed_doubles_agree_with_std(bits in any::<u64>(), decimals in 0usize..10) {
            let x = f64::from_bits(bits);
            prop_assume!(x.is_finite());
            for s in [format!("{x}"), format!("{x:.decimals$}"), format!("{:.3}", x / 1e12)] {
                let want: f64 = s.parse().unwrap_or_else(|e| panic!("{s}: {e}"));
                if let Some(got) = parse_plain_decimal(s.as_bytes()) {
                    prop_assert_eq!(got.to_bits(), want.to_bits(), "{}", s);
                }
            }
        }

        /// Typical log magnitudes with 0–6 decimals: the fast path always answers.
        #[test]
        fn log_like_values_take_the_fast_path(x in -1e6f64..1e6, decimals in 0usize..7) {
            let s = format!("{x:.decimals$}");
            let want: f64 = s.parse().unwrap_or_else(|e| panic!("{s}: {e}"));
            let got = parse_plain_decimal(s.as_bytes());
            prop_assert_eq!(got.map(f64::to_bits), Some(want.to_bits()), "{}", s);
        }
    }
}
