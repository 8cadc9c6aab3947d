//! `[figures]`, `[[compare]]` and a run's `[run.conditions]`: raw keys and
//! their resolution.
//!
//! STUB (skeleton): the figures owner fills these sections.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::error::Result;
use crate::plot;

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFigures {}

/// A run's flow conditions (reference velocity, length, viscosity…).
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawConditions {}

pub fn resolve_figures(f: &RawFigures, ctx: &ResolveCtx) -> Result<plot::Params> {
    let _ = (f, ctx);
    Ok(plot::Params::default())
}
