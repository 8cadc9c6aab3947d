//! Figures (PNG and SVG) with plotters and an embedded font.
//!
//! STUB (skeleton): the figures owner replaces the `todo!()` bodies.

use std::path::Path;

use crate::error::Result;
use crate::result::{FigureRef, RunResult};

#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {}

impl Default for Params {
    fn default() -> Self {
        Params {}
    }
}

/// Writes the figures of one run into `out/<run id>/figures/` and returns
/// them with paths relative to `out`.
pub fn run_figures(p: &Params, run: &RunResult, out: &Path) -> Result<Vec<FigureRef>> {
    let _ = (p, run, out);
    todo!("plot: run_figures")
}
