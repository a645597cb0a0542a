//! What a line that is not UTF-8 looks like, so that a log saved in another text
//! encoding is refused with that encoding's name rather than called a binary file.
//!
//! The signs used are those of the encodings themselves (Unicode Standard, ch. 23.8 for
//! the byte-order mark; ISO/IEC 8859-1 for Latin-1): a UTF-16 file starts with FF FE
//! (little-endian) or FE FF (big-endian), or without a mark has a zero byte beside
//! every ASCII character, on the odd bytes for little-endian and the even ones for
//! big-endian; a Latin-1 or Windows-1252 file is text whose bytes above 0x7F do not
//! form UTF-8 sequences.

/// A text encoding other than UTF-8, as recognised in a line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Encoding {
    /// UTF-16, little-endian; `bom` when it starts with the byte-order mark.
    Utf16Le {
        /// Starts with FF FE.
        bom: bool,
    },
    /// UTF-16, big-endian; `bom` when it starts with the byte-order mark.
    Utf16Be {
        /// Starts with FE FF.
        bom: bool,
    },
    /// Latin-1 (ISO-8859-1) or Windows-1252: one byte a character.
    Latin1,
    /// Control bytes other than tab: not text.
    Binary,
}

impl std::fmt::Display for Encoding {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let mark = |bom: bool| {
            if bom {
                "with a byte-order mark"
            } else {
                "without a byte-order mark"
            }
        };
        match self {
            Encoding::Utf16Le { bom } => write!(f, "UTF-16 little-endian ({})", mark(*bom)),
            Encoding::Utf16Be { bom } => write!(f, "UTF-16 big-endian ({})", mark(*bom)),
            Encoding::Latin1 => f.write_str("Latin-1 (ISO-8859-1) or Windows-1252"),
            Encoding::Binary => f.write_str("not text (control bytes)"),
        }
    }
}

/// The encoding `line` (the first line of a file when `first`) looks like, when it is
/// not plain UTF-8 text; `None` for UTF-8 without zero bytes.
pub fn sniff(line: &[u8], first: bool) -> Option<Encoding> {
    if first {
        if line.starts_with(&[0xFF, 0xFE]) {
            return Some(Encoding::Utf16Le { bom: true });
        }
        if line.starts_with(&[0xFE, 0xFF]) {
            return Some(Encoding::Utf16Be { bom: true });
        }
    }
    if line.contains(&0) {
        if utf16_like(line, 1) {
            return Some(Encoding::Utf16Le { bom: false });
        }
        if utf16_like(line, 0) {
            return Some(Encoding::Utf16Be { bom: false });
        }
        // In little-endian, a line after the first starts with the zero byte of the
        // line feed before it.
        if !first && line.first() == Some(&0) && utf16_like(&line[1..], 1) {
            return Some(Encoding::Utf16Le { bom: false });
        }
        return Some(Encoding::Binary);
    }
    if std::str::from_utf8(line).is_ok() {
        return None;
    }
    if line.iter().any(|&c| c < 0x20 && c != b'\t' && c != b'\r') || line.contains(&0x7F) {
        return Some(Encoding::Binary);
    }
    Some(Encoding::Latin1)
}

/// UTF-16 text that is mostly ASCII: in at least three pairs of four, the high byte
/// (index `hi` of the pair: 1 little-endian, 0 big-endian) is zero and the other one
/// printable.
fn utf16_like(line: &[u8], hi: usize) -> bool {
    let pairs = line.len() / 2;
    let ascii = line
        .chunks_exact(2)
        .filter(|p| p[hi] == 0 && (p[1 - hi] >= 0x20 || p[1 - hi] == b'\t'))
        .count();
    pairs > 0 && ascii * 4 >= pairs * 3
}

#[cfg(test)]
mod tests {
    use super::*;

    fn utf16(text: &str, le: bool) -> Vec<u8> {
        text.encode_utf16()
            .flat_map(|u| if le { u.to_le_bytes() } else { u.to_be_bytes() })
            .collect()
    }

    #[test]
    fn utf16_with_and_without_a_mark() {
        let le = utf16("t,bx,by,bz", true);
        let be = utf16("t,bx,by,bz", false);
        assert_eq!(sniff(&le, true), Some(Encoding::Utf16Le { bom: false }));
        assert_eq!(sniff(&be, true), Some(Encoding::Utf16Be { bom: false }));
        let mut marked = vec![0xFF, 0xFE];
        marked.extend(&le);
        assert_eq!(sniff(&marked, true), Some(Encoding::Utf16Le { bom: true }));
        let mut marked = vec![0xFE, 0xFF];
        marked.extend(&be);
        assert_eq!(sniff(&marked, true), Some(Encoding::Utf16Be { bom: true }));
    }

    #[test]
    fn latin1_utf8_and_binary() {
        // "temp [°C]" in Latin-1: the degree sign is the single byte 0xB0.
        assert_eq!(sniff(b"t,bx,temp [\xB0C]", true), Some(Encoding::Latin1));
        assert_eq!(sniff("t,bx,temp [°C]".as_bytes(), true), None);
        assert_eq!(
            sniff(b"\x7FELF\x02\x01\x01\x00", true),
            Some(Encoding::Binary)
        );
        assert_eq!(
            sniff(b"PK\x03\x04\x14\x00\xFF", true),
            Some(Encoding::Binary)
        );
    }
}
