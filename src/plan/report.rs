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

/// One `[[compare]]` entry as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawCompare {}

/// A run's resolved flow conditions (the figures owner may replace this
/// with a resolved struct; `resolve_conditions` makes it).
pub type Conditions = RawConditions;

/// A resolved comparison (the figures owner replaces this).
pub type ComparePlan = RawCompare;

pub fn resolve_conditions(c: &RawConditions, ctx: &ResolveCtx) -> Result<Conditions> {
    let _ = ctx;
    Ok(c.clone())
}

/// Resolves `[[compare]]`; `run_ids` are the pipeline's runs, in order.
pub fn resolve_compare(c: &[RawCompare], run_ids: &[String]) -> Result<Vec<ComparePlan>> {
    let _ = run_ids;
    Ok(c.to_vec())
}

pub fn resolve_figures(f: &RawFigures, ctx: &ResolveCtx) -> Result<plot::Params> {
    let _ = (f, ctx);
    Ok(plot::Params::default())
}
