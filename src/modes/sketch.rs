//! The one-pass, mergeable sketch of a run's velocity fluctuations, from
//! which `finish` builds the POD modes, energies and per-frame coefficients.
//!
//! Method: the randomised range finder of Halko, Martinsson & Tropp (2011,
//! SIAM Review 53:217, §4.1 and the single-pass scheme of §5.5) in the form
//! of Tropp, Yurtsever, Udell & Cevher (2017, SIAM J. Matrix Anal. Appl.
//! 38:1454, §4): for the fluctuation matrix X' (d = 2 × nodes rows: u' then
//! v' of every node; one column per frame) it keeps
//!
//! * the range sketch Y' = X' Ω = Σ_f x'_f ω_fᵀ (d × k), where ω_f, the row
//!   of the Gaussian test matrix Ω that belongs to frame f, is drawn from a
//!   ChaCha8 stream seeded by (`seed`, frame index): it depends on the
//!   frame, not on the thread, chunk or shard that meets it;
//! * the co-range sketch of every frame, z_f = Ψ x_f (l numbers per frame,
//!   Ψ one seeded l × d Gaussian matrix, l = 2k + 1 after Tropp et al.).
//!
//! The mean is not known during the pass. Y' is kept centred as it grows,
//! the way Welford's variance is: pushing frame n with node mean m_{n-1}
//! → m_n adds (x_n − m_n) ω_nᵀ − (m_n − m_{n−1}) W_{n−1}ᵀ, with W = Σ ω over
//! the frames seen, and merging two parts A, B with means m_A, m_B → m adds
//! (m_A − m) W_Aᵀ + (m_B − m) W_Bᵀ to Y'_A + Y'_B. Both are exact identities
//! for Y' = Σ (x_f − m) ω_fᵀ (no large raw sums to cancel). The co-range
//! sketch of the raw frame is centred at the finish: z'_f = z_f − Ψ_f m,
//! where Ψ_f m sums only the nodes valid in frame f.
//!
//! Gaps: a node counts in a frame when both u and v are finite (after
//! filling). Its mean, count and W are per node; where it is missing, its
//! fluctuation is taken as zero (mean imputation), and the frame's list of
//! missing nodes is kept so the centring stays exact. Nothing else is held
//! per frame: memory is d × k + nodes × k + d × l numbers plus l numbers and
//! the gap list per frame. Frames are pushed in frame order within a chunk
//! and chunks merged in frame order, so the sums do not depend on threads.

use std::sync::Arc;

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use serde::{Deserialize, Serialize};

use super::Params;
use crate::error::{Error, Result};

/// One frame's record: its index in the run, time, co-range sketch, gaps.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FrameSketch {
    pub index: u64,
    pub time_s: Option<f64>,
    /// Ψ x_f over the nodes valid in this frame (l numbers).
    pub z: Vec<f64>,
    /// Nodes without a finite (u, v) in this frame.
    pub gaps: Vec<u32>,
}

/// The mergeable sketch of one run (or one chunk or shard of it).
#[derive(Debug, Clone)]
pub struct ModeSketch {
    /// The `[modes]` parameters it was built with (modes, oversampling and
    /// seed set k and Ψ; chunks of one run share them).
    pub params: Params,
    /// Grid nodes; the sketched vectors have d = 2 × nodes values.
    pub nodes: usize,
    /// Sketch width k and co-range width l.
    pub k: usize,
    /// Co-range width l = 2k + 1.
    pub l: usize,
    /// Valid frames per node.
    pub count: Vec<u64>,
    /// Running mean of (u of every node, then v of every node): d values.
    pub mean: Vec<f64>,
    /// Running sum of squared deviations from the mean, d values (Welford).
    pub m2: Vec<f64>,
    /// Σ of the squared standard uncertainty of u, v over valid samples, d values.
    pub unc2: Vec<f64>,
    /// Centred range sketch Y' (d × k, row-major).
    pub y: Vec<f64>,
    /// Σ ω_f over the frames where the node is valid (nodes × k).
    pub w: Vec<f64>,
    /// One record per frame pushed, in frame order.
    pub frames: Vec<FrameSketch>,
    /// Ψ (l × d, row-major), generated from the seed, shared by chunks.
    pub psi: Arc<Vec<f64>>,
}

/// The test-matrix row of frame `index`: k standard normal numbers.
pub(crate) fn omega_row(seed: u64, index: u64, k: usize) -> Vec<f64> {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    r.set_stream(index);
    (0..k).map(|_| StandardNormal.sample(&mut r)).collect()
}

/// The co-range test matrix Ψ (l × d), from its own stream of the seed.
pub(crate) fn psi_matrix(seed: u64, l: usize, d: usize) -> Vec<f64> {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    r.set_stream(u64::MAX);
    (0..l * d).map(|_| StandardNormal.sample(&mut r)).collect()
}

