//! The campaign report, `index.html`: self-contained (inline CSS, no
//! script, no network; figures by relative links), one section per run and
//! per comparison, the key tables, warnings and provenance.
//!
//! Owns: the report's layout and words, and the condition numbers of
//! `campaign.csv` (`conditions`). Does not own: the numbers (stats,
//! compare) or the figures (plot).
//!
//! The page is written to `index.html.partial` and renamed, so a failed
//! write never leaves a half page in place of a good one.

pub mod conditions;
mod html;
mod sections;

use std::path::Path;

use crate::error::{Error, Result};
use crate::result::CampaignResult;

pub use conditions::{campaign_columns, run_frequency, FrequencySource};

/// Writes `out/index.html`.
pub fn write_report(c: &CampaignResult, out: &Path) -> Result<()> {
    let page = sections::page(c);
    let path = out.join("index.html");
    let tmp = out.join("index.html.partial");
    std::fs::write(&tmp, page).map_err(|e| Error::io(&tmp, e))?;
    std::fs::rename(&tmp, &path).map_err(|e| Error::io(&path, e))
}

#[cfg(test)]
mod tests;
