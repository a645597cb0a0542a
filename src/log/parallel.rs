//! Parsing one block of a sweep log on several cores.
//!
//! A block of complete lines is cut at line ends into one part per core. Each part is
//! read with the fast path ([`FastRow`]) alone, into its own column buffers, and STOPS
//! at its first line the fast path does not take (a row to refuse, skip, or read with
//! the general parser). The reader then appends the parts in file order: a part's rows
//! are taken only if they fit what came before (time not going back across the cut,
//! time not ISO-8601 so far); the rest of a part — from its stop line, or all of it when
//! it did not fit — is read line by line exactly as without parallel parsing. So the
//! first error in file order, skipped rows, line numbers and every value come out as in
//! the one-core reader; the parts only save work on plain rows.

use rayon::prelude::*;

use super::fast_row::FastRow;
use super::row_lines::RowLines;

/// Blocks smaller than this are not split (the split costs more than it saves).
pub(crate) const MIN_PARALLEL_BYTES: usize = 1 << 18;

/// Plain rows read from one part of a block by the fast path.
#[derive(Debug, Default)]
pub(crate) struct Part {
    /// Values per numeric column, in the order of `FastRow`'s header columns that are
    /// numeric (the reader's `numeric` indices).
    pub numbers: Vec<Vec<f64>>,
    /// Time of each row, s (empty without a time column).
    pub time: Vec<f64>,
    /// Line of each row, counted from 1 at the part's first line.
    pub lines: RowLines,
    /// Where the fast path stopped: byte offset of that line in the part, and the number
    /// of lines before it. `None` when the whole part was read.
    pub stop: Option<(usize, u64)>,
    /// Lines in the part (each ends with `\n`).
    pub line_count: u64,
}

/// Cut `block` (complete lines, ending with `\n`) into at most `n` pieces at line ends.
pub(crate) fn split_block(block: &[u8], n: usize) -> Vec<&[u8]> {
    let mut parts = Vec::with_capacity(n);
    let mut start = 0;
    for k in 1..n {
        let target = block.len() * k / n;
        if target <= start {
            continue;
        }
        match memchr::memchr(b'\n', block.get(target..).unwrap_or(&[])) {
            Some(i) => {
                let cut = target + i + 1;
                parts.push(&block[start..cut]);
                start = cut;
            }
            None => break,
        }
    }
    if start < block.len() {
        parts.push(&block[start..]);
    }
    parts
}

/// Read each part with the fast path, in parallel, into `pool` (one [`Part`] per
/// piece). The pool's buffers are cleared and reused from block to block, so a long
/// log does not allocate (and page in) fresh part columns for every block.
pub(crate) fn parse_parts(
    parts: &[&[u8]],
    pool: &mut Vec<Part>,
    fast: &FastRow,
    ncols: usize,
    numeric: &[usize],
    has_time: bool,
) {
    pool.resize_with(parts.len(), Part::default);
    parts
        .par_iter()
        .zip(pool.par_iter_mut())
        .for_each(|(bytes, part)| parse_part(bytes, part, fast, ncols, numeric, has_time));
}

fn parse_part(
    bytes: &[u8],
    part: &mut Part,
    fast: &FastRow,
    ncols: usize,
    numeric: &[usize],
    has_time: bool,
) {
    let rows_guess = bytes.len() / 16 + 1;
    part.numbers.resize_with(numeric.len(), Vec::new);
    for col in &mut part.numbers {
        col.clear();
        col.reserve(rows_guess);
    }
    part.time.clear();
    if has_time {
        part.time.reserve(rows_guess);
    }
    part.lines.clear();
    part.stop = None;
    part.line_count = 0;
    let mut row = vec![0.0; ncols];
    let mut last_time = None;
    let mut pos = 0;
    while pos < bytes.len() {
        let end = memchr::memchr(b'\n', &bytes[pos..]).map_or(bytes.len(), |i| pos + i);
        let text = super::bytes::trim_line_end(&bytes[pos..end]);
        if !super::bytes::is_blank_or_comment(text) {
            match fast.parse(text, &mut row, last_time) {
                Some(time) => {
                    for (col, &k) in part.numbers.iter_mut().zip(numeric) {
                        col.push(row.get(k).copied().unwrap_or(f64::NAN));
                    }
                    if has_time {
                        part.time.push(time.unwrap_or(f64::NAN));
                        last_time = time;
                    }
                    part.lines.push(part.line_count + 1);
                }
                None => {
                    part.stop = Some((pos, part.line_count));
                    return;
                }
            }
        }
        part.line_count += 1;
        pos = end + 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_are_cut_at_line_ends_and_nothing_is_lost() {
        let block = b"1,2\n3,4\n55,66\n7,8\n9,10\n";
        for n in 1..8 {
            let parts = split_block(block, n);
            assert!(parts.len() <= n);
            assert_eq!(parts.concat(), block.to_vec());
            assert!(parts.iter().all(|p| p.ends_with(b"\n")), "{n}");
        }
    }
}
