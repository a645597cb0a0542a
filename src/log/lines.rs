//! Line splitting over large blocks for the sweep-log reader (issue 10).
//!
//! The file is read in blocks of [`BLOCK_BYTES`] into one reused buffer and lines are
//! handed out as slices of it, so no per-line copy or allocation happens and the file is
//! never held whole in memory. A line longer than the buffer grows the buffer.

use std::io::{self, Read};

/// Bytes read from the file at a time.
pub(crate) const BLOCK_BYTES: usize = 1 << 22;

/// Hands out the lines of a reader, without their `\n`.
pub(crate) struct LineReader<R> {
    inner: R,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    eof: bool,
    consumed: u64,
}

impl<R: Read> LineReader<R> {
    /// Wrap a reader.
    pub fn new(inner: R) -> Self {
        Self::with_block(inner, BLOCK_BYTES)
    }

    /// Wrap a reader with a given block size (tests use tiny blocks).
    pub fn with_block(inner: R, block: usize) -> Self {
        LineReader {
            inner,
            buf: vec![0; block.max(1)],
            start: 0,
            end: 0,
            eof: false,
            consumed: 0,
        }
    }

    /// The next line without its `\n` (a `\r` before it is kept), with the bytes
    /// handed out so far (this line included), or `None` at the end. The last line
    /// counts even without a final `\n`, as long as it is not empty.
    pub fn next_line(&mut self) -> io::Result<Option<(&[u8], u64)>> {
        loop {
            let pending = &self.buf[self.start..self.end];
            if let Some(i) = memchr::memchr(b'\n', pending) {
                let a = self.start;
                self.start += i + 1;
                self.consumed += i as u64 + 1;
                return Ok(Some((&self.buf[a..a + i], self.consumed)));
            }
            if self.eof {
                if self.start < self.end {
                    let a = self.start;
                    self.consumed += (self.end - a) as u64;
                    self.start = self.end;
                    return Ok(Some((&self.buf[a..self.end], self.consumed)));
                }
                return Ok(None);
            }
            self.refill()?;
        }
    }

    /// As many complete lines as the buffer holds (each ending with `\n`), after
    /// filling the buffer, with the bytes handed out so far; `None` when no complete
    /// line is left (the caller then goes on with [`LineReader::next_line`]).
    pub fn next_block(&mut self) -> io::Result<Option<(&[u8], u64)>> {
        while !self.eof && (self.start > 0 || self.end < self.buf.len()) {
            if self.start == 0 && self.end < self.buf.len() {
                self.read_more()?;
            } else {
                self.compact();
            }
        }
        let pending = &self.buf[self.start..self.end];
        let Some(last) = memchr::memrchr(b'\n', pending) else {
            return Ok(None);
        };
        let a = self.start;
        self.start += last + 1;
        self.consumed += last as u64 + 1;
        Ok(Some((&self.buf[a..self.start], self.consumed)))
    }

    fn compact(&mut self) {
        if self.start > 0 {
            self.buf.copy_within(self.start..self.end, 0);
            self.end -= self.start;
            self.start = 0;
        }
    }

    /// Move the unfinished line to the front and read more after it.
    fn refill(&mut self) -> io::Result<()> {
        self.compact();
        if self.end == self.buf.len() {
            let grown = self.buf.len() * 2;
            self.buf.resize(grown, 0);
        }
        self.read_more()
    }

    /// One read into the free end of the buffer (which must have room).
    fn read_more(&mut self) -> io::Result<()> {
        loop {
            match self.inner.read(&mut self.buf[self.end..]) {
                Ok(0) => {
                    self.eof = true;
                    return Ok(());
                }
                Ok(n) => {
                    self.end += n;
                    return Ok(());
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines(text: &[u8], block: usize) -> (Vec<Vec<u8>>, u64) {
        let mut r = LineReader::with_block(text, block);
        let mut out = Vec::new();
        while let Some((l, _)) = r.next_line().unwrap() {
            out.push(l.to_vec());
        }
        (out, r.consumed)
    }

    #[test]
    fn splits_like_read_until_for_every_block_size() {
        let text = b"a,b\r\n\n1,2\nlonger line here\n\nlast";
        let want: Vec<Vec<u8>> = text.split(|&c| c == b'\n').map(|l| l.to_vec()).collect();
        for block in 1..12 {
            let (got, consumed) = lines(text, block);
            assert_eq!(got, want, "block {block}");
            assert_eq!(consumed, text.len() as u64);
        }
    }

    #[test]
    fn blocks_then_lines_give_the_same_lines() {
        let text = b"a,b\r\n\n1,2\nlonger line here\n\nlast";
        let want: Vec<Vec<u8>> = text.split(|&c| c == b'\n').map(|l| l.to_vec()).collect();
        for block in 1..12 {
            let mut r = LineReader::with_block(&text[..], block);
            let mut got = Vec::new();
            // One line, then blocks, then the rest line by line.
            got.push(r.next_line().unwrap().unwrap().0.to_vec());
            while let Some((b, _)) = r.next_block().unwrap() {
                assert!(b.ends_with(b"\n"));
                got.extend(b[..b.len() - 1].split(|&c| c == b'\n').map(|l| l.to_vec()));
            }
            while let Some((l, _)) = r.next_line().unwrap() {
                got.push(l.to_vec());
            }
            assert_eq!(got, want, "block {block}");
            assert_eq!(r.consumed, text.len() as u64);
        }
    }

    #[test]
    fn final_newline_gives_no_empty_last_line() {
        let (got, _) = lines(b"x\ny\n", 3);
        assert_eq!(got, vec![b"x".to_vec(), b"y".to_vec()]);
        let (got, _) = lines(b"", 3);
        assert!(got.is_empty());
    }
}
