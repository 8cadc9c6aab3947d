//! Smoothers: Gaussian and 2-D local least-squares (Savitzky-Golay) as
//! stencils, and the robust DCT penalized least squares of `fill::pls`
//! seen through its equivalent kernel.
//!
//! STUB (skeleton): the smoothing owner replaces the `todo!()` bodies.

use ndarray::Array2;

use super::Stencil;

/// The smoother the plan chose, resolved.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum Smoother {
    /// No smoothing (the default).
    #[default]
    None,
    /// A linear, normalised smoothing stencil (Gaussian, Savitzky-Golay).
    Linear(Stencil),
    /// DCT penalized least squares (Garcia 2010): `s` fixed, or chosen by
    /// GCV per frame when `None`.
    Pls { s: Option<f64>, robust: bool },
}

impl Smoother {
    /// The smoothed copy of `a`; `valid` marks nodes that carry a value.
    pub fn apply(&self, a: &Array2<f64>, valid: &Array2<bool>) -> Array2<f64> {
        let _ = valid;
        match self {
            Smoother::None => a.clone(),
            _ => todo!("smooth: apply"),
        }
    }
    /// The linear stencil that this smoother is (or, for PLS with a given s,
    /// its equivalent interior kernel), for composing with derivatives and
    /// propagating uncertainty; `None` for no smoothing.
    pub fn equivalent_stencil(&self) -> Option<Stencil> {
        match self {
            Smoother::None => None,
            Smoother::Linear(s) => Some(s.clone()),
            Smoother::Pls { .. } => todo!("smooth: PLS kernel"),
        }
    }
}
