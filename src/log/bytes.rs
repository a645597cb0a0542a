//! Byte helpers shared by the sweep-log readers: line ends, blank and comment lines,
//! field splitting with double quotes, and cell trimming. They depend on nothing else in
//! the reader.

/// The line without its trailing `\n` / `\r\n`.
pub(super) fn trim_line_end(buf: &[u8]) -> &[u8] {
    let mut end = buf.len();
    while end > 0 && (buf[end - 1] == b'\n' || buf[end - 1] == b'\r') {
        end -= 1;
    }
    &buf[..end]
}

/// True for a blank line or a `#` comment line.
pub(super) fn is_blank_or_comment(text: &[u8]) -> bool {
    match text.iter().position(|c| !c.is_ascii_whitespace()) {
        None => true,
        Some(i) => text[i] == b'#',
    }
}

/// A cell without surrounding white space and one pair of double quotes.
pub(super) fn trim_cell(cell: &[u8]) -> &[u8] {
    let start = cell.iter().position(|c| !c.is_ascii_whitespace());
    let Some(start) = start else { return &[] };
    let end = cell
        .iter()
        .rposition(|c| !c.is_ascii_whitespace())
        .unwrap_or(start);
    let cell = &cell[start..=end];
    if cell.len() >= 2 && cell[0] == b'"' && cell[cell.len() - 1] == b'"' {
        &cell[1..cell.len() - 1]
    } else {
        cell
    }
}

/// A cell as shown in a message: at most 40 characters.
pub(super) fn shorten(cell: &[u8]) -> String {
    let s = String::from_utf8_lossy(cell);
    if s.chars().count() > 40 {
        let head: String = s.chars().take(37).collect();
        format!("{head}...")
    } else {
        s.into_owned()
    }
}

/// Split a line into field byte ranges. Double-quoted fields may hold the delimiter.
pub(super) fn split_fields(text: &[u8], delimiter: u8, out: &mut Vec<(usize, usize)>) {
    out.clear();
    if memchr::memchr(b'"', text).is_none() {
        let mut start = 0;
        for i in memchr::memchr_iter(delimiter, text) {
            out.push((start, i));
            start = i + 1;
        }
        out.push((start, text.len()));
        return;
    }
    let mut start = 0;
    let mut in_quotes = false;
    for (i, &c) in text.iter().enumerate() {
        if c == b'"' {
            in_quotes = !in_quotes;
        } else if c == delimiter && !in_quotes {
            out.push((start, i));
            start = i + 1;
        }
    }
    out.push((start, text.len()));
}
