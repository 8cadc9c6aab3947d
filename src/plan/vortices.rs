//! `[vortices]`: raw keys and their resolution into `vortex::Params`.
//!
//! The vortex analysis is off unless the section is present (and not
//! `enabled = false`). It needs phase bins for tracks, and `[run.conditions]
//! frequency` for their speeds; `curlew check` says what is missing. Errors
//! name the key, the value and what was expected.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::vortex::{self, Connectivity, Criterion};

/// `[vortices]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawVortices {
    /// Find, measure and track vortex cores (default true when the section
    /// is present). Costs a Gamma2 pass per phase bin after the statistics:
    /// small against the reduction.
    pub enabled: Option<bool>,
    /// Threshold on |Gamma2| (default 2/pi, Graftieaux et al. 2001).
    pub threshold: Option<f64>,
    /// Smallest core kept, in grid nodes (default 4).
    pub min_nodes: Option<usize>,
    /// 4 (default) or 8: which neighbours join a core's region.
    pub connectivity: Option<u8>,
    /// Tracking gate in grid pitches (default 3): how far a core may lie
    /// from its track's predicted position.
    pub gate: Option<f64>,
    /// Fit a Lamb-Oseen vortex to each core (default true).
    pub fit: Option<bool>,
    /// Which nodes are core: "gamma2" (default), "swirl" (a swirling
    /// strength significant at `[statistics] coverage`) or "both".
    pub criterion: Option<String>,
    /// Also find cores in every used frame (default false), tracked across
    /// frames when the run is time-resolved.
    pub frames: Option<bool>,
}

/// The resolved vortex analysis, or `None` when it is off; `coverage` is
/// the run's `[statistics] coverage` (the swirl test's probability).
pub(crate) fn resolve_vortices(
    raw: Option<&RawVortices>,
    coverage: f64,
) -> Result<Option<vortex::Params>> {
    let Some(r) = raw else { return Ok(None) };
    if r.enabled == Some(false) {
        return Ok(None);
    }
    let d = vortex::Params::default();
    let threshold = r.threshold.unwrap_or(d.threshold);
    if !(threshold > 0.0 && threshold < 1.0) {
        return Err(Error::usage(format!(
            "[vortices] threshold = {threshold} must lie between 0 and 1 (|Gamma2| is at most 1; 2/pi = 0.6366 is the usual choice)"
        )));
    }
    let connectivity = match r.connectivity.unwrap_or(4) {
        4 => Connectivity::Four,
        8 => Connectivity::Eight,
        c => {
            return Err(Error::usage(format!(
                "[vortices] connectivity = {c} must be 4 or 8"
            )))
        }
    };
    let gate = r.gate.unwrap_or(d.gate);
    if !(gate.is_finite() && gate > 0.0) {
        return Err(Error::usage(format!(
            "[vortices] gate = {gate} must be a positive number of grid pitches"
        )));
    }
    let min_nodes = r.min_nodes.unwrap_or(d.min_nodes);
    if min_nodes == 0 {
        return Err(Error::usage("[vortices] min_nodes = 0 must be at least 1"));
    }
    let criterion = match r.criterion.as_deref() {
        None | Some("gamma2") => Criterion::Gamma2,
        Some("swirl") => Criterion::Swirl,
        Some("both") => Criterion::Both,
        Some(c) => {
            return Err(Error::usage(format!(
                "[vortices] criterion = \"{c}\" must be \"gamma2\", \"swirl\" or \"both\""
            )))
        }
    };
    // two-sided: the interval lambda ± k u at `coverage` excludes zero
    let swirl_k = crate::stats::gum::coverage_factor(coverage, f64::INFINITY);
    Ok(Some(vortex::Params {
        threshold,
        min_nodes,
        connectivity,
        gate,
        fit: r.fit.unwrap_or(d.fit),
        criterion,
        swirl_k,
        frames: r.frames.unwrap_or(d.frames),
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn absent_or_disabled_is_off_and_bad_values_name_the_key() {
        assert_eq!(resolve_vortices(None, 0.95).unwrap(), None);
        let off = RawVortices {
            enabled: Some(false),
            ..RawVortices::default()
        };
        assert_eq!(resolve_vortices(Some(&off), 0.95).unwrap(), None);
        let on = resolve_vortices(Some(&RawVortices::default()), 0.95)
            .unwrap()
            .unwrap();
        assert_eq!(on, vortex::Params::default());
        let bad = |r: RawVortices, want: &str| {
            let e = resolve_vortices(Some(&r), 0.95).unwrap_err();
            assert!(e.message.contains(want), "{e}");
        };
        bad(
            RawVortices {
                connectivity: Some(6),
                ..RawVortices::default()
            },
            "connectivity = 6",
        );
        bad(
            RawVortices {
                threshold: Some(1.5),
                ..RawVortices::default()
            },
            "threshold = 1.5",
        );
        bad(
            RawVortices {
                gate: Some(-1.0),
                ..RawVortices::default()
            },
            "gate = -1",
        );
    }
}
