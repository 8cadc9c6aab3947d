//! Vector validation: input flags, global velocity limits, the per-node
//! ensemble test, the normalized median test, and rejection of whole frames.
//!
//! Owns: deciding which vectors are spurious, and the peak-locking
//! diagnostic (`peaklock`). A rejected vector gets status `REPLACED` (1) and
//! NaN values; it is filled later by `fill`. Does not own: filling, or
//! reading flags (io marks invalid input as `FILLED` (2) with NaN).
//!
//! # The chain, in the order it runs
//!
//! 1. **Input** (`Counts::invalid_input`): nodes io marked invalid (status
//!    2), and any node marked valid whose u or v is not finite (it is set to
//!    status 2 here). Masked nodes (3) are outside the domain and not counted.
//! 2. **Limits** (`Counts::limits`): a box or an ellipse in the u-v plane,
//!    given or derived from the run's own robust statistics (`limits`).
//! 3. **Ensemble** (`Counts::ensemble`): a vector further than k robust
//!    standard deviations from its node's ensemble median (`ensemble`).
//! 4. **Median** (`Counts::median`): the normalized median test of
//!    Westerweel & Scarano 2005 (`median`).
//!
//! The pointwise tests (2, 3) run before the spatial one so that the median
//! test's neighbourhoods are already free of the vectors they caught. Each
//! vector is counted once, by the first test that rejects it. Within the
//! median test every node is judged against the same field (the state after
//! tests 1-3); its own rejections do not feed back into its neighbours'
//! medians, so the result does not depend on the order nodes are visited.
//!
//! A whole frame is rejected (`frame_rejected`) when the fraction of its
//! nodes that are invalid input or outliers exceeds `max_rejected_fraction`.

mod describe;
pub(crate) mod ensemble;
pub(crate) mod limits;
pub(crate) mod median;
pub(crate) mod peaklock;

#[cfg(test)]
mod bench;

use crate::field::{Field, FILLED, REPLACED, VALID};

pub(crate) use ensemble::{EnsembleBuilder, EnsembleRef};
pub(crate) use limits::{Bounds, Limits, Shape};
pub use median::{Combine, MedianParams};

/// The resolved validation chain, in SI (velocities in m/s).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    /// Global limits in the u-v plane; `None` (the default) switches them off.
    pub limits: Option<Limits>,
    /// Normalized median test; `None` switches it off. On by default.
    pub median: Option<MedianParams>,
    /// Per-node ensemble test; `None` (the default) switches it off.
    pub ensemble: Option<EnsembleParams>,
    /// Reject a whole frame when (invalid input + outliers) / nodes exceeds
    /// this fraction; `None` (the default) never rejects a frame.
    pub max_rejected_fraction: Option<f64>,
    /// Width of the ensemble-pass histogram bins near zero velocity (m/s);
    /// see `ensemble` for the resolution at larger velocities.
    pub histogram_resolution: f64,
}

/// The per-node ensemble test, resolved.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct EnsembleParams {
    /// Reject when |u - median| > k * sigma_robust (either component).
    pub k: f64,
    /// Lower bound on the robust standard deviation (m/s), the noise floor:
    /// without it a node whose vectors are nearly identical would reject
    /// ordinary noise.
    pub floor: f64,
    /// Nodes with fewer valid samples in the run are not tested.
    pub min_samples: usize,
}

impl Default for EnsembleParams {
    fn default() -> Self {
        EnsembleParams {
            k: 5.0,
            floor: 0.1,
            min_samples: 10,
        }
    }
}

impl Default for Params {
    /// The default chain for input in m/s without a calibration: input
    /// flags and the median test (eps 0.1 unit, threshold 2, radius 1,
    /// either component). The plan resolves eps from px when it can.
    fn default() -> Self {
        Params {
            limits: None,
            median: Some(MedianParams::default()),
            ensemble: None,
            max_rejected_fraction: None,
            histogram_resolution: 0.02,
        }
    }
}

impl Params {
    /// True when a first pass over the run's frames (`EnsembleBuilder`) is
    /// needed: the ensemble test, or limits from the run's statistics.
    pub(crate) fn needs_ensemble_pass(&self) -> bool {
        self.ensemble.is_some()
            || matches!(
                self.limits,
                Some(Limits {
                    bounds: Bounds::Robust { .. },
                    ..
                })
            )
    }
}

/// What each test rejected in one frame (each vector counted once, by the
/// first test that rejected it, in the order of the chain).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Counts {
    /// Missing, empty, NaN or flagged in the input.
    pub invalid_input: usize,
    /// Outside the global limits.
    pub limits: usize,
    /// Rejected by the normalized median test.
    pub median: usize,
    /// Rejected by the per-node ensemble test.
    pub ensemble: usize,
}

impl Counts {
    /// Vectors rejected by the tests (not counting invalid input).
    pub fn outliers(&self) -> usize {
        self.limits + self.median + self.ensemble
    }
}

/// Whether the whole frame is rejected: (outliers + invalid input) /
/// `n_nodes` above `p.max_rejected_fraction` (never when it is `None` or
/// the grid is empty).
pub(crate) fn frame_rejected(p: &Params, c: &Counts, n_nodes: usize) -> bool {
    match p.max_rejected_fraction {
        Some(f) if n_nodes > 0 => (c.outliers() + c.invalid_input) as f64 / n_nodes as f64 > f,
        _ => false,
    }
}

/// Runs the chain on one frame, in the order of the module docs. The
/// ensemble test and limits from run statistics run only when `ens` is
/// `Some` (the run driver provides it when `p.needs_ensemble_pass()`).
pub fn validate_frame(p: &Params, field: &mut Field, ens: Option<&EnsembleRef>) -> Counts {
    let mut c = Counts::default();
    crate::field::ensure_standard_layout(field);
    // 1. input
    for ((s, u), v) in field
        .status
        .iter_mut()
        .zip(field.u.iter_mut())
        .zip(field.v.iter_mut())
    {
        if *s == VALID && !(u.is_finite() && v.is_finite()) {
            *s = FILLED;
            *u = f64::NAN;
            *v = f64::NAN;
        }
        if *s == FILLED {
            c.invalid_input += 1;
        }
    }
    // 2. limits
    if let Some(l) = &p.limits {
        if let Some(test) = l.resolve(ens) {
            c.limits = reject_pointwise(field, |_, u, v| !test.inside(u, v));
        }
    }
    // 3. ensemble
    if let (Some(ep), Some(e)) = (&p.ensemble, ens) {
        c.ensemble = reject_pointwise(field, |k, u, v| e.is_outlier(ep, k, u, v));
    }
    // 4. median
    if let Some(m) = &p.median {
        c.median = median::apply(m, field);
    }
    c
}

/// Rejects every valid vector for which `bad(node, u, v)` holds; returns
/// how many.
fn reject_pointwise(field: &mut Field, bad: impl Fn(usize, f64, f64) -> bool) -> usize {
    let mut n = 0;
    for (k, ((s, u), v)) in field
        .status
        .iter_mut()
        .zip(field.u.iter_mut())
        .zip(field.v.iter_mut())
        .enumerate()
    {
        if *s == VALID && bad(k, *u, *v) {
            *s = REPLACED;
            *u = f64::NAN;
            *v = f64::NAN;
            n += 1;
        }
    }
    n
}

#[cfg(test)]
mod tests;
