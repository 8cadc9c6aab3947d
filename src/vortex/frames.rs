//! Cores in every frame (`[vortices] frames = true`): found while the
//! frames stream through the reduction, kept in frame order, merged like
//! every other part of a run's state, and tracked across frames when the
//! run is time-resolved (`run::analyse`).
//!
//! Owns: `FrameCores`, the per-frame part of a run's state (push, merge in
//! frame order), and the `Finder` a run's chunks share. Does not own the
//! identification (`find_cores`, the one entry point for every kind of
//! slice), its bytes for shards (`codec`) or the tracking (`track`).
//!
//! A frame's slice is the velocity the statistics use (smoothed when a
//! smoother runs), its vorticity on the statistics' scheme map, and the
//! propagated instantaneous uncertainties of each (`derive::Derived`).
//! The circulation's uncertainty uses the run's omega error correlation
//! (`corr::OmegaCorrelation::for_run`), the one the mean field's cores use.
//! A frame without an omega uncertainty (uncertainty off) gets NaN
//! uncertainties (unknown, never 0); with the swirl criterion it then has
//! no cores.

use std::sync::Arc;

use super::corr::OmegaCorrelation;
use super::{find_cores, Params, Slice, SliceCores, SliceKind};
use crate::derive::Derived;
use crate::field::{FrameMeta, Grid};

/// What every chunk of a run needs to find a frame's cores.
#[derive(Debug)]
pub(crate) struct Finder {
    pub params: Params,
    /// The Gamma1/Gamma2 disc, nodes.
    pub gamma_radius: usize,
    pub corr: OmegaCorrelation,
}

impl Finder {
    /// The finder of a run with vortex parameters `p` and derivative
    /// parameters `d` on `grid`, when it asks for cores in every frame.
    pub(crate) fn of(
        p: Option<&Params>,
        d: &crate::derive::Params,
        grid: Grid,
    ) -> Option<Arc<Finder>> {
        let p = p.filter(|p| p.frames)?;
        Some(Arc::new(Finder {
            params: p.clone(),
            gamma_radius: d.gamma_radius,
            corr: OmegaCorrelation::for_run(d, &grid),
        }))
    }
}

/// The cores of the frames of a run (or chunk, or shard), in frame order.
#[derive(Debug, Clone)]
pub(crate) struct FrameCores {
    /// `None` for a state read back from a shard (it takes no more frames).
    pub finder: Option<Arc<Finder>>,
    /// One entry per used frame, `SliceKind::Frame`, in frame order.
    pub slices: Vec<SliceCores>,
}

impl FrameCores {
    /// No frames yet.
    pub(crate) fn new(finder: Arc<Finder>) -> FrameCores {
        FrameCores {
            finder: Some(finder),
            slices: Vec::new(),
        }
    }

    /// Finds the cores of one used frame on `grid`.
    ///
    /// # Panics
    /// On a state read back from a shard (no finder): shards only merge.
    pub(crate) fn push(&mut self, meta: &FrameMeta, grid: Grid, d: &Derived) {
        let f = self
            .finder
            .as_ref()
            .expect("a state that takes frames has a finder");
        let flat = |a: &ndarray::Array2<f64>| a.iter().copied().collect::<Vec<f64>>();
        let omega = &d.quantities[0];
        let (u, v, w) = (flat(&d.u), flat(&d.v), flat(&omega.value));
        let w_unc = omega
            .unc
            .as_ref()
            .map_or_else(|| vec![f64::NAN; w.len()], flat);
        let (u_unc, v_unc) = (flat(&d.u_unc), flat(&d.v_unc));
        let time_s = meta.time_s.unwrap_or(f64::NAN);
        let kind = SliceKind::Frame {
            index: meta.index as u64,
        };
        let s = Slice {
            kind,
            time_s,
            grid,
            u: &u,
            v: &v,
            omega: &w,
            omega_unc: &w_unc,
            u_unc: &u_unc,
            v_unc: &v_unc,
        };
        let cores = find_cores(&s, &f.params, f.gamma_radius, &f.corr);
        self.slices.push(SliceCores {
            kind,
            time_s,
            cores,
        });
    }

    /// Appends `later`, the cores of the frames that follow.
    pub(crate) fn merge(&mut self, later: FrameCores) {
        self.slices.extend(later.slices);
    }
}
