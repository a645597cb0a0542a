//! Text from outside the program made safe for where it is shown. Plans and logs refuse
//! control characters now, but a ledger written by an older magproof (or edited by
//! hand) may hold any text in its serials, builds, kinds and quantity names; every
//! output cleans what it shows, whatever its source:
//!
//! - [`printable`] for the terminal (and CSV on standard output): control characters
//!   and Unicode bidirectional overrides are shown as escapes (`\u{1b}`, `\n`) instead
//!   of acting — no escape sequence sets the title or colours, no line is forged, no
//!   text is shown reordered;
//! - [`xml_text`] for SVG and HTML: characters XML 1.0 does not allow (C0 controls
//!   other than tab, line feed and carriage return; U+FFFE, U+FFFF), and the C1
//!   controls and DEL it discourages, are shown as escapes, so the document stays
//!   well-formed. Markup (`<`, `&`) is escaped by the writers themselves.

use std::borrow::Cow;

/// Whether `c` reorders the text around it when shown (Unicode bidirectional embedding,
/// override and isolate controls).
fn is_bidi_control(c: char) -> bool {
    matches!(c, '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}' | '\u{200e}' | '\u{200f}')
}

fn escape_where(text: &str, bad: impl Fn(char) -> bool) -> Cow<'_, str> {
    if !text.chars().any(&bad) {
        return Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        if bad(c) {
            out.extend(c.escape_default()); // `\n`, `\t`, `\r`, else `\u{…}`
        } else {
            out.push(c);
        }
    }
    Cow::Owned(out)
}

/// `text` safe to print on a terminal: every control character and bidirectional
/// control shown as its escape (`\u{1b}`, `\n`).
pub fn printable(text: &str) -> String {
    escape_where(text, |c| c.is_control() || is_bidi_control(c)).into_owned()
}

/// `text` safe inside an SVG or HTML document (see the module doc); tab, line feed and
/// carriage return are kept (they are whitespace in XML).
pub fn xml_text(text: &str) -> Cow<'_, str> {
    escape_where(text, |c| {
        (c.is_control() && !matches!(c, '\t' | '\n' | '\r')) || matches!(c, '\u{fffe}' | '\u{ffff}')
    })
}

/// [`xml_text`] of an owned string, without a copy when nothing needs escaping.
pub fn xml_clean(text: String) -> String {
    match xml_text(&text) {
        Cow::Borrowed(_) => text,
        Cow::Owned(clean) => clean,
    }
}

/// JSON text (from `serde_json`, which escapes C0 control characters already) with the
/// C1 controls, DEL, bidirectional controls and the line and paragraph separators in its strings
/// written as `\uXXXX` escapes: the same data for a JSON reader, nothing that reorders
/// or breaks the text shown on a terminal. Outside strings JSON holds only ASCII, so
/// every such character is inside a string.
pub fn json_for_terminal(json: String) -> String {
    // serde_json escapes C0 controls in strings but not DEL and the C1 controls.
    let bad = |c: char| {
        (c.is_control() && !matches!(c, '\n' | '\t' | '\r'))
            || is_bidi_control(c)
            || matches!(c, '\u{2028}' | '\u{2029}')
    };
    if !json.chars().any(bad) {
        return json;
    }
    let mut out = String::with_capacity(json.len() + 16);
    for c in json.chars() {
        if bad(c) {
            out.push_str(&format!("\\u{:04x}", c as u32));
        } else {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn terminal_text_has_no_control_or_bidi_character_left() {
        let hostile = "SN\u{1b}]0;pwned\u{7}\n\rB\u{202e}gnp.exe\u{9b}31m\u{7f}";
        let p = printable(hostile);
        assert!(
            !p.chars().any(|c| c.is_control() || is_bidi_control(c)),
            "{p:?}"
        );
        assert!(p.contains("\\u{1b}]0;pwned\\u{7}\\n\\r"), "{p}");
        assert!(p.contains("\\u{202e}"), "{p}");
        assert_eq!(printable("plain · text"), "plain · text");
    }

    #[test]
    fn json_for_terminal_is_the_same_data_with_no_bidi_control() {
        let v = serde_json::json!({ "s": "a\u{202e}b\u{2028}c\u{1b}\u{9b}" });
        let text = json_for_terminal(serde_json::to_string(&v).unwrap());
        assert!(
            !text.chars().any(|c| c.is_control() || is_bidi_control(c)),
            "{text}"
        );
        assert!(text.contains("\\u202e"), "{text}");
        let back: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert_eq!(back, v);
    }

    #[test]
    fn xml_text_keeps_whitespace_and_escapes_what_xml_forbids() {
        let x = xml_text("a\tb\nc\u{1b}d\u{0}e\u{ffff}\u{85}");
        assert_eq!(x, "a\tb\nc\\u{1b}d\\u{0}e\\u{ffff}\\u{85}");
        assert!(matches!(xml_text("ok <b>"), Cow::Borrowed(_)));
    }
}
