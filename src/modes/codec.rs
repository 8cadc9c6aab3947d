//! The bytes of a `ModeSketch` in a shard's partial folder
//! (`<run id>/modes.bin`), so that `merge` adds shards exactly.
//!
//! Layout (little-endian): the magic `curlew-modes\n`, a u32 version, a u64
//! length and that many bytes of JSON (parameters, nodes, and per frame its
//! index, time and gaps), then the f64 arrays count, mean, m2, unc2, y, w
//! and every frame's z, in that order. Floats are stored bit for bit (JSON
//! would round-trip them only to the last digit), so a merged campaign
//! equals a single run to round-off.

use serde::{Deserialize, Serialize};

use super::sketch::{psi_matrix, FrameSketch, ModeSketch};
use super::Params;
use crate::error::Result;

const MAGIC: &[u8] = b"curlew-modes\n";
const VERSION: u32 = 1;

#[derive(Serialize, Deserialize)]
struct Header {
    params: Params,
    nodes: usize,
    frames: Vec<(u64, Option<f64>, Vec<u32>)>,
}

fn put(out: &mut Vec<u8>, v: &[f64]) {
    for x in v {
        out.extend_from_slice(&x.to_le_bytes());
    }
}

impl ModeSketch {
    /// The sketch as bytes (see the module doc).
    pub(crate) fn to_bytes(&self) -> Vec<u8> {
        let h = Header {
            params: self.params.clone(),
            nodes: self.nodes,
            frames: self
                .frames
                .iter()
                .map(|f| (f.index, f.time_s, f.gaps.clone()))
                .collect(),
        };
        let json = serde_json::to_vec(&h).unwrap_or_default();
        let mut out = Vec::with_capacity(json.len() + 8 * (self.y.len() + self.w.len()));
        out.extend_from_slice(MAGIC);
        out.extend_from_slice(&VERSION.to_le_bytes());
        out.extend_from_slice(&(json.len() as u64).to_le_bytes());
        out.extend_from_slice(&json);
        let count: Vec<f64> = self.count.iter().map(|&c| c as f64).collect();
        for v in [&count, &self.mean, &self.m2, &self.unc2, &self.y, &self.w] {
            put(&mut out, v);
        }
        for f in &self.frames {
            put(&mut out, &f.z);
        }
        out
    }

    /// Reads `to_bytes` back; a truncated or foreign file is an error.
    pub(crate) fn from_bytes(b: &[u8]) -> Result<ModeSketch> {
        let (mut r, h): (_, Header) = crate::io::blob::BlobReader::open(
            b,
            MAGIC,
            VERSION,
            "mode sketch",
            "a curlew mode sketch",
        )?;
        let k = h.params.modes + h.params.oversampling;
        let l = 2 * k + 1;
        let (n, d) = (h.nodes, 2 * h.nodes);
        let count = r.floats(n)?.into_iter().map(|c| c as u64).collect();
        let (mean, m2, unc2) = (r.floats(d)?, r.floats(d)?, r.floats(d)?);
        let (y, w) = (r.floats(d * k)?, r.floats(n * k)?);
        let mut frames = Vec::with_capacity(h.frames.len());
        for (index, time_s, gaps) in h.frames {
            frames.push(FrameSketch {
                index,
                time_s,
                z: r.floats(l)?,
                gaps,
            });
        }
        r.finish("trailing bytes after the last frame")?;
        let psi = std::sync::Arc::new(psi_matrix(h.params.seed, l, d));
        Ok(ModeSketch {
            params: h.params,
            nodes: n,
            k,
            l,
            count,
            mean,
            m2,
            unc2,
            y,
            w,
            frames,
            psi,
        })
    }
}
