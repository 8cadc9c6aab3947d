//! The campaign report, `index.html`: self-contained (inline CSS, no
//! script, no network; figures by relative links), one section per run and
//! per comparison, the key tables, warnings and provenance.
//!
//! Owns: the report's layout and words, and the condition numbers of
//! `campaign.csv` (`conditions`). Does not own: the numbers (stats,
//! compare) or the figures (plot).
//!
//! The page is written through `io::atomic_bytes`, so a failed write never
//! leaves a half page in place of a good one.

mod budget;
pub(crate) mod conditions;
mod html;
mod sections;
pub(crate) mod structures;
mod vortices;

use std::path::Path;

use crate::error::Result;
use crate::result::CampaignResult;

/// Writes `out/index.html`.
pub(crate) fn write_report(c: &CampaignResult, out: &Path) -> Result<()> {
    let page = sections::page(c);
    crate::io::atomic_bytes(&out.join("index.html"), page.as_bytes())
}

#[cfg(test)]
mod tests;
