//! Statistics over the frames of a run: the one mergeable accumulator, the
//! ensemble and phase-bin tables, effective sample size, GUM combination.
//!
//! Owns: everything that sums over frames. Does not own: per-frame values
//! (`derive`), writing files (`io`).
//!
//! STUB (skeleton): signatures agreed between the stages; the statistics
//! owner replaces the `todo!()` bodies.

use crate::derive::Derived;
use crate::field::{Field, FrameMeta, Grid, NodeTable};
use crate::io::Table;

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    /// Phase bins (CONTRACT `[phase] bins`), used when frames have phases.
    pub phase_bins: usize,
}

impl Default for Params {
    fn default() -> Self {
        Params { phase_bins: 12 }
    }
}

/// The accumulators of one run (ensemble, phase bins, probes). One per
/// chunk of frames; chunks merge in frame order.
#[derive(Debug, Clone)]
pub struct RunAccumulator {
    pub grid: Grid,
}

impl RunAccumulator {
    pub fn new(p: &Params, grid: Grid, quantities: &[&'static str]) -> Self {
        let _ = (p, quantities);
        RunAccumulator { grid }
    }
    /// Adds one frame. `field` gives the status per node (valid vectors are
    /// the samples; replaced and filled ones are not), `derived` the values.
    pub fn push(&mut self, meta: &FrameMeta, field: &Field, derived: &Derived) {
        let _ = (meta, field, derived);
        todo!("stats: push")
    }
    /// Merges the accumulator of the frames that follow `self`'s.
    pub fn merge(&mut self, later: RunAccumulator) {
        let _ = later;
        todo!("stats: merge")
    }
    pub fn finish(&self, p: &Params) -> RunStats {
        let _ = p;
        todo!("stats: finish")
    }
}

/// One phase bin's table.
#[derive(Debug, Clone)]
pub struct PhaseBin {
    pub bin: usize,
    /// Bin centre in degrees.
    pub centre_deg: f64,
    pub n_frames: usize,
    pub table: NodeTable,
}

/// The finished statistics of a run.
#[derive(Debug, Clone)]
pub struct RunStats {
    /// Every CONTRACT `ensemble` column (after x, y), then our own.
    pub ensemble: NodeTable,
    /// Empty when the run has no phases.
    pub phase: Vec<PhaseBin>,
    /// Running statistics at probe points, when probes are named.
    pub convergence: Option<Table>,
    /// Effective number of independent samples (time-resolved runs).
    pub n_eff: Option<f64>,
    /// Scalar results for campaign.csv, name and value in SI.
    pub summary: Vec<(String, f64)>,
    pub warnings: Vec<String>,
}

impl RunAccumulator {
    /// STUB: versioned serialisation of the partial state.
    pub fn to_bytes(&self) -> Vec<u8> {
        todo!("stats: to_bytes")
    }
    pub fn from_bytes(b: &[u8]) -> crate::error::Result<Self> {
        let _ = b;
        todo!("stats: from_bytes")
    }
}
