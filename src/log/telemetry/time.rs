//! Time cells of orbit logs: ISO-8601 UTC timestamps to Unix seconds (leap seconds
//! ignored), with a fast path for the plain `YYYY-MM-DDTHH:MM:SS[.f…][Z]` form.

/// Days from 1970-01-01 to the civil date (Hinnant's `days_from_civil`, public domain).
pub(super) fn days_from_civil(y: i64, m: i64, d: i64) -> i64 {
    let y = if m <= 2 { y - 1 } else { y };
    let era = if y >= 0 { y } else { y - 399 } / 400;
    let yoe = y - era * 400;
    let doy = (153 * (m + if m > 2 { -3 } else { 9 }) + 2) / 5 + d - 1;
    let doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    era * 146097 + doe - 719468
}

/// `YYYY-MM-DDTHH:MM:SS[.f…][Z]` to Unix seconds; anything else goes to the full parser.
pub(super) fn parse_time_iso(cell: &[u8]) -> Option<f64> {
    let digits = |a: usize, b: usize| -> Option<i64> {
        let s = cell.get(a..b)?;
        s.iter().try_fold(0i64, |acc, &c| {
            c.is_ascii_digit().then(|| acc * 10 + i64::from(c - b'0'))
        })
    };
    let fast = (|| {
        if cell.len() < 19 || cell[4] != b'-' || cell[7] != b'-' || cell[10] != b'T' {
            return None;
        }
        if cell[13] != b':' || cell[16] != b':' {
            return None;
        }
        let (y, mo, d) = (digits(0, 4)?, digits(5, 7)?, digits(8, 10)?);
        let (h, mi, s) = (digits(11, 13)?, digits(14, 16)?, digits(17, 19)?);
        if !(1..=12).contains(&mo) || !(1..=31).contains(&d) || h > 23 || mi > 59 || s > 60 {
            return None;
        }
        let mut rest = &cell[19..];
        let mut frac = 0.0;
        if rest.first() == Some(&b'.') {
            let n = rest[1..].iter().take_while(|c| c.is_ascii_digit()).count();
            if n == 0 {
                return None;
            }
            frac = fast_float2::parse::<f64, _>(&rest[..n + 1]).ok()?;
            rest = &rest[n + 1..];
        }
        if !(rest.is_empty() || rest == b"Z") {
            return None;
        }
        let days = days_from_civil(y, mo, d);
        Some((days * 86400 + h * 3600 + mi * 60 + s) as f64 + frac)
    })();
    fast.or_else(|| crate::log::parse_iso8601(std::str::from_utf8(cell).ok()?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn civil_days_match_known_dates() {
        // 2000-01-01 is day 10957 after 1970-01-01; 2026-07-19 is day 20653 (calendar count).
        assert_eq!(days_from_civil(1970, 1, 1), 0);
        assert_eq!(days_from_civil(2000, 1, 1), 10957);
        assert_eq!(days_from_civil(2026, 7, 19), 20653);
        let t = parse_time_iso(b"2026-07-19T06:10:00.5Z").unwrap();
        assert!((t - (20653.0 * 86400.0 + 6.0 * 3600.0 + 600.0 + 0.5)).abs() < 1e-6);
        assert_eq!(
            parse_time_iso(b"2026-07-19T06:10:00+00:00"),
            Some(20653.0 * 86400.0 + 22200.0)
        );
        assert!(parse_time_iso(b"2026-13-19T06:10:00Z").is_none());
    }
}
