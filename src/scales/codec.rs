//! The bytes of a `CorrAcc` in a shard's partial folder
//! (`<run id>/correlation.bin`), so that `merge` adds shards exactly.
//!
//! Layout (little-endian): the magic `curlew-corr\n`, a u32 version, a
//! u64 length and that many bytes of JSON (nx, ny, the probe nodes,
//! `include_filled`), then f64 arrays bit for bit: x0, y0, dx, dy, the
//! probe points (x, y each), frames, then `n`, `sums`, `unc2`, `unc_n`.
//! A truncated, foreign or longer file is an error.

use serde::{Deserialize, Serialize};

use super::{CorrAcc, Layout};
use crate::error::Result;
use crate::field::Grid;

const MAGIC: &[u8] = b"curlew-corr\n";
const VERSION: u32 = 1;

#[derive(Serialize, Deserialize)]
struct Header {
    nx: usize,
    ny: usize,
    nodes: Vec<usize>,
    include_filled: bool,
}

impl CorrAcc {
    /// The accumulator as bytes (see the module doc).
    pub fn to_bytes(&self) -> Vec<u8> {
        let l = &self.layout;
        let h = Header {
            nx: l.grid.nx,
            ny: l.grid.ny,
            nodes: l.nodes.clone(),
            include_filled: l.include_filled,
        };
        let json = serde_json::to_vec(&h).unwrap_or_default();
        let mut out = Vec::with_capacity(json.len() + 8 * (self.sums.len() + self.n.len() + 16));
        out.extend_from_slice(MAGIC);
        out.extend_from_slice(&VERSION.to_le_bytes());
        out.extend_from_slice(&(json.len() as u64).to_le_bytes());
        out.extend_from_slice(&json);
        let g = l.grid;
        let head: Vec<f64> = [g.x0, g.y0, g.dx, g.dy]
            .into_iter()
            .chain(l.points.iter().flat_map(|p| [p.0, p.1]))
            .chain([self.frames as f64])
            .collect();
        for v in [&head, &self.n, &self.sums, &self.unc2, &self.unc_n] {
            for x in v.iter() {
                out.extend_from_slice(&x.to_le_bytes());
            }
        }
        out
    }

    /// Reads `to_bytes` back.
    pub fn from_bytes(b: &[u8]) -> Result<CorrAcc> {
        let (mut r, h): (_, Header) = crate::io::blob::BlobReader::open(
            b,
            MAGIC,
            VERSION,
            "two-point correlation accumulator",
            "a curlew correlation accumulator",
        )?;
        let np = h.nodes.len();
        let head = r.floats(4 + 2 * np + 1)?;
        let grid = Grid {
            nx: h.nx,
            ny: h.ny,
            x0: head[0],
            y0: head[1],
            dx: head[2],
            dy: head[3],
        };
        let nn = grid.len();
        if h.nodes.iter().any(|&k| k >= nn) {
            return Err(r.bad("a probe node lies outside the grid"));
        }
        let points = (0..np)
            .map(|p| (head[4 + 2 * p], head[5 + 2 * p]))
            .collect();
        let layout = Layout {
            grid,
            points,
            nodes: h.nodes,
            include_filled: h.include_filled,
        };
        let mut acc = CorrAcc::with_layout(layout);
        acc.frames = head[4 + 2 * np] as u64;
        acc.n = r.floats(acc.n.len())?;
        acc.sums = r.floats(acc.sums.len())?;
        acc.unc2 = r.floats(2 * np)?;
        acc.unc_n = r.floats(2 * np)?;
        r.finish("trailing bytes")?;
        Ok(acc)
    }
}
