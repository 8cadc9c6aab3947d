//! The bytes of a `CorrAcc` in a shard's partial folder
//! (`<run id>/correlation.bin`), so that `merge` adds shards exactly.
//!
//! Layout (little-endian): the magic `curlew-corr\n`, a u32 version, a
//! u64 length and that many bytes of JSON (nx, ny, the probe nodes,
//! `include_filled`), then f64 arrays bit for bit: x0, y0, dx, dy, the
//! probe points (x, y each), frames, then `n`, `sums`, `unc2`, `unc_n`;
//! version 2 adds to the JSON the frame blocks of the scales' uncertainty
//! (the run's frame count and the block count, `blocks`) and after the
//! arrays, per probe and block, the block accumulator's frames, `n`,
//! `sums`, `unc2`, `unc_n`. A truncated, foreign, older or longer file is
//! an error.

use serde::{Deserialize, Serialize};

use super::{CorrAcc, Layout};
use crate::error::Result;
use crate::field::Grid;

const MAGIC: &[u8] = b"curlew-corr\n";
const VERSION: u32 = 2;

#[derive(Serialize, Deserialize)]
struct Header {
    nx: usize,
    ny: usize,
    nodes: Vec<usize>,
    include_filled: bool,
    /// (frames of the run, blocks) of `blocks::LineBlocks`.
    blocks: Option<(u64, usize)>,
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
            blocks: self.blocks.as_ref().map(|b| (b.total, b.blocks)),
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
        let mut put = |v: &[f64]| {
            for x in v {
                out.extend_from_slice(&x.to_le_bytes());
            }
        };
        for v in [&head, &self.n, &self.sums, &self.unc2, &self.unc_n] {
            put(v);
        }
        for a in self.blocks.iter().flat_map(|b| &b.accs) {
            put(&[a.frames as f64]);
            for v in [&a.n, &a.sums, &a.unc2, &a.unc_n] {
                put(v);
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
        if let Some((total, n_blocks)) = h.blocks {
            let mut b = super::blocks::LineBlocks::new(
                grid,
                &acc.layout.nodes,
                acc.layout.include_filled,
                total,
            )
            .filter(|b| b.blocks == n_blocks)
            .ok_or_else(|| r.bad("the frame blocks do not follow from the run's frame count"))?;
            for a in &mut b.accs {
                a.frames = r.floats(1)?[0] as u64;
                a.n = r.floats(a.n.len())?;
                a.sums = r.floats(a.sums.len())?;
                a.unc2 = r.floats(a.unc2.len())?;
                a.unc_n = r.floats(a.unc_n.len())?;
            }
            acc.blocks = Some(b);
        }
        r.finish("trailing bytes")?;
        Ok(acc)
    }
}
