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
    /// Vortex cores and tracks, when `[vortices]` asked for them.
    pub vortices: Option<crate::vortex::Vortices>,
    /// Nodes of `grid` (node order) masked by the pipeline's geometry mask
    /// or in every frame by the frames' mask column
    /// (`crate::mask::figure_mask`); `None` when nothing is masked. Figures
    /// draw them grey.
    pub mask: Option<Vec<bool>>,
    /// POD, spectra and two-point statistics, where computed.
    pub structures: Structures,
}

/// A run's coherent structures and scales (docs/modes.md), each `None`
/// when not computed.
#[derive(Debug, Clone, Default)]
pub struct Structures {
    pub pod: Option<crate::modes::Pod>,
    pub phase: Option<crate::modes::phase::PhaseEstimate>,
    pub spectra: Option<crate::spectra::run::RunSpectra>,
    pub scales: Option<crate::scales::Scales>,
    /// POD modes drawn as maps (`[modes] figure_modes`).
    pub figure_modes: usize,
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
