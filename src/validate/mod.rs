//! Vector validation: input flags, global velocity limits, the normalized
//! median test, the per-node ensemble test, and rejection of whole frames.
//!
//! Owns: deciding which vectors are spurious. A rejected vector gets status
//! `REPLACED` (1) and NaN values; it is filled later by `fill`. Does not own:
//! filling, or reading flags (io marks invalid input as `FILLED` (2) with NaN).
//!
//! STUB (skeleton): signatures agreed between the stages; the validation
//! owner replaces the `todo!()` bodies.

use crate::field::{Field, Grid};

/// The resolved validation chain, in SI (velocities in m/s).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    /// Normalized median test: eps in m/s (resolved from px by the plan),
    /// threshold; `None` switches it off.
    pub median: Option<MedianParams>,
}

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MedianParams {
    pub eps: f64,
    pub threshold: f64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            median: Some(MedianParams {
                eps: 0.0,
                threshold: 2.0,
            }),
        }
    }
}

/// What each test rejected in one frame (each vector counted once, by the
/// first test that rejected it).
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Counts {
    /// Missing, empty, NaN or flagged in the input.
    pub invalid_input: usize,
    pub median: usize,
}

impl Counts {
    /// Vectors rejected by the tests (not counting invalid input).
    pub fn outliers(&self) -> usize {
        self.median
    }
}

/// Per-node robust statistics from a first pass, for the ensemble test.
#[derive(Debug, Clone)]
pub struct EnsembleRef {
    pub grid: Grid,
}

/// Runs the chain on one frame, in its documented order.
pub fn validate_frame(p: &Params, field: &mut Field, ens: Option<&EnsembleRef>) -> Counts {
    let _ = (p, field, ens);
    todo!("validate: validate_frame")
}

impl Params {
    pub fn needs_ensemble_pass(&self) -> bool {
        false
    }
}

/// STUB: pass-1 builder of the ensemble test.
pub struct EnsembleBuilder {
    grid: Grid,
}

impl EnsembleBuilder {
    pub fn new(p: &Params, grid: Grid) -> Self {
        let _ = p;
        EnsembleBuilder { grid }
    }
    pub fn push(&mut self, field: &Field) {
        let _ = field;
    }
    pub fn merge(&mut self, later: EnsembleBuilder) {
        let _ = later;
    }
    pub fn finish(self) -> EnsembleRef {
        EnsembleRef { grid: self.grid }
    }
}

pub fn frame_rejected(p: &Params, c: &Counts, n_nodes: usize) -> bool {
    let _ = (p, c, n_nodes);
    false
}
