//! Figures (PNG and SVG) of a run and of comparisons, drawn with plotters
//! and an embedded font (DejaVu Sans) so text renders without system fonts.
//!
//! Owns: which figures a run gets, their units and limits (`figs`; the
//! vorticity budget's in `budget`, the vortex tracks' in `vortices`), the
//! colour maps (`colormap`) and the drawing layer (`draw`). Does not own:
//! the numbers (stats), nor the comparison arithmetic (`compare`).
//!
//! Rules every figure follows: equal aspect ratio for maps; axis labels and
//! colour bars with units (x in mm, or x/L when nondimensional); the
//! diverging map `TIDE` with symmetric limits for signed quantities and the
//! sequential map `EMBER` for magnitudes; about 1000 px wide with text of
//! 18 px and more. A figure whose columns are missing is skipped, never an
//! error.

pub(crate) mod budget;
pub(crate) mod colormap;
pub(crate) mod draw;
mod figs;
pub(crate) mod lines;
pub(crate) mod structures;
pub(crate) mod vortices;

use std::path::Path;

use crate::error::Result;
use crate::result::{FigureRef, RunResult};

pub(crate) use figs::Units;

/// Resolved `[figures]`.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    /// x/L, y/L axes and u/U, ωL/U values (when the run has U and L).
    pub nondimensional: bool,
    /// Vector overlay: every n-th node (None: about 24 arrows across).
    pub vector_every: Option<usize>,
    /// PNG width in pixels.
    pub width: u32,
    /// Symmetric colour limit of vorticity maps (1/s); None: 99th
    /// percentile of |ω|.
    pub vorticity_limit: Option<f64>,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            nondimensional: false,
            vector_every: None,
            width: 1000,
            vorticity_limit: None,
        }
    }
}

/// Writes the figures of one run into `out/<run id>/figures/` and returns
/// them with paths relative to `out`.
pub(crate) fn run_figures(p: &Params, run: &RunResult, out: &Path) -> Result<Vec<FigureRef>> {
    let mut f = figs::run_figures(p, run, out)?;
    f.extend(structures::figures(p, run, out)?);
    Ok(f)
}

/// Makes a `FigureRef` with paths relative to `out`.
pub(crate) fn figure_ref(
    out: &Path,
    (png, svg): (std::path::PathBuf, std::path::PathBuf),
    title: &str,
    caption: String,
) -> FigureRef {
    let rel = |p: &Path| p.strip_prefix(out).unwrap_or(p).to_path_buf();
    FigureRef {
        title: title.to_string(),
        caption,
        png: rel(&png),
        svg: rel(&svg),
    }
}

/// The `q` quantile (0..1) of the finite values of `v`, with the one
/// convention of `crate::robust` (linear between order statistics, as
/// numpy.quantile); None when none is finite.
pub(crate) fn quantile(v: impl Iterator<Item = f64>, q: f64) -> Option<f64> {
    Some(crate::robust::quantile_of(v, q)).filter(|x| !x.is_nan())
}

/// A symmetric limit for a signed quantity: the 99.8th percentile of |v|
/// (so a few spikes do not wash out the map while a compact vortex core is
/// not clipped), or 1 when all are zero.
pub(crate) fn symmetric_limit(v: &[f64]) -> f64 {
    match quantile(v.iter().map(|x| x.abs()), 0.998) {
        Some(l) if l > 0.0 => l,
        _ => 1.0,
    }
}

/// An upper limit for a magnitude: the 99th percentile, or 1 when zero.
pub(crate) fn magnitude_limit(v: &[f64]) -> f64 {
    match quantile(v.iter().copied(), 0.99) {
        Some(l) if l > 0.0 => l,
        _ => 1.0,
    }
}

#[cfg(test)]
pub(crate) mod fixtures;
#[cfg(test)]
pub(crate) mod tests;
