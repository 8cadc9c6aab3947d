//! `[statistics]` and `[phase]`: raw keys and their resolution.
//!
//! STUB (skeleton): the statistics owner fills these sections.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::error::{Error, Result};
use crate::stats;

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawStatistics {}

#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawPhase {
    /// Number of phase bins (default 12).
    pub bins: Option<usize>,
}

pub fn resolve_stats(s: &RawStatistics, ph: &RawPhase, ctx: &ResolveCtx) -> Result<stats::Params> {
    let _ = (s, ctx);
    let mut p = stats::Params::default();
    if let Some(b) = ph.bins {
        if b == 0 || b > 3600 {
            return Err(Error::usage(format!(
                "[phase] bins = {b} must lie between 1 and 3600"
            )));
        }
        p.phase_bins = b;
    }
    Ok(p)
}
