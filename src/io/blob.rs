//! Reading the binary partial states that shards carry to `merge` (the POD
//! sketch, the two-point co-moments): a magic line, a little-endian u32
//! version, a u64 length and a JSON header of that length, then
//! little-endian f64 arrays. One reader for every such format, so that each
//! refuses a foreign, truncated, newer or overlong file the same way.

use serde::de::DeserializeOwned;

use crate::error::{Error, Result};

/// A cursor over one blob; errors are prefixed with `what`.
pub(crate) struct BlobReader<'a> {
    b: &'a [u8],
    at: usize,
    what: &'static str,
}

impl<'a> BlobReader<'a> {
    /// Checks the magic and the version, reads the JSON header, and leaves
    /// the cursor at the first array. `kind` names the format in the
    /// wrong-magic error ("a curlew mode sketch").
    pub(crate) fn open<H: DeserializeOwned>(
        b: &'a [u8],
        magic: &[u8],
        version: u32,
        what: &'static str,
        kind: &str,
    ) -> Result<(BlobReader<'a>, H)> {
        let mut r = BlobReader { b, at: 0, what };
        if !b.starts_with(magic) {
            return Err(r.bad(&format!("not {kind} (wrong magic)")));
        }
        r.at = magic.len();
        let v = u32::from_le_bytes(r.take(4)?.try_into().expect("4 bytes"));
        if v != version {
            return Err(r.bad(&format!("version {v} is not {version}")));
        }
        let len = u64::from_le_bytes(r.take(8)?.try_into().expect("8 bytes")) as usize;
        let h = serde_json::from_slice(r.take(len)?)
            .map_err(|e| r.bad(&format!("header cannot be read: {e}")))?;
        Ok((r, h))
    }

    /// The error `what: msg`.
    pub(crate) fn bad(&self, msg: &str) -> Error {
        Error::data(format!("{}: {msg}", self.what))
    }

    fn take(&mut self, n: usize) -> Result<&'a [u8]> {
        let s = self
            .b
            .get(self.at..self.at.saturating_add(n))
            .ok_or_else(|| self.bad("file ends early"))?;
        self.at += n;
        Ok(s)
    }

    /// The next `n` f64 values.
    pub(crate) fn floats(&mut self, n: usize) -> Result<Vec<f64>> {
        let bytes = n.checked_mul(8).ok_or_else(|| self.bad("size overflows"))?;
        Ok(self
            .take(bytes)?
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes")))
            .collect())
    }

    /// Errs with `msg` unless every byte was read.
    pub(crate) fn finish(&self, msg: &str) -> Result<()> {
        if self.at != self.b.len() {
            return Err(self.bad(msg));
        }
        Ok(())
    }
}
