//! Velocity-gradient quantities of one snapshot and their uncertainty.
//!
//! Owns: smoothing the field for the statistics, the out-of-plane vorticity
//! and the other gradient quantities, and the propagation of per-vector
//! uncertainty through the (composite) stencils. Does not own: the stencil
//! type (`stencil`), statistics over frames (`stats`).
//!
//! STUB (skeleton): signatures agreed between the stages; the gradients
//! owner replaces the `todo!()` bodies.

use ndarray::Array2;

use crate::field::Field;

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {}

impl Default for Params {
    fn default() -> Self {
        Params {}
    }
}

/// One derived quantity on the grid, NaN where it has no value.
#[derive(Debug, Clone)]
pub struct Quantity {
    /// Column stem, e.g. "omega", "div", "lambda_ci".
    pub name: &'static str,
    /// SI unit, e.g. "1/s".
    pub unit: &'static str,
    pub value: Array2<f64>,
    /// Propagated standard uncertainty of the instantaneous value.
    pub unc: Option<Array2<f64>>,
    /// Estimated truncation (bias) error, a systematic component.
    pub bias: Option<Array2<f64>>,
}

/// Everything derived from one snapshot.
#[derive(Debug, Clone)]
pub struct Derived {
    /// The velocity the statistics use (smoothed when smoothing is on).
    pub u: Array2<f64>,
    pub v: Array2<f64>,
    /// Their standard uncertainties.
    pub u_unc: Array2<f64>,
    pub v_unc: Array2<f64>,
    /// Quantities in the order of `quantity_names`; "omega" is first.
    pub quantities: Vec<Quantity>,
    /// Noise level estimated from this frame (m/s), when estimated.
    pub noise_estimate: Option<f64>,
}

/// Names of the quantities `derive` produces with these parameters.
pub fn quantity_names(p: &Params) -> Vec<&'static str> {
    let _ = p;
    vec!["omega"]
}

/// Derives every quantity from a filled field.
pub fn derive(p: &Params, field: &Field) -> Derived {
    let _ = (p, field);
    todo!("derive: derive")
}
