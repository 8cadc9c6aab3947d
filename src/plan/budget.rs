//! `[budget]`: raw keys and their resolution into `budget::Params`.
//!
//! The budget is off unless the section is present (and not `enabled =
//! false`). Viscosity and frequency come from `[run.conditions]`
//! (`viscosity` in m²/s, `frequency` in Hz); `curlew check` says what is
//! missing. Errors name the key, the value and what was expected.

use serde::{Deserialize, Serialize};

use crate::budget;
use crate::error::{Error, Result};

/// `[budget]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawBudget {
    /// Compute the vorticity transport budget (default true when the
    /// section is present). Costs 45 numbers per node and phase bin of
    /// memory and a few stencil passes per frame.
    pub enabled: Option<bool>,
    /// First-derivative scheme of every term: "central" (default),
    /// "richardson" or "least-squares" (window 5, order 1). The viscous term
    /// composes the five-point Laplacian after the vorticity stencil.
    pub scheme: Option<String>,
    /// Time-resolved runs: the frame numbers (0-based, in the run's natural
    /// order) whose instantaneous budget is written; each needs its two
    /// neighbours. Holds 10 numbers per node for each frame and neighbour.
    pub frames: Option<Vec<u64>>,
    /// Coverage factor of the residual's significance test (default 2).
    pub k: Option<f64>,
    /// Phase bin drawn in the term figure (default: the slice with the
    /// largest |unsteady|).
    pub figure_bin: Option<usize>,
    /// Count replaced and filled vectors in the budget's stencils (default:
    /// as `[statistics] include_filled`). A composite stencil reaches two
    /// nodes; without filled vectors one gap in its 5 x 5 reach drops the
    /// node from the frame (with 5 % gaps, about two thirds of the samples).
    pub include_filled: Option<bool>,
}

/// The resolved budget, or `None` when it is off.
pub(crate) fn resolve_budget(raw: Option<&RawBudget>) -> Result<Option<budget::Params>> {
    let Some(r) = raw else { return Ok(None) };
    if r.enabled == Some(false) {
        return Ok(None);
    }
    let d = budget::Params::default();
    let scheme = r.scheme.clone().unwrap_or(d.scheme);
    if !["central", "richardson", "least-squares"].contains(&scheme.as_str()) {
        return Err(Error::usage(format!(
            "[budget] scheme = '{scheme}' must be \"central\", \"richardson\" or \"least-squares\""
        )));
    }
    let k = r.k.unwrap_or(d.k);
    if !(k.is_finite() && k > 0.0) {
        return Err(Error::usage(format!(
            "[budget] k = {k} must be a positive number (a coverage factor, e.g. 2)"
        )));
    }
    let mut frames = r.frames.clone().unwrap_or_default();
    frames.sort_unstable();
    frames.dedup();
    Ok(Some(budget::Params {
        scheme,
        frames,
        k,
        figure_bin: r.figure_bin,
        include_filled: r.include_filled,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn absent_or_disabled_is_off_and_bad_values_name_the_key() {
        assert_eq!(resolve_budget(None).unwrap(), None);
        let off = RawBudget {
            enabled: Some(false),
            ..RawBudget::default()
        };
        assert_eq!(resolve_budget(Some(&off)).unwrap(), None);
        let on = resolve_budget(Some(&RawBudget::default()))
            .unwrap()
            .unwrap();
        assert_eq!(on, budget::Params::default());
        let bad = RawBudget {
            scheme: Some("spectral".into()),
            ..RawBudget::default()
        };
        let e = resolve_budget(Some(&bad)).unwrap_err();
        assert!(e.message.contains("[budget] scheme = 'spectral'"), "{e}");
        let bad = RawBudget {
            k: Some(-1.0),
            ..RawBudget::default()
        };
        assert!(resolve_budget(Some(&bad))
            .unwrap_err()
            .message
            .contains("k = -1"));
    }
}
