//! What a reduced run and campaign hold, as handed to the writers, the
//! figures and the report.

use crate::field::{FrameMeta, Grid};
use crate::{fill, stats, validate};

/// One frame's row of `frames.csv`.
#[derive(Debug, Clone)]
pub struct FrameRecord {
    /// Where the frame sits in its run (index, name, time, phase).
    pub meta: FrameMeta,
    /// Nodes of the grid.
    pub n_vectors: usize,
    /// Vectors counted by each validation test (`n_invalid_input`, `rejected_<test>`).
    pub validation: validate::Counts,
    /// Vectors replaced, filled and left unfilled (`n_replaced`, `n_filled`, `n_unfilled`).
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
    /// Figure title.
    pub title: String,
    /// Caption shown below the figure in the report.
    pub caption: String,
    /// The PNG file.
    pub png: std::path::PathBuf,
    /// The SVG file.
    pub svg: std::path::PathBuf,
}

/// A reduced run.
#[derive(Debug, Clone)]
pub struct RunResult {
    /// The run's id (`[[run]] id`), also its output folder's name.
    pub id: String,
    /// The run's grid, in metres.
    pub grid: Grid,
    /// One record per frame of the run, in frame order (`frames.csv`).
    pub frames: Vec<FrameRecord>,
    /// The accumulated statistics (ensemble and phase tables).
    pub stats: stats::RunStats,
    /// Warnings raised while reducing the run.
    pub warnings: Vec<String>,
    /// Figures written for the run.
    pub figures: Vec<FigureRef>,
    /// The run's `[run.conditions]`.
    pub conditions: crate::field::Conditions,
    /// The run's `description`, if given.
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
    /// Proper orthogonal decomposition, with `[modes] pod`.
    pub pod: Option<crate::modes::Pod>,
    /// Phase estimated from modes 1 and 2, with `[modes] phase`.
    pub phase: Option<crate::modes::phase::PhaseEstimate>,
    /// Welch spectra, for time-resolved runs (`[spectra]`).
    pub spectra: Option<crate::spectra::run::RunSpectra>,
    /// Two-point correlations and integral length scales at the probes.
    pub scales: Option<crate::scales::Scales>,
    /// POD modes drawn as maps (`[modes] figure_modes`).
    pub figure_modes: usize,
}

/// What one comparison produced; paths relative to the campaign folder.
#[derive(Debug, Clone)]
pub struct ComparisonResult {
    /// The comparison's `title`.
    pub title: String,
    /// The file-name stem of the comparison's outputs.
    pub slug: String,
    /// The ids of the runs compared.
    pub runs: Vec<String>,
    /// Made by curlew without a `[[compare]]` (first two runs).
    pub automatic: bool,
    /// The compared quantity (`quantity`, e.g. `omega_mean`).
    pub quantity: String,
    /// The comparison's coverage factor k (`coverage`, default 2).
    pub coverage: f64,
    /// Figures written for the comparison.
    pub figures: Vec<FigureRef>,
    /// CSV tables written (difference, profiles, scalars).
    pub tables: Vec<std::path::PathBuf>,
    /// Scalars of each run for the table across conditions.
    pub scalars: Vec<Scalar>,
    /// Nodes where Δ and its uncertainty are known.
    pub n_compared: usize,
    /// Nodes where |Δ| > k u_Δ.
    pub n_significant: usize,
    /// n_significant / n_compared, when anything was compared.
    pub significant_fraction: Option<f64>,
    /// True when the second run's grid differed and it was interpolated.
    pub interpolated: bool,
    /// Warnings raised by the comparison.
    pub warnings: Vec<String>,
}

/// One scalar of one run in a comparison's table across conditions
/// (`compare::scalars` computes them).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Scalar {
    /// The run's id.
    pub run: String,
    /// The scalar's name.
    pub name: String,
    /// The value, in `unit`; NaN when unknown.
    pub value: f64,
    /// Standard uncertainty (k = 1); NaN when unknown.
    pub uncertainty: f64,
    /// The unit of `value` and `uncertainty` (SI).
    pub unit: String,
}

/// A reduced campaign.
#[derive(Debug, Clone)]
pub struct CampaignResult {
    /// The campaign's `name`.
    pub name: String,
    /// The reduced runs, in pipeline order.
    pub runs: Vec<RunResult>,
    /// The manifest as written (tool version, pipeline, inputs, timings).
    pub manifest: serde_json::Value,
    /// Campaign-level warnings.
    pub warnings: Vec<String>,
    /// The comparisons between runs (`[[compare]]`, or the automatic one).
    pub comparisons: Vec<ComparisonResult>,
}
