//! SHA-256 of input files, for ledger records and report footers: a record says exactly
//! which bytes it came from. Logs are hashed as they are read ([`HashingReader`]), plans
//! from the text parsed; nothing is read a second time to hash it.

use std::io::Read;
use std::path::Path;

use sha2::{Digest, Sha256};

/// Lower-case hex SHA-256 of a file's bytes, read in chunks.
pub fn sha256_file(path: &Path) -> std::io::Result<String> {
    let mut f = std::fs::File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(hex(&h.finalize()))
}

/// A reader that hashes every byte it hands out, so a file is hashed in the same pass
/// that reads it: the hash names exactly the bytes that were analysed, also for a pipe
/// or a file that changes while it is read.
#[derive(Debug)]
pub struct HashingReader<R> {
    inner: R,
    hasher: Sha256,
}

impl<R: Read> HashingReader<R> {
    /// Wrap a reader.
    pub fn new(inner: R) -> Self {
        HashingReader {
            inner,
            hasher: Sha256::new(),
        }
    }

    /// Lower-case hex SHA-256 of the bytes read so far.
    pub fn hex_digest(&self) -> String {
        hex(&self.hasher.clone().finalize())
    }
}

impl<R: Read> Read for HashingReader<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        Ok(n)
    }
}

/// Lower-case hex SHA-256 of bytes.
pub fn sha256_bytes(bytes: &[u8]) -> String {
    hex(&Sha256::digest(bytes))
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // FIPS 180-2, appendix B.1: SHA-256("abc").
    #[test]
    fn known_digest_of_abc() {
        assert_eq!(
            sha256_bytes(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    // FIPS 180-2, appendix B.1, as above: the reader's digest of "abc" is the same.
    #[test]
    fn hashing_reader_hashes_what_it_hands_out() {
        let mut r = HashingReader::new(&b"abc"[..]);
        let mut out = Vec::new();
        r.read_to_end(&mut out).unwrap();
        assert_eq!(out, b"abc");
        assert_eq!(r.hex_digest(), sha256_bytes(b"abc"));
    }
}
