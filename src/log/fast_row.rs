//! Fast path for plain numeric rows of a sweep log.
//!
//! Most rows are unquoted decimals separated by the delimiter, with no blanks. This path
//! reads such a row in one left-to-right pass: it finds each cell's end while parsing
//! its number ([`super::number::scan_decimal`]). Whenever a row holds anything else — a
//! quote, a blank, an empty or non-numeric cell, a wrong field count, a value that is not
//! finite, time that goes backwards, a mount column, ISO-8601 time — it gives up and the
//! general row parser reads the row from scratch. So every refusal, its message and its
//! line come from the one general parser, and the fast path only ever accepts rows the
//! general parser would accept with the same values.

use super::column_kind::ColumnKind;
use super::header::Header;
use super::number::{scan_decimal, Scan};

/// What the fast path does with one column.
#[derive(Debug, Clone, Copy)]
enum Cell {
    /// A numeric column: value × scale.
    Number(f64),
    /// Time given as numbers: value × seconds per unit.
    Time(f64),
    /// An ignored column: skipped (no quote allowed).
    Skip,
}

/// The fast row parser for one header; `None` from [`FastRow::new`] when the header has
/// a column the fast path does not handle.
#[derive(Debug, Clone)]
pub(crate) struct FastRow {
    cells: Vec<Cell>,
    delimiter: u8,
}

impl FastRow {
    /// Plan the fast path for a header; `None` when it has a mount column, numbers with
    /// a decimal comma, or command columns whose empty cells repeat the value above
    /// (those rows are the general parser's).
    pub fn new(header: &Header) -> Option<Self> {
        let held = |c: &super::header::Column| matches!(c.kind, ColumnKind::Command(_));
        if header.decimal_comma || (header.hold_commands && header.columns.iter().any(held)) {
            return None;
        }
        let mut cells = Vec::with_capacity(header.columns.len());
        for col in &header.columns {
            cells.push(match &col.kind {
                ColumnKind::Mount => return None,
                ColumnKind::Ignored => Cell::Skip,
                ColumnKind::Time(unit) => Cell::Time(unit.to_seconds()),
                _ => Cell::Number(col.scale),
            });
        }
        Some(FastRow {
            cells,
            delimiter: header.delimiter,
        })
    }

    /// Parse a plain numeric row into `numbers` (indexed like the header's columns).
    /// Returns `Some(time_s)` (time `None` without a time column) when the row was read,
    /// `None` when the general parser must read it. `last_time` is the previous kept
    /// row's time; a row whose time is before it is left to the general parser.
    #[inline]
    pub fn parse(
        &self,
        text: &[u8],
        numbers: &mut [f64],
        last_time: Option<f64>,
    ) -> Option<Option<f64>> {
        let last = self.cells.len().checked_sub(1)?;
        let mut pos = 0usize;
        let mut time = None;
        for (k, cell) in self.cells.iter().enumerate() {
            // A value from the exact decimal path has at most 2⁵³ as mantissa and a
            // unit scale far below 10²⁹², so it and its scaled value are finite: only
            // values from the general parser need the check.
            let mut exact = true;
            let value = match cell {
                Cell::Skip => {
                    while let Some(&c) = text.get(pos) {
                        if c == self.delimiter {
                            break;
                        }
                        if c == b'"' {
                            return None;
                        }
                        pos += 1;
                    }
                    0.0
                }
                _ => match scan_decimal(text, pos) {
                    Scan::Value(v, end) => {
                        pos = end;
                        v
                    }
                    Scan::General(end) => {
                        let v: f64 = fast_float2::parse(text.get(pos..end)?).ok()?;
                        pos = end;
                        exact = false;
                        v
                    }
                    Scan::Unusual => return None,
                },
            };
            if k < last {
                if text.get(pos) != Some(&self.delimiter) {
                    return None;
                }
                pos += 1;
            } else if pos != text.len() {
                return None;
            }
            match *cell {
                Cell::Skip => {}
                Cell::Number(scale) => {
                    let x = value * scale;
                    if !exact && !x.is_finite() {
                        return None;
                    }
                    *numbers.get_mut(k)? = x;
                }
                Cell::Time(to_s) => {
                    let t = value * to_s;
                    if (!exact && !t.is_finite()) || last_time.is_some_and(|prev| t < prev) {
                        return None;
                    }
                    time = Some(t);
                }
            }
        }
        Some(time)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::log::header::parse_header;
    use crate::log::layout::LogLayout;
    use crate::log::units::FieldUnit;
    use std::path::Path;

    fn fast(header: &str) -> FastRow {
        let h = parse_header(
            header,
            Path::new("h.csv"),
            1,
            FieldUnit::Nanotesla,
            &LogLayout::default(),
        )
        .unwrap();
        FastRow::new(&h).unwrap()
    }

    #[test]
    fn plain_rows_are_read_with_units() {
        let f = fast("t [ms],bx [uT],by,bz,rssi");
        let mut n = [0.0; 5];
        assert_eq!(
            f.parse(b"500,1.5,-2,3e2,-70", &mut n, None),
            Some(Some(0.5))
        );
        assert_eq!(&n[1..4], &[1500.0, -2.0, 300.0]);
    }

    #[test]
    fn anything_unusual_goes_to_the_general_parser() {
        let f = fast("t,bx,by,bz");
        let mut n = [0.0; 4];
        for row in [
            "0,1,2",
            "0,1,2,3,4",
            "0,1, 2,3",
            "0,1,2 ,3",
            "0,\"1\",2,3",
            "0,1,,3",
            "0,1,x,3",
            "0,1,nan,3",
            "0,1,1e999,3",
            "0,1,2,3\r",
            "2026-01-01T00:00:00Z,1,2,3",
        ] {
            assert_eq!(f.parse(row.as_bytes(), &mut n, None), None, "{row}");
        }
        // Time before the previous row: the general parser reports it.
        assert_eq!(f.parse(b"1,1,2,3", &mut n, Some(2.0)), None);
        assert_eq!(f.parse(b"2,1,2,3", &mut n, Some(2.0)), Some(Some(2.0)));
        // A quote in an ignored column may hide a delimiter.
        let g = fast("bx,by,bz,note");
        assert_eq!(g.parse(b"1,2,3,\"a,b\"", &mut n, None), None);
        assert_eq!(g.parse(b"1,2,3,ok", &mut n, None), Some(None));
    }

    #[test]
    fn mount_columns_are_not_taken() {
        let h = parse_header(
            "bx,by,bz,mount",
            Path::new("h.csv"),
            1,
            FieldUnit::Nanotesla,
            &LogLayout::default(),
        )
        .unwrap();
        assert!(FastRow::new(&h).is_none());
    }
}
