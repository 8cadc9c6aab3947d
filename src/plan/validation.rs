//! `[validation]`, `[fill]` and `[smoothing]`: raw keys and their resolution.
//!
//! STUB (skeleton): the validation owner fills these sections.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::error::Result;
use crate::stencil::smooth::Smoother;
use crate::{fill, validate};

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawValidation {}

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFill {}

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSmoothing {}

pub fn resolve_validation(raw: &RawValidation, ctx: &ResolveCtx) -> Result<validate::Params> {
    let _ = raw;
    let mut p = validate::Params::default();
    if let Some(m) = p.median.as_mut() {
        // default eps: 0.1 px of displacement when calibrated, else 0.1 input velocity units
        m.eps = 0.1 * ctx.px_velocity.unwrap_or(ctx.velocity_scale);
    }
    Ok(p)
}

pub fn resolve_fill(raw: &RawFill, ctx: &ResolveCtx) -> Result<fill::Params> {
    let _ = (raw, ctx);
    Ok(fill::Params::default())
}

pub fn resolve_smoothing(raw: &RawSmoothing, ctx: &ResolveCtx) -> Result<Smoother> {
    let _ = (raw, ctx);
    Ok(Smoother::None)
}
