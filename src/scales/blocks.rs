//! The uncertainty of the integral length scales and of ρ₀ by batch means:
//! the run's frames cut into B contiguous blocks by frame index, each
//! block's co-moments kept along the probe's row and column only, each
//! block's scales computed exactly as the run's (`finish::axis`), and the
//! standard uncertainty of the run's value taken as the standard error of
//! the block values, `sd(L_b) / sqrt(B')` over the B' blocks where the
//! value exists (the method of batch means; Law & Kelton, Simulation
//! Modeling and Analysis, ch. 9, from memory; common practice for
//! statistics of correlated records). Contiguous blocks keep frames that
//! are correlated in time (time-resolved runs) in one block, so that the
//! blocks are nearly independent when a block is much longer than the
//! flow's correlation time.
//!
//! Owns: `LineBlocks` (push, merge, bytes) and `scale_unc`. Does not own
//! the co-moments' update and merge (`CorrAcc`, reused here on a virtual
//! one-row grid: the probe's row then its column) or the scales
//! (`finish`).
//!
//! B = min(8, frames / 10) blocks of the run's frames (at least 10 frames
//! each); with fewer than 4 blocks (under 40 frames) there is no
//! uncertainty (NaN). The block scales rest on a tenth of the frames or
//! fewer, so they are noisier and, the first zero crossing being a
//! nonlinear rule, biased by more than the run's value; the standard
//! error of their mean is what the run's value is taken to carry (to
//! leading order in 1/N the two variances agree).
//!
//! Memory: (nx + ny) nodes per probe and block, 11 numbers each; work per
//! frame the same per node as the full accumulator. Shards merge blocks by
//! block number exactly (blocks follow the run-wide frame index).

use super::{CorrAcc, Layout};
use crate::field::Grid;

/// Blocks of the run's frames whose co-moments along each probe's row
/// and column are kept apart.
#[derive(Debug, Clone, PartialEq)]
pub struct LineBlocks {
    /// Frames of the whole run (the blocks' boundaries follow it).
    pub total: u64,
    /// Number of blocks the run's frames are split into.
    pub blocks: usize,
    /// Per probe: the nodes of its row (x) then of its column (y).
    pub targets: Vec<Vec<usize>>,
    /// Probe-major: `accs[p * blocks + b]`, each on a one-row virtual grid
    /// of the probe's targets.
    pub accs: Vec<CorrAcc>,
}

impl LineBlocks {
    /// The blocks of a run of `total` frames with probe nodes `nodes` on
    /// `grid`; `None` with fewer than 40 frames (see the module doc).
    pub fn new(grid: Grid, nodes: &[usize], include_filled: bool, total: u64) -> Option<Self> {
        let blocks = (total / 10).min(8) as usize;
        if blocks < 4 {
            return None;
        }
        let targets: Vec<Vec<usize>> = nodes
            .iter()
            .map(|&k| {
                let (i0, j0) = (k % grid.nx, k / grid.nx);
                (0..grid.nx)
                    .map(|i| j0 * grid.nx + i)
                    .chain((0..grid.ny).map(|j| j * grid.nx + i0))
                    .collect()
            })
            .collect();
        let accs = nodes
            .iter()
            .zip(&targets)
            .flat_map(|(&k, t)| {
                let layout = Layout {
                    grid: Grid {
                        nx: t.len(),
                        ny: 1,
                        x0: 0.0,
                        y0: 0.0,
                        dx: 1.0,
                        dy: 1.0,
                    },
                    points: vec![(0.0, 0.0)],
                    nodes: vec![k % grid.nx],
                    include_filled,
                };
                (0..blocks).map(move |_| CorrAcc::with_layout(layout.clone()))
            })
            .collect();
        Some(LineBlocks {
            total,
            blocks,
            targets,
            accs,
        })
    }

    /// An empty copy (for a chunk).
    pub fn empty_like(&self) -> Self {
        LineBlocks {
            accs: self.accs.iter().map(CorrAcc::empty_like).collect(),
            ..self.clone()
        }
    }

    /// The block of run-wide frame `index`.
    pub fn block_of(&self, index: u64) -> usize {
        ((index.min(self.total.saturating_sub(1)) as u128 * self.blocks as u128)
            / self.total.max(1) as u128) as usize
    }

    /// Adds frame `index` given node by node (as `CorrAcc::push_values`).
    pub fn push(&mut self, index: u64, counts: &[bool], uv: [&[f64]; 2], unc: [&[f64]; 2]) {
        let b = self.block_of(index);
        for (p, t) in self.targets.iter().enumerate() {
            let c: Vec<bool> = t.iter().map(|&k| counts[k]).collect();
            let g = |a: &[f64]| t.iter().map(|&k| a[k]).collect::<Vec<f64>>();
            let (u, v, su, sv) = (g(uv[0]), g(uv[1]), g(unc[0]), g(unc[1]));
            self.accs[p * self.blocks + b].push_values(&c, [&u, &v], [&su, &sv]);
        }
    }

    /// Adds `b` (frames after this one's, or of other blocks) block by block.
    pub fn merge(&mut self, b: LineBlocks) {
        for (a, x) in self.accs.iter_mut().zip(b.accs) {
            a.merge(x);
        }
    }

    /// The full-grid ρ of component `c` of probe `p` in block `b`: NaN off
    /// the probe's row and column.
    pub fn rho(&self, grid: &Grid, p: usize, b: usize, c: usize) -> Vec<f64> {
        let acc = &self.accs[p * self.blocks + b];
        let (sp, sq, cpq) = (acc.part(0, c, 2), acc.part(0, c, 3), acc.part(0, c, 4));
        let mut rho = vec![f64::NAN; grid.len()];
        for (q, &k) in self.targets[p].iter().enumerate() {
            let den = (sp[q] * sq[q]).sqrt();
            if acc.n[q] >= 3.0 && den > 0.0 {
                rho[k] = cpq[q] / den;
            }
        }
        rho
    }
}

/// The standard error of the mean of the finite block values (NaN with
/// fewer than 4).
pub fn scale_unc(values: &[f64]) -> f64 {
    let v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    let n = v.len();
    if n < 4 {
        return f64::NAN;
    }
    let m = v.iter().sum::<f64>() / n as f64;
    (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / ((n - 1) * n) as f64).sqrt()
}
