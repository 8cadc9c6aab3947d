//! Coherent structures of a run: proper orthogonal decomposition (snapshot
//! POD) of the velocity fluctuations, and the phase of each frame read from
//! the first pair of modes.
//!
//! Owns: the one-pass mergeable sketch (`sketch`, its bytes in `codec`),
//! the finish into modes, energies and coefficients (`finish`), phase from
//! the flow (`phase`), and the tables and figures of both (`output`).
//! Does not own: reading, validating or filling frames (`reduce` hands us
//! each frame's velocity after the statistics stage sees it).
//!
//! The flow: `reduce` makes one `ModeSketch` per chunk, pushes the chunk's
//! frames in frame order and merges the chunks in frame order (shards carry
//! theirs in the partial folder); the campaign finish calls `finish` and
//! writes the outputs. Configured by `[modes]` (docs/modes.md); off unless
//! asked, since the sketch costs d × (3k + 1) numbers of memory.

pub(crate) mod codec;
pub mod finish;
pub(crate) mod output;
pub mod phase;
pub(crate) mod sketch;
#[cfg(test)]
mod tests;

pub use finish::{finish, Pod};
pub use sketch::ModeSketch;

/// Resolved `[modes]` parameters.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Params {
    /// Compute the POD (default false).
    pub enabled: bool,
    /// Modes reported (default 10).
    pub modes: usize,
    /// Extra sketch columns beyond `modes` (default 20): the sketch width is
    /// k = modes + oversampling, and the result is exact when the
    /// fluctuations span at most k dimensions.
    pub oversampling: usize,
    /// Seed of the random test matrices (default 1).
    pub seed: u64,
    /// Estimate each frame's phase from modes 1 and 2 (default false).
    pub phase: bool,
    /// Modes drawn as maps in the figures (default 4).
    pub figure_modes: usize,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            enabled: false,
            modes: 10,
            oversampling: 20,
            seed: 1,
            phase: false,
            figure_modes: 4,
        }
    }
}

impl ModeSketch {
    /// Adds one frame's velocity as the statistics see it (smoothed when
    /// smoothing is on), with its propagated standard uncertainty.
    pub(crate) fn push_frame(
        &mut self,
        meta: &crate::field::FrameMeta,
        d: &crate::derive::Derived,
    ) {
        let flat = |a: &ndarray::Array2<f64>| -> Vec<f64> { a.iter().copied().collect() };
        let (u, v, su, sv) = (flat(&d.u), flat(&d.v), flat(&d.u_unc), flat(&d.v_unc));
        self.push(meta.index as u64, meta.time_s, [&u, &v], [&su, &sv]);
    }
}

/// A run's finished POD, its phase estimate (with `phase = true`) and
/// warnings.
pub(crate) type RunPod = (Pod, Option<phase::PhaseEstimate>, Vec<String>);
