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

/// The mean of the per-frame noise estimates over the frames the statistics
/// used (a rejected frame, a bad laser shot, would inflate it), when the
/// frames carry one.
pub fn mean_noise(frames: &[FrameRecord]) -> Option<f64> {
    let v: Vec<f64> = frames
        .iter()
        .filter(|f| !f.rejected)
        .filter_map(|f| f.noise)
        .filter(|x| x.is_finite())
        .collect();
    (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64)
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
    pub conditions: crate::field::Conditions,
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

/// What one comparison produced; paths relative to the campaign folder.
#[derive(Debug, Clone)]
pub struct ComparisonResult {
    pub title: String,
    pub slug: String,
    pub runs: Vec<String>,
    /// Made by curlew without a `[[compare]]` (first two runs).
    pub automatic: bool,
    pub quantity: String,
    pub coverage: f64,
    pub figures: Vec<FigureRef>,
    /// CSV tables written (difference, profiles, scalars).
    pub tables: Vec<std::path::PathBuf>,
    pub scalars: Vec<Scalar>,
    /// Nodes where Δ and its uncertainty are known.
    pub n_compared: usize,
    pub n_significant: usize,
    /// n_significant / n_compared, when anything was compared.
    pub significant_fraction: Option<f64>,
    /// True when the second run's grid differed and it was interpolated.
    pub interpolated: bool,
    pub warnings: Vec<String>,
}

/// One scalar of one run in a comparison's table across conditions
/// (`compare::scalars` computes them).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Scalar {
    pub run: String,
    pub name: String,
    pub value: f64,
    /// Standard uncertainty (k = 1); NaN when unknown.
    pub uncertainty: f64,
    pub unit: String,
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
    pub comparisons: Vec<ComparisonResult>,
}
