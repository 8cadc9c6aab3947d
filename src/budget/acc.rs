//! The budget's accumulator: per phase bin and node, the mean and the
//! co-moment matrix of the eight per-frame fields (`ops`), and, for
//! time-resolved runs, the fields of the few frames whose budget is asked.
//!
//! Owns: `BudgetAcc` with `new` / `push` / `merge` (in frame order) and the
//! serialised form (`codec`). Does not own: the terms (`terms`).
//!
//! Method: Welford's update per sample and Chan, Golub & LeVeque's pairwise
//! merge (1979, Stanford CS report STAN-CS-79-773; common practice) for the
//! vector of fields: with `d = x - mean`, `mean += d / n`, `C_ab += d_a (x_b
//! - mean_b)`; merging A then B, `C = C_A + C_B + d_a d_b n_A n_B / n` with
//! `d = mean_B - mean_A`. The merge is exact up to round-off and, for the
//! fixed chunking of `reduce`, bit-identical whatever the thread count.
//!
//! What counts as a sample: a node's fields count in a frame when the
//! frame is not rejected, every tap of the composites carries a sample (the
//! statistics' sample rule: a valid vector, or replaced/filled ones with
//! `include_filled`, which `[budget] include_filled` may override), so all
//! eight fields are finite. A composite reaches two nodes or more, so a
//! gap anywhere in it drops the node from that frame: with 5 % gaps, about
//! two thirds of the node-frames (the demo without filled vectors). Frames without a
//! phase, or outside every phase window, add nothing to the bins.
//! Memory: 45 numbers per node for each phase bin reached (a 100 x 100 grid
//! with 12 bins: 43 MB), plus 10 numbers per node for each kept frame.

use super::ops::{Ops, NF, NT};
use crate::derive::Derived;
use crate::field::{Field, FrameMeta, Grid, FILLED, REPLACED, VALID};
use crate::stats;
use crate::stencil::Stencil;

/// Sums of one phase bin, node-major (`mean[k * NF + f]`, `cm[k * NT + t]`).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct BinSums {
    pub n: Vec<f64>,
    pub mean: Vec<f64>,
    pub cm: Vec<f64>,
}

impl BinSums {
    pub(crate) fn new(nodes: usize) -> Self {
        BinSums {
            n: vec![0.0; nodes],
            mean: vec![0.0; nodes * NF],
            cm: vec![0.0; nodes * NT],
        }
    }

    /// Adds one frame's fields (field-major, as `Ops::eval` gives them).
    #[allow(clippy::needless_range_loop)] // the packed triangle runs over (a, b)
    pub(crate) fn add(&mut self, fields: &[f64]) {
        let nodes = self.n.len();
        let mut x = [0.0; NF];
        let mut d = [0.0; NF];
        for k in 0..nodes {
            for (f, xf) in x.iter_mut().enumerate() {
                *xf = fields[f * nodes + k];
            }
            if x.iter().any(|v| !v.is_finite()) {
                continue;
            }
            self.n[k] += 1.0;
            let n = self.n[k];
            let m = &mut self.mean[k * NF..(k + 1) * NF];
            for f in 0..NF {
                d[f] = x[f] - m[f];
                m[f] += d[f] / n;
            }
            let c = &mut self.cm[k * NT..(k + 1) * NT];
            let mut t = 0;
            for a in 0..NF {
                for b in a..NF {
                    c[t] += d[a] * (x[b] - m[b]);
                    t += 1;
                }
            }
        }
    }

    /// Merges the sums of later frames.
    #[allow(clippy::needless_range_loop)]
    pub(crate) fn merge(&mut self, o: &BinSums) {
        for k in 0..self.n.len() {
            let (na, nb) = (self.n[k], o.n[k]);
            if nb == 0.0 {
                continue;
            }
            let n = na + nb;
            let mut d = [0.0; NF];
            for (f, df) in d.iter_mut().enumerate() {
                *df = o.mean[k * NF + f] - self.mean[k * NF + f];
                self.mean[k * NF + f] += *df * nb / n;
            }
            let w = na * nb / n;
            let mut t = 0;
            for a in 0..NF {
                for b in a..NF {
                    self.cm[k * NT + t] += o.cm[k * NT + t] + d[a] * d[b] * w;
                    t += 1;
                }
            }
            self.n[k] = n;
        }
    }
}

