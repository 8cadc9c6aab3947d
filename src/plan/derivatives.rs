//! `[derivatives]` and `[uncertainty]`: raw keys and their resolution.
//!
//! STUB (skeleton): the gradients owner fills these sections.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::derive;
use crate::error::Result;
use crate::stencil::smooth::Smoother;

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawDerivatives {
    /// central | richardson | least-squares | circulation | auto
    pub scheme: Option<String>,
}

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawUncertainty {
    /// "estimate" | "columns" | a number in m/s
    pub velocity_noise: Option<toml::Value>,
    pub neighbour_correlation: Option<f64>,
}

pub fn resolve_derive(
    d: &RawDerivatives,
    u: &RawUncertainty,
    smoother: Smoother,
    ctx: &ResolveCtx,
) -> Result<derive::Params> {
    let _ = (d, u, smoother, ctx);
    Ok(derive::Params::default())
}
