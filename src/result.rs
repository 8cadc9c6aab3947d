//! What a reduced run and campaign hold, as handed to the writers, the
//! figures and the report.

use crate::field::{FrameMeta, Grid};
use crate::{fill, stats, validate};

/// One frame's row of `frames.csv`.
#[derive(Debug, Clone)]
pub struct FrameRecord {
    pub meta: FrameMeta,
    /// Nodes of the grid.
    pub n_vectors: usize,
    pub validation: validate::Counts,
    pub fill: fill::Counts,
    /// True when the whole frame was rejected (left out of the statistics).
    pub rejected: bool,
    /// Noise level estimated from this frame (m/s).
    pub noise: Option<f64>,
}

/// A figure written for a run or a comparison; paths relative to the
/// campaign output folder.
#[derive(Debug, Clone)]
pub struct FigureRef {
    pub title: String,
    pub caption: String,
    pub png: std::path::PathBuf,
    pub svg: std::path::PathBuf,
}

/// A reduced run.
#[derive(Debug, Clone)]
pub struct RunResult {
    pub id: String,
    pub grid: Grid,
    pub frames: Vec<FrameRecord>,
    pub stats: stats::RunStats,
    pub warnings: Vec<String>,
    pub figures: Vec<FigureRef>,
    pub conditions: crate::plan::report::Conditions,
    pub description: Option<String>,
    /// The vorticity transport budget, when `[budget]` asked for it.
    pub budget: Option<crate::budget::Budget>,
    /// Nodes of `grid` (node order) masked by the pipeline's geometry mask
    /// or in every frame by the frames' mask column
    /// (`crate::mask::figure_mask`); `None` when nothing is masked. Figures
    /// draw them grey.
    pub mask: Option<Vec<bool>>,
}

/// A reduced campaign.
#[derive(Debug, Clone)]
pub struct CampaignResult {
    pub name: String,
    pub runs: Vec<RunResult>,
    /// The manifest as written (tool version, pipeline, inputs, timings).
    pub manifest: serde_json::Value,
    pub warnings: Vec<String>,
    /// The comparisons between runs (`[[compare]]`, or the automatic one).
    pub comparisons: Vec<crate::compare::ComparisonResult>,
}