impl ModeSketch {
    /// An empty sketch for a grid of `nodes` nodes (generates Ψ).
    pub fn new(params: &Params, nodes: usize) -> ModeSketch {
        let k = params.modes + params.oversampling;
        let l = 2 * k + 1;
        let psi = Arc::new(psi_matrix(params.seed, l, 2 * nodes));
        ModeSketch::with_psi(params, nodes, psi)
    }

    fn with_psi(params: &Params, nodes: usize, psi: Arc<Vec<f64>>) -> ModeSketch {
        let k = params.modes + params.oversampling;
        let d = 2 * nodes;
        ModeSketch {
            params: params.clone(),
            nodes,
            k,
            l: 2 * k + 1,
            count: vec![0; nodes],
            mean: vec![0.0; d],
            m2: vec![0.0; d],
            unc2: vec![0.0; d],
            y: vec![0.0; d * k],
            w: vec![0.0; nodes * k],
            frames: Vec::new(),
            psi,
        }
    }

    /// An empty sketch of the same shape, sharing Ψ (for a chunk).
    pub(crate) fn empty_like(&self) -> ModeSketch {
        ModeSketch::with_psi(&self.params, self.nodes, self.psi.clone())
    }

    /// Frames pushed.
    pub(crate) fn n_frames(&self) -> usize {
        self.frames.len()
    }

    /// Adds one frame: u, v and their standard uncertainties, node by node
    /// (node k = j nx + i); a node counts where u and v are finite.
    pub fn push(&mut self, index: u64, time_s: Option<f64>, uv: [&[f64]; 2], unc: [&[f64]; 2]) {
        let (n, k) = (self.nodes, self.k);
        let omega = omega_row(self.params.seed, index, k);
        let mut gaps = Vec::new();
        let mut z = vec![0.0; self.l];
        for node in 0..n {
            let (u, v) = (uv[0][node], uv[1][node]);
            if !(u.is_finite() && v.is_finite()) {
                gaps.push(node as u32);
                continue;
            }
            self.count[node] += 1;
            let c = self.count[node] as f64;
            let w = &mut self.w[node * k..(node + 1) * k];
            for (comp, x) in [(0, u), (1, v)] {
                let r = comp * n + node;
                let old = self.mean[r];
                let new = old + (x - old) / c;
                self.m2[r] += (x - old) * (x - new);
                self.mean[r] = new;
                let s = unc[comp][node];
                if s.is_finite() {
                    self.unc2[r] += s * s;
                }
                let (a, b) = (x - new, new - old);
                for ((yy, om), ww) in self.y[r * k..(r + 1) * k].iter_mut().zip(&omega).zip(&*w) {
                    *yy += a * om - b * ww;
                }
                let psi = &self.psi[..];
                let d = 2 * n;
                for (q, zq) in z.iter_mut().enumerate() {
                    *zq += psi[q * d + r] * x;
                }
            }
            for (ww, om) in w.iter_mut().zip(&omega) {
                *ww += om;
            }
        }
        self.frames.push(FrameSketch {
            index,
            time_s,
            z,
            gaps,
        });
    }

    /// Adds the later part `b` (its frames follow this sketch's frames).
    pub(crate) fn merge(&mut self, b: ModeSketch) {
        let (n, k) = (self.nodes, self.k);
        for node in 0..n {
            let (ca, cb) = (self.count[node] as f64, b.count[node] as f64);
            if cb == 0.0 {
                continue;
            }
            let c = ca + cb;
            for comp in 0..2 {
                let r = comp * n + node;
                let (ma, mb) = (self.mean[r], b.mean[r]);
                let delta = mb - ma;
                let m = ma + delta * cb / c;
                self.m2[r] += b.m2[r] + delta * delta * ca * cb / c;
                self.unc2[r] += b.unc2[r];
                let (wa, wb) = (
                    &self.w[node * k..(node + 1) * k],
                    &b.w[node * k..(node + 1) * k],
                );
                let (da, db) = (ma - m, mb - m);
                for (q, yy) in self.y[r * k..(r + 1) * k].iter_mut().enumerate() {
                    *yy += b.y[r * k + q] + da * wa[q] + db * wb[q];
                }
                self.mean[r] = m;
            }
            self.count[node] += b.count[node];
            for (wa, wb) in self.w[node * k..(node + 1) * k]
                .iter_mut()
                .zip(&b.w[node * k..])
            {
                *wa += wb;
            }
        }
        self.frames.extend(b.frames);
    }

    /// Checks that `b` is a sketch of the same kind (shards of one pipeline).
    pub(crate) fn compatible(&self, b: &ModeSketch) -> Result<()> {
        if self.params != b.params || self.nodes != b.nodes {
            return Err(Error::data(format!(
                "mode sketches differ (parameters {:?} on {} nodes vs {:?} on {} nodes)",
                self.params, self.nodes, b.params, b.nodes
            )));
        }
        Ok(())
    }
}
