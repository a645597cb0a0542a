//! Line splitting over large blocks for the sweep-log reader.
//!
//! The file is read in blocks of [`BLOCK_BYTES`] into one reused buffer and lines are
//! handed out as slices of it, so no per-line copy or allocation happens and the file is
//! never held whole in memory. A line longer than the buffer grows the buffer.
//!
//! [`LineReader::next_block_with`] reads the block after the one being parsed into a
//! second buffer at the same time, so the parse never waits for the file.

use std::io::{self, Read};

/// Bytes read from the file at a time.
pub(crate) const BLOCK_BYTES: usize = 1 << 22;

/// Longest line read, bytes (16 MiB: thousands of times a log row). A longer line is
/// refused rather than held, so a file with no line ends (`/dev/zero`, a binary file)
/// cannot take all memory.
pub const MAX_LINE_BYTES: usize = 1 << 24;

/// Hands out the lines of a reader, without their `\n`.
pub(crate) struct LineReader<R> {
    inner: R,
    buf: Vec<u8>,
    /// Second buffer for reading ahead (empty until [`LineReader::next_block_with`]).
    spare: Vec<u8>,
    /// An error of a read ahead, returned by the next read.
    read_error: Option<io::Error>,
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
            spare: Vec::new(),
            read_error: None,
            start: 0,
            end: 0,
            eof: false,
            consumed: 0,
        }
    }

    /// The reader wrapped (every byte of it has been read once the lines are done).
    pub fn inner(&self) -> &R {
        &self.inner
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
    /// filling the buffer, handed to `work`; returns what `work` returned, with the
    /// bytes handed out so far, or `None` when no complete line is left (the caller then
    /// goes on with [`LineReader::next_line`]). While `work` runs, the next block is
    /// read into a second buffer on another thread, which then becomes the current one.
    /// An error of that read is kept and returned by the next call that reads (so the
    /// block's own outcome comes first, as in file order).
    pub fn next_block_with<T, F>(&mut self, work: F) -> io::Result<Option<(T, u64)>>
    where
        R: Send,
        T: Send,
        F: FnOnce(&[u8]) -> T + Send,
    {
        while !self.eof && (self.start > 0 || self.end < self.buf.len()) {
            if self.start == 0 && self.end < self.buf.len() {
                self.read_more()?;
            } else {
                self.compact();
            }
        }
        let Some(last) = memchr::memrchr(b'\n', &self.buf[self.start..self.end]) else {
            return Ok(None);
        };
        let block_end = self.start + last + 1;
        if self.eof {
            // Nothing left to read ahead (a small file, or its last block).
            let out = work(&self.buf[self.start..block_end]);
            self.consumed += (block_end - self.start) as u64;
            self.start = block_end;
            return Ok(Some((out, self.consumed)));
        }
        let LineReader {
            inner,
            buf,
            spare,
            read_error,
            start,
            end,
            eof,
            consumed,
        } = self;
        // The unfinished line after the block goes to the front of the spare buffer and
        // the file's next bytes after it.
        let tail = *end - block_end;
        if spare.len() != buf.len() {
            // Zeroed by the allocator, not written: only the pages a read fills are
            // paged in (a small log does not pay for a 4 MiB buffer).
            *spare = vec![0; buf.len()];
        }
        spare[..tail].copy_from_slice(&buf[block_end..*end]);
        let block = &buf[*start..block_end];
        let (out, ahead) = rayon::join(|| work(block), || fill(inner, &mut spare[..], tail));
        *consumed += (block_end - *start) as u64;
        std::mem::swap(buf, spare);
        *start = 0;
        match ahead {
            Ok((filled, hit_eof)) => {
                *end = filled;
                *eof = hit_eof;
            }
            Err(e) => {
                *end = tail;
                *read_error = Some(e);
            }
        }
        Ok(Some((out, *consumed)))
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
            if self.end >= MAX_LINE_BYTES {
                return Err(io::Error::new(
                    io::ErrorKind::InvalidData,
                    format!(
                        "a line is longer than {} MiB, the longest line read; this is not a \
                         sweep log (or its lines do not end with a line feed)",
                        MAX_LINE_BYTES >> 20
                    ),
                ));
            }
            let grown = (self.buf.len() * 2).min(MAX_LINE_BYTES.max(self.buf.len()));
            self.buf.resize(grown, 0);
        }
        self.read_more()
    }

    /// One read into the free end of the buffer (which must have room).
    fn read_more(&mut self) -> io::Result<()> {
        if let Some(e) = self.read_error.take() {
            return Err(e);
        }
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

/// Read into `buf` after its first `from` bytes until it is full or the file ends.
/// Returns the bytes held and whether the file ended.
fn fill(inner: &mut impl Read, buf: &mut [u8], from: usize) -> io::Result<(usize, bool)> {
    let mut end = from;
    while end < buf.len() {
        match inner.read(&mut buf[end..]) {
            Ok(0) => return Ok((end, true)),
            Ok(n) => end += n,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok((end, false))
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
            for trickle in [false, true] {
                let mut r = LineReader::with_block(Trickle::new(text, trickle), block);
                let mut got = Vec::new();
                // One line, then blocks (each read while the one before is handled),
                // then the rest line by line.
                got.push(r.next_line().unwrap().unwrap().0.to_vec());
                while let Some((lines, _)) = r
                    .next_block_with(|b| {
                        assert!(b.ends_with(b"\n"));
                        b[..b.len() - 1]
                            .split(|&c| c == b'\n')
                            .map(|l| l.to_vec())
                            .collect::<Vec<_>>()
                    })
                    .unwrap()
                {
                    got.extend(lines);
                }
                while let Some((l, _)) = r.next_line().unwrap() {
                    got.push(l.to_vec());
                }
                assert_eq!(got, want, "block {block}");
                assert_eq!(r.consumed, text.len() as u64);
            }
        }
    }

    #[test]
    fn an_error_while_reading_ahead_comes_after_the_block_before_it() {
        let text = b"1,2\n3,4\n5,6\n7,8\n";
        let mut r = LineReader::with_block(Trickle::failing_after(text, 8), 8);
        // The first block is whole; reading the next one fails meanwhile.
        let (first, _) = r.next_block_with(|b| b.to_vec()).unwrap().unwrap();
        assert_eq!(first, b"1,2\n3,4\n");
        let err = r.next_block_with(|b| b.to_vec()).unwrap_err();
        assert_eq!(err.kind(), io::ErrorKind::Other);
    }

    /// A reader that hands out one byte per read (`trickle`) or everything it can, and
    /// fails once `fail_after` bytes have gone.
    struct Trickle<'a> {
        text: &'a [u8],
        trickle: bool,
        fail_after: usize,
        given: usize,
    }

    impl<'a> Trickle<'a> {
        fn new(text: &'a [u8], trickle: bool) -> Self {
            Trickle {
                text,
                trickle,
                fail_after: usize::MAX,
                given: 0,
            }
        }

        fn failing_after(text: &'a [u8], fail_after: usize) -> Self {
            Trickle {
                fail_after,
                ..Trickle::new(text, false)
            }
        }
    }

    impl Read for Trickle<'_> {
        fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
            if self.given >= self.fail_after {
                return Err(io::Error::other("device went away"));
            }
            let left = &self.text[self.given..];
            let mut n = left.len().min(buf.len()).min(self.fail_after - self.given);
            if self.trickle {
                n = n.min(1);
            }
            buf[..n].copy_from_slice(&left[..n]);
            self.given += n;
            Ok(n)
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
