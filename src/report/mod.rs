//! The campaign report, `index.html`: self-contained, one section per run.
//!
//! STUB (skeleton): the report owner replaces the `todo!()` bodies.

use std::path::Path;

use crate::error::Result;
use crate::result::CampaignResult;

/// Writes `out/index.html`.
pub fn write_report(c: &CampaignResult, out: &Path) -> Result<()> {
    let _ = (c, out);
    todo!("report: write_report")
}
