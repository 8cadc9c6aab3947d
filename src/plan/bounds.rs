//! Bounds on pipeline values that no flow needs and that would make a run
//! allocate without limit or never finish: checked before anything is
//! built (`check_raw`), and against the grid once it is known
//! (`check_grid`).
//!
//! Owns: those bounds and their messages (each names the key, the value,
//! the bound and, for grid bounds, the grid). Does not own: the ordinary
//! range checks of each key (the section files).
//!
//! The absolute caps are far outside practice (common practice: smoothing
//! widths of a few pitches; vorticity of a lab flow below 1e6 1/s), so no
//! real pipeline meets them; they exist so that a typo like `sigma = 1e4`
//! is an error and not a 100 GB allocation.

use crate::error::{Error, Result};
use crate::field::Grid;

use super::{RawPipeline, RunPlan};

/// Largest Gaussian smoothing sigma, in pitches (stencil radius 4 sigma).
pub(crate) const MAX_SIGMA: f64 = 64.0;
/// Largest fixed PLS smoothing parameter (its kernel reach is capped at
/// 256 nodes from about s = 1e7 anyway).
pub(crate) const MAX_PLS_S: f64 = 1e8;
/// Largest colour-scale limit for vorticity, 1/s.
pub(crate) const MAX_VORTICITY_LIMIT: f64 = 1e12;

/// Checks the values whose resolution itself would cost without bound.
pub(crate) fn check_raw(raw: &RawPipeline) -> Result<()> {
    let cap = |key: &str, v: Option<f64>, max: f64, unit: &str| -> Result<()> {
        match v {
            Some(x) if x.is_finite() && x.abs() > max => Err(Error::usage(format!(
                "{key} = {x} is larger than curlew allows ({max}{unit}); no flow needs this, \
                 is it a typo?"
            ))),
            _ => Ok(()),
        }
    };
    cap(
        "[smoothing] sigma",
        raw.smoothing.sigma,
        MAX_SIGMA,
        " pitches",
    )?;
    cap("[smoothing] s", raw.smoothing.s, MAX_PLS_S, "")?;
    cap(
        "[figures] vorticity_limit",
        raw.figures.vorticity_limit,
        MAX_VORTICITY_LIMIT,
        " 1/s",
    )
}

/// Checks the run's stencils against its grid: a stencil that reaches
/// farther than the grid's longer side averages over nodes that do not
/// exist (and costs time for nothing).
pub fn check_grid(run: &RunPlan, grid: &Grid) -> Result<()> {
    let side = grid.nx.max(grid.ny);
    let shape = format!("the grid has {} x {} nodes", grid.nx, grid.ny);
    let at_most = |key: String, reach: usize, limit: usize| -> Result<()> {
        if reach > limit {
            return Err(Error::usage(format!(
                "{key} reaches {reach} nodes from the centre, but {shape}; \
                 at most {limit} fits this grid"
            )));
        }
        Ok(())
    };
    if let Some(st) = run.derive.smoother.equivalent_stencil() {
        let (rj, ri) = st.reach();
        let key = match run.derive.smoother {
            crate::stencil::smooth::Smoother::Pls { s: Some(s), .. } => {
                format!("[smoothing] s = {s}")
            }
            _ => "[smoothing] sigma or half_width (the smoothing stencil)".to_string(),
        };
        at_most(key, rj.max(ri), side - 1)?;
    }
    at_most(
        format!("[derivatives] window = {}", run.derive.ls_window),
        run.derive.ls_window / 2,
        side - 1,
    )?;
    at_most(
        format!("[derivatives] gamma_radius = {}", run.derive.gamma_radius),
        run.derive.gamma_radius,
        side - 1,
    )
}
