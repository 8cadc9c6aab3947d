//! The budget's partial state as bytes (`<run id>/budget.bin` in a partial
//! folder), so that shards merge exactly.
//!
//! Layout (little-endian; f64 as IEEE-754 bits, so a round trip is exact):
//!
//! ```text
//! 0       8   magic b"CURLEWVB" (curlew vorticity budget)
//! 8       4   format version, u32 (VERSION)
//! 12      8   header length H, u64;   20      H   header, JSON (below)
//! 20+H    8   array length A (f64 count), u64; then A f64s
//! end-32  32  SHA-256 of everything before it
//! ```
//!
//! Header: the budget `Params`, the statistics `Params`, the grid, the
//! smoother's equivalent stencil, frames
//! pushed, which bins are present, and the index and time of each kept
//! frame. Arrays, in order: each present bin's n, mean, cm; each kept
//! frame's fields, var_u, var_v. The budget's stencils are rebuilt from
//! the parameters, the grid and the smoother's stencil (in the header).
//! Reading checks magic, version, lengths and checksum; no partially read
//! state escapes.

use sha2::{Digest, Sha256};

use super::acc::{BinSums, BudgetAcc, Slice};
use super::ops::{NF, NT};
use crate::error::{Error, Result};
use crate::field::Grid;
use crate::stats;
use crate::stencil::{Stencil, Tap};

pub(crate) const MAGIC: &[u8; 8] = b"CURLEWVB";
pub(crate) const VERSION: u32 = 1;

#[derive(serde::Serialize, serde::Deserialize)]
struct Header {
    params: super::Params,
    stats: stats::Params,
    grid: Grid,
    /// The smoother's equivalent stencil as (dj, di, w).
    smoother: Option<Vec<(i32, i32, f64)>>,
    frames: u64,
    bins: Vec<bool>,
    /// (index, time_s bits) of each kept frame.
    slices: Vec<(u64, u64)>,
}

fn bad(what: impl Into<String>) -> Error {
    Error::data(format!("partial budget: {}", what.into()))
}

impl BudgetAcc {
    pub(crate) fn to_bytes(&self) -> Vec<u8> {
        let h = Header {
            params: self.params.clone(),
            stats: self.stats.clone(),
            grid: self.grid,
            smoother: self
                .smoother
                .as_ref()
                .map(|s| s.taps.iter().map(|t| (t.dj, t.di, t.w)).collect()),
            frames: self.frames,
            bins: self.bins.iter().map(Option::is_some).collect(),
            slices: self
                .slices
                .iter()
                .map(|s| (s.index, s.time_s.to_bits()))
                .collect(),
        };
        let head = serde_json::to_vec(&h).expect("header serialises");
        let mut arr: Vec<f64> = Vec::new();
        for b in self.bins.iter().flatten() {
            arr.extend(&b.n);
            arr.extend(&b.mean);
            arr.extend(&b.cm);
        }
        for s in &self.slices {
            arr.extend(&s.fields);
            arr.extend(&s.var_u);
            arr.extend(&s.var_v);
        }
        let mut out = Vec::with_capacity(60 + head.len() + 8 * arr.len());
        out.extend_from_slice(MAGIC);
        out.extend_from_slice(&VERSION.to_le_bytes());
        out.extend_from_slice(&(head.len() as u64).to_le_bytes());
        out.extend_from_slice(&head);
        out.extend_from_slice(&(arr.len() as u64).to_le_bytes());
        arr.iter()
            .for_each(|x| out.extend_from_slice(&x.to_le_bytes()));
        let sum = Sha256::digest(&out);
        out.extend_from_slice(&sum);
        out
    }

    /// Reads `to_bytes`.
    pub(crate) fn from_bytes(b: &[u8]) -> Result<BudgetAcc> {
        if b.len() < 8 || &b[..8] != MAGIC {
            return Err(bad("not a curlew partial-budget file (wrong magic bytes)"));
        }
        if b.len() < 60 {
            return Err(bad(format!("truncated: {} bytes", b.len())));
        }
        let (body, sum) = b.split_at(b.len() - 32);
        if Sha256::digest(body).as_slice() != sum {
            return Err(bad("checksum mismatch (damaged or truncated file)"));
        }
        let version = u32::from_le_bytes(body[8..12].try_into().unwrap());
        if version != VERSION {
            return Err(bad(format!(
                "format version {version}, this curlew reads version {VERSION}"
            )));
        }
        let hl = u64::from_le_bytes(body[12..20].try_into().unwrap()) as usize;
        let head = body
            .get(20..20usize.saturating_add(hl))
            .ok_or_else(|| bad("header longer than the file"))?;
        let h: Header =
            serde_json::from_slice(head).map_err(|e| bad(format!("unreadable header: {e}")))?;
        let rest = &body[20 + hl..];
        let nodes = h.grid.len();
        let per_bin = nodes * (1 + NF + NT);
        let per_slice = nodes * (NF + 2);
        let want = h.bins.iter().filter(|&&x| x).count() * per_bin + h.slices.len() * per_slice;
        if rest.len() < 8
            || u64::from_le_bytes(rest[..8].try_into().unwrap()) as usize != want
            || rest.len() != 8 + 8 * want
        {
            return Err(bad(format!(
                "array length does not match the header ({want} numbers expected)"
            )));
        }
        let mut it = rest[8..]
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes(c.try_into().unwrap()));
        let mut take = |n: usize| -> Vec<f64> { it.by_ref().take(n).collect() };
        let smoother = h
            .smoother
            .map(|t| Stencil::new(t.into_iter().map(|(dj, di, w)| Tap { dj, di, w }).collect()));
        let mut acc = BudgetAcc::new(&h.params, &h.stats, h.grid, smoother);
        acc.frames = h.frames;
        for (slot, &present) in acc.bins.iter_mut().zip(&h.bins) {
            if present {
                *slot = Some(BinSums {
                    n: take(nodes),
                    mean: take(nodes * NF),
                    cm: take(nodes * NT),
                });
            }
        }
        for &(index, t) in &h.slices {
            acc.slices.push(Slice {
                index,
                time_s: f64::from_bits(t),
                fields: take(nodes * NF),
                var_u: take(nodes),
                var_v: take(nodes),
            });
        }
        Ok(acc)
    }
}
