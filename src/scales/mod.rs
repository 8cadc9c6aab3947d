//! Spatial scales of a run: two-point correlations of the velocity
//! fluctuations u′ and v′ about each probe, the integral length scales in x
//! and y, and the spike of uncorrelated measurement noise at zero
//! separation.
//!
//! Owns: the streaming co-moment accumulator (`CorrAcc`, its bytes in
//! `codec`), and its finish into correlations, scales and tables
//! (`finish`). Does not own: the probes (`[statistics] probes`, resolved in
//! `plan`), reading or deriving frames (`reduce` hands us each frame as the
//! statistics see it), nor the figure (`plot::structures`).
//!
//! Method (common practice; e.g. Pope, Turbulent Flows, 2000, §6.1 and
//! eq. 6.47 for the integral scale, from memory): for the node p nearest a
//! probe and every node q of the grid,
//! ρ_uu(p, q) = Σ_f (u_p − ū_p)(u_q − ū_q) / sqrt(Σ_f (u_p − ū_p)² Σ_f (u_q − ū_q)²),
//! the sums over the frames where both nodes count as samples (the
//! statistics' rule: a valid vector with finite u, v; replaced and filled
//! ones too with `include_filled`), the means over those same frames
//! (pairwise-complete Pearson, as `numpy.corrcoef` of the pairs). Likewise
//! ρ_vv.
//!
//! Streaming and merging: per (probe, node) the pair count n, the two
//! means, the two sums of squared deviations and the co-moment, updated
//! frame by frame with Welford's bivariate rule and merged with the exact
//! pairwise rule of Chan, Golub & LeVeque (1979, "Updating formulae and a
//! pairwise algorithm for computing sample variances"):
//! C = C_a + C_b + δ_p δ_q n_a n_b / n. Chunks push frames in frame order
//! and merge in frame order (as `stats`), so the result does not depend on
//! the thread count; shards merge exactly (to round-off).
//!
//! Memory: 5 numbers per probe, node and component plus the pair count;
//! work per frame about 12 operations per probe and node. On for every run
//! that names probes.

pub mod blocks;
pub mod codec;
pub mod finish;
#[cfg(test)]
mod tests;

use serde::{Deserialize, Serialize};

use crate::derive::Derived;
use crate::error::{Error, Result};
use crate::field::{Field, Grid};

pub use finish::{finish, AxisScale, Scales};

/// Parts kept per probe, component and node: mean at the probe, mean at
/// the node, Σ squared deviations at the probe, at the node, co-moment.
const PARTS: usize = 5;

/// The shape of an accumulator: what must agree for two to merge.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Layout {
    /// The grid the co-moments are kept on (m).
    pub grid: Grid,
    /// The probe points asked for (m) and the node traced for each.
    pub points: Vec<(f64, f64)>,
    /// The node (row-major index) traced for each probe.
    pub nodes: Vec<usize>,
    /// Filled vectors count as samples (`[statistics] include_filled`).
    pub include_filled: bool,
}

/// The mergeable two-point co-moments of one run (or chunk, or shard).
#[derive(Debug, Clone, PartialEq)]
pub struct CorrAcc {
    /// Grid, probes and sample rule; two accumulators merge only when
    /// theirs agree.
    pub layout: Layout,
    /// Frames pushed.
    pub frames: u64,
    /// Pair counts, probe-major: `n[p * nodes + q]`.
    pub n: Vec<f64>,
    /// `sums[((p * 2 + c) * PARTS + part) * nodes + q]`, c = 0 for u, 1 for v.
    pub sums: Vec<f64>,
    /// Per probe and component: Σ of the squared propagated standard
    /// uncertainty at the probe node, and the number of terms.
    pub unc2: Vec<f64>,
    /// The number of terms in each `unc2` sum.
    pub unc_n: Vec<f64>,
    /// The co-moments along each probe's row and column in blocks of the
    /// run's frames, for the scales' uncertainty (`blocks`); `None` for a
    /// run of fewer than 40 frames and for the blocks' own accumulators.
    pub blocks: Option<blocks::LineBlocks>,
}

impl CorrAcc {
    /// An empty accumulator for the probes of `stats` on `grid`, for a run
    /// of `total` frames (the blocks of the scales' uncertainty); `None`
    /// when the run names no probe.
    pub fn new(stats: &crate::stats::Params, grid: Grid, total: u64) -> Option<CorrAcc> {
        if stats.probes.is_empty() {
            return None;
        }
        let nodes = stats
            .probes
            .iter()
            .map(|&(x, y)| crate::stats::nearest_node(&grid, x, y))
            .collect();
        let mut acc = CorrAcc::with_layout(Layout {
            grid,
            points: stats.probes.clone(),
            nodes,
            include_filled: stats.include_filled,
        });
        acc.blocks = blocks::LineBlocks::new(grid, &acc.layout.nodes, stats.include_filled, total);
        Some(acc)
    }

    /// An empty accumulator of a given layout.
    pub fn with_layout(layout: Layout) -> CorrAcc {
        let (np, nn) = (layout.nodes.len(), layout.grid.len());
        CorrAcc {
            frames: 0,
            n: vec![0.0; np * nn],
            sums: vec![0.0; np * 2 * PARTS * nn],
            unc2: vec![0.0; np * 2],
            unc_n: vec![0.0; np * 2],
            layout,
            blocks: None,
        }
    }

    /// An empty accumulator of the same layout and blocks (for a chunk).
    pub fn empty_like(&self) -> CorrAcc {
        let mut acc = CorrAcc::with_layout(self.layout.clone());
        acc.blocks = self.blocks.as_ref().map(blocks::LineBlocks::empty_like);
        acc
    }