/// One kept frame of a time-resolved run: its fields and the noise
/// variances of u and v per node.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Slice {
    pub index: u64,
    pub time_s: f64,
    /// Field-major, as `Ops::eval` gives them.
    pub fields: Vec<f64>,
    pub var_u: Vec<f64>,
    pub var_v: Vec<f64>,
}

/// Where a frame lies in the run.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Frame {
    /// Run-wide frame index.
    pub index: u64,
    pub time_s: f64,
    pub phase_deg: Option<f64>,
}

/// The budget's accumulator for one run (or chunk, or shard).
#[derive(Debug, Clone)]
pub(crate) struct BudgetAcc {
    pub grid: Grid,
    pub params: super::Params,
    /// The phase binning and sample rule (the statistics' own).
    pub stats: stats::Params,
    /// The smoother's equivalent stencil, when one runs before the
    /// derivatives (its noise correlation enters the Gram matrices).
    pub smoother: Option<Stencil>,
    pub ops: Ops,
    pub bins: Vec<Option<BinSums>>,
    /// Kept frames, in frame order.
    pub slices: Vec<Slice>,
    /// Frames pushed.
    pub frames: u64,
}

impl BudgetAcc {
    pub(crate) fn new(
        p: &super::Params,
        sp: &stats::Params,
        grid: Grid,
        smoother: Option<Stencil>,
    ) -> Self {
        BudgetAcc {
            grid,
            params: p.clone(),
            stats: sp.clone(),
            ops: Ops::new(p.diff_scheme(), grid.dx, grid.dy, smoother.as_ref()),
            smoother,
            bins: vec![None; sp.phase_bins],
            slices: Vec::new(),
            frames: 0,
        }
    }

    /// Adds one (not rejected) frame: its samples (the statistics' rule)
    /// are the velocities the statistics use (`derived.u`, `derived.v`).
    pub(crate) fn push(&mut self, meta: &FrameMeta, field: &Field, d: &Derived) {
        let filled = self
            .params
            .include_filled
            .unwrap_or(self.stats.include_filled);
        let take = |s: &u8, x: &f64| {
            let ok = *s == VALID || (filled && (*s == REPLACED || *s == FILLED));
            if ok {
                *x
            } else {
                f64::NAN
            }
        };
        let u = ndarray::Zip::from(&field.status)
            .and(&d.u)
            .map_collect(&take);
        let v = ndarray::Zip::from(&field.status)
            .and(&d.v)
            .map_collect(take);
        // derive reports the uncertainty of the smoothed velocity; the Gram
        // matrices compose the smoother, so they need the raw one
        let gain = self.smoother.as_ref().map_or(1.0, |s| s.noise_factor());
        let sq = |a: &ndarray::Array2<f64>| a.mapv(|s| (s / gain).powi(2));
        let frame = Frame {
            index: meta.index as u64,
            time_s: meta.time_s.unwrap_or(f64::NAN),
            phase_deg: meta.phase_deg,
        };
        self.push_fields(&frame, &u, &v, &sq(&d.u_unc), &sq(&d.v_unc));
    }

    /// Adds one frame given its velocities (NaN where no sample) and their
    /// noise variances.
    pub(crate) fn push_fields(
        &mut self,
        frame: &Frame,
        u: &ndarray::Array2<f64>,
        v: &ndarray::Array2<f64>,
        var_u: &ndarray::Array2<f64>,
        var_v: &ndarray::Array2<f64>,
    ) {
        self.frames += 1;
        let keep = self.params.keeps(frame.index);
        let bin = stats::phase_bin(&self.stats, frame.phase_deg);
        if bin.is_none() && !keep {
            return;
        }
        let fields = self.ops.eval(u, v);
        if let Some(b) = bin {
            let nodes = self.grid.len();
            self.bins[b]
                .get_or_insert_with(|| BinSums::new(nodes))
                .add(&fields);
        }
        if keep {
            self.slices.push(Slice {
                index: frame.index,
                time_s: frame.time_s,
                fields,
                var_u: var_u.iter().copied().collect(),
                var_v: var_v.iter().copied().collect(),
            });
        }
    }

    /// Merges the accumulator of the frames that follow.
    pub(crate) fn merge(&mut self, later: BudgetAcc) {
        for (a, b) in self.bins.iter_mut().zip(later.bins) {
            match (a.as_mut(), b) {
                (Some(a), Some(b)) => a.merge(&b),
                (None, Some(b)) => *a = Some(b),
                (_, None) => {}
            }
        }
        self.slices.extend(later.slices);
        self.slices.sort_by_key(|s| s.index);
        self.frames += later.frames;
    }
}
