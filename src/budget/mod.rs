//! The vorticity transport budget, term by term, with uncertainty.
//!
//! Owns: the budget's parameters (`Params`), its per-frame fields (`ops`),
//! its accumulator (`acc`, merged in frame order across chunks and shards
//! like the statistics), its serialised partial state (`codec`), the terms
//! per slice and node (`terms`), the variance of their area integrals
//! (`integral`; the circulation budget of vortex cores is
//! `vortex::budget`), its plain-words reading (`reading`), and the
//! frequency of the phase bins (`freq`). Does not own: the statistics
//! (`stats`), the run plan, files or figures (its place in a run, its
//! table and `check` lines are `reduce::budget`'s).
//!
//! For the out-of-plane vorticity w of a planar, incompressible,
//! constant-density flow (docs/budget.md):
//! `dW/dt + U.grad W = W dw/dz + nu lap W - div <u'' w''> + (unseen)`,
//! with `dw/dz = -(du/dx + dv/dy)` from continuity. A phase-resolved run
//! gives the budget of each phase bin (triple decomposition, Reynolds &
//! Hussain 1972); a time-resolved run gives the instantaneous budget of
//! the frames asked for. Everything is accumulated in the one streaming
//! pass of `reduce`: no frame is held, except the few frames asked for.

pub(crate) mod acc;
pub(crate) mod codec;
pub(crate) mod freq;
pub(crate) mod integral;
pub(crate) mod ops;
pub(crate) mod reading;
pub(crate) mod terms;
#[cfg(test)]
mod tests;

pub(crate) use acc::BudgetAcc;
pub(crate) use terms::{Budget, SliceKind, TERMS};

use crate::stencil::derivatives::DiffScheme;

/// Resolved `[budget]` parameters.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Params {
    /// First-derivative scheme of every term (default central).
    pub scheme: String,
    /// Run-wide indices of the frames whose instantaneous budget is made
    /// (time-resolved runs); each needs its two neighbours.
    pub frames: Vec<u64>,
    /// Coverage factor of the residual's significance test (default 2).
    pub k: f64,
    /// Phase bin of the term figure (`None`: the slice with the largest
    /// |unsteady|).
    pub figure_bin: Option<usize>,
    /// Count replaced and filled vectors as samples of the budget's
    /// stencils (`None`: as `[statistics] include_filled`).
    #[serde(default)]
    pub include_filled: Option<bool>,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            scheme: "central".into(),
            frames: Vec::new(),
            k: 2.0,
            figure_bin: None,
            include_filled: None,
        }
    }
}

impl Params {
    /// Does the accumulator keep frame `index` (asked, or a neighbour of
    /// one asked)?
    pub(crate) fn keeps(&self, index: u64) -> bool {
        self.frames
            .iter()
            .any(|&f| f == index || f + 1 == index || index + 1 == f)
    }

    /// The first-derivative scheme.
    pub(crate) fn diff_scheme(&self) -> DiffScheme {
        match self.scheme.as_str() {
            "richardson" => DiffScheme::Richardson,
            "least-squares" => DiffScheme::LeastSquares {
                window: 5,
                order: 1,
            },
            _ => DiffScheme::Central,
        }
    }
}