    /// The values of `part` (0..5, see `PARTS`) of probe `p`, component
    /// `c`, one per node.
    pub fn part(&self, p: usize, c: usize, part: usize) -> &[f64] {
        let nn = self.layout.grid.len();
        let start = ((p * 2 + c) * PARTS + part) * nn;
        &self.sums[start..start + nn]
    }

    /// Adds run-wide frame `index` (`field` for the status, `d` for the
    /// velocity as the statistics see it). Frames come in frame order.
    pub fn push(&mut self, index: u64, field: &Field, d: &Derived) {
        let counts = crate::stats::sample_mask(field, d, self.layout.include_filled);
        let sl = |a: &ndarray::Array2<f64>| a.iter().copied().collect::<Vec<f64>>();
        let (u, v, su, sv) = (sl(&d.u), sl(&d.v), sl(&d.u_unc), sl(&d.v_unc));
        self.push_values_at(index, &counts, [&u, &v], [&su, &sv]);
    }

    /// `push_values` of run-wide frame `index`, into the blocks too.
    pub fn push_values_at(
        &mut self,
        index: u64,
        counts: &[bool],
        uv: [&[f64]; 2],
        unc: [&[f64]; 2],
    ) {
        self.push_values(counts, uv, unc);
        if let Some(b) = self.blocks.as_mut() {
            b.push(index, counts, uv, unc);
        }
    }

    /// Adds one frame given node by node: which nodes count, u and v, and
    /// their propagated standard uncertainties.
    pub fn push_values(&mut self, counts: &[bool], uv: [&[f64]; 2], unc: [&[f64]; 2]) {
        self.frames += 1;
        for p in 0..self.layout.nodes.len() {
            let k = self.layout.nodes[p];
            if !counts[k] {
                continue;
            }
            for (c, un) in unc.iter().enumerate() {
                let s = un[k];
                if s.is_finite() {
                    self.unc2[p * 2 + c] += s * s;
                    self.unc_n[p * 2 + c] += 1.0;
                }
            }
            self.push_probe(p, counts, uv);
        }
    }

    /// Welford's bivariate update of probe `p` against every node.
    fn push_probe(&mut self, p: usize, counts: &[bool], uv: [&[f64]; 2]) {
        let nn = self.layout.grid.len();
        let k = self.layout.nodes[p];
        let n = &mut self.n[p * nn..(p + 1) * nn];
        for (q, nq) in n.iter_mut().enumerate() {
            if counts[q] {
                *nq += 1.0;
            }
        }
        for (c, x) in uv.into_iter().enumerate() {
            let xp = x[k];
            let base = (p * 2 + c) * PARTS * nn;
            let (mp, rest) = self.sums[base..base + PARTS * nn].split_at_mut(nn);
            let (mq, rest) = rest.split_at_mut(nn);
            let (sp, rest) = rest.split_at_mut(nn);
            let (sq, cpq) = rest.split_at_mut(nn);
            for q in 0..nn {
                if !counts[q] {
                    continue;
                }
                let cnt = self.n[p * nn + q];
                let dp = xp - mp[q];
                mp[q] += dp / cnt;
                let dq = x[q] - mq[q];
                mq[q] += dq / cnt;
                sp[q] += dp * (xp - mp[q]);
                sq[q] += dq * (x[q] - mq[q]);
                cpq[q] += dp * (x[q] - mq[q]);
            }
        }
    }

    /// Adds `b` (the frames after this accumulator's), exactly: the
    /// pairwise rule of the module doc.
    pub fn merge(&mut self, b: CorrAcc) {
        let nn = self.layout.grid.len();
        for p in 0..self.layout.nodes.len() {
            for c in 0..2 {
                for q in 0..nn {
                    let (na, nb) = (self.n[p * nn + q], b.n[p * nn + q]);
                    if nb == 0.0 {
                        continue;
                    }
                    let n = na + nb;
                    let at = |part: usize| ((p * 2 + c) * PARTS + part) * nn + q;
                    let dp = b.sums[at(0)] - self.sums[at(0)];
                    let dq = b.sums[at(1)] - self.sums[at(1)];
                    let w = na * nb / n;
                    self.sums[at(0)] += dp * nb / n;
                    self.sums[at(1)] += dq * nb / n;
                    self.sums[at(2)] += b.sums[at(2)] + dp * dp * w;
                    self.sums[at(3)] += b.sums[at(3)] + dq * dq * w;
                    self.sums[at(4)] += b.sums[at(4)] + dp * dq * w;
                }
            }
        }
        for (a, x) in self.n.iter_mut().zip(&b.n) {
            *a += x;
        }
        for (a, x) in self.unc2.iter_mut().zip(&b.unc2) {
            *a += x;
        }
        for (a, x) in self.unc_n.iter_mut().zip(&b.unc_n) {
            *a += x;
        }
        self.frames += b.frames;
        if let (Some(a), Some(x)) = (self.blocks.as_mut(), b.blocks) {
            a.merge(x);
        }
    }

    /// Checks that `b` can merge into `self` (shards of one pipeline).
    pub fn compatible(&self, b: &CorrAcc) -> Result<()> {
        let shape = |x: &CorrAcc| x.blocks.as_ref().map(|k| (k.total, k.blocks));
        if shape(self) != shape(b) {
            return Err(Error::data(format!(
                "two-point correlation accumulators have different frame blocks ({:?} vs {:?}: frames of the run, blocks)",
                shape(self),
                shape(b)
            )));
        }
        if self.layout != b.layout {
            return Err(Error::data(format!(
                "two-point correlation accumulators differ (probes {:?} on a {}x{} grid vs {:?} on {}x{})",
                self.layout.points,
                self.layout.grid.nx,
                self.layout.grid.ny,
                b.layout.points,
                b.layout.grid.nx,
                b.layout.grid.ny
            )));
        }
        Ok(())
    }
}
