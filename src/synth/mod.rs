//! Synthetic campaigns with analytic ground truth (`curlew synth`).
//!
//! Owns: the scenarios (`scenario`), their analytic flows (`flows`) and
//! velocity gradients (`gradients`), the
//! measurement errors (`corrupt`), and writing a whole campaign with its
//! truth and a ready pipeline (`write`, `pipeline`). Does not own: reading
//! frames back (that is `io`), and it never prints.
//!
//! # Scenarios
//!
//! - `wake`: the wake behind a circular cylinder (diameter `D`, default
//!   10 mm) in a water channel, modelled as a convecting staggered double
//!   row of Lamb–Oseen vortices over a uniform stream (`flows::Street`);
//!   periodic, shedding at `f = St U / D` (St default 0.21, "about 0.2",
//!   Roshko 1961, from memory); every frame has a time and a phase. One run
//!   per free-stream speed.
//! - `vortex`: one steady Lamb–Oseen vortex, peak swirl = the speed.
//! - `solid-body`: solid-body rotation, speed at half the domain height.
//! - `cylinder`: potential flow past a cylinder of diameter `D` at the
//!   domain centre; nodes inside the body are absent from the files.
//! - `taylor-green`: the decaying Taylor–Green array in water.
//! - `uniform`: a uniform stream at 20 degrees to x (no gradients: any
//!   derived value is pure error).
//! - `diffusing-vortex`: a Lamb–Oseen vortex diffusing in still water, core
//!   radius `sqrt(rc0² + 4 nu t)` (Saffman 1992); with `--frame-rate` high
//!   enough, a time-resolved run whose budget is `d omega/dt = nu lap omega`.
//! - `burgers`: the steady Burgers vortex (Burgers 1948) in water: radial
//!   inflow, stretching and diffusion balance. Both write `viscosity` into
//!   `[run.conditions]` and a `[budget]` of the middle frame.
//!
//! Options for the coverage study (`coverage`): the vortex's core radius in
//! grid pitches (`core_pitches`), a pulsing vortex with phases (`pulse`),
//! window-averaged noise of overlapping interrogation windows
//! (`noise_window`) and noise correlated in time (`noise_memory`); see
//! `noise`.
//!
//! # Acquisition
//!
//! A camera of `pixel_size` metres per pixel (default 40 µm) and a frame
//! rate (default 15 Hz, a double-pulse laser). Each run's pulse
//! separation is set, rounded to two significant digits, so that the
//! scenario's peak speed moves `displacement_px` pixels (default 8). The
//! noise is `noise_px` pixels of displacement (default 0.1).
//!
//! # Output layout
//!
//! ```text
//! DIR/
//!   pipeline.toml            ready to run (`curlew run DIR/pipeline.toml`); paths relative to DIR
//!   README.md                the scenario, the command that made it, the layout
//!   <run id>/                one run per speed, id `u` + speed in cm/s (u015 = 0.15 m/s)
//!     f00001.csv …           format csv: one frame per file, columns x, y, u, v in the
//!                            declared units (then sigma_u, sigma_v and flag when asked);
//!                            missing rows, empty cells and flagged rows are gaps
//!     vectors.parquet        format parquet instead: one long table, columns frame (i64,
//!                            1-based), x, y, u, v (f64, unrounded, null where a cell is
//!                            empty); missing rows are absent
//!     frames.csv             frame table: frame (file name without extension, as in
//!                            `FrameMeta::name`, or the parquet frame id), time_s,
//!                            phase_deg (periodic scenarios only)
//!     truth/
//!       mean.csv             per node, SI: x, y, body, u_mean, v_mean, u_std, v_std, uv_cov,
//!                            omega_mean, omega_std of the noise-free fields over the frames
//!                            (std with N-1, covariance with N-1)
//!       phase.csv            periodic scenarios: per phase bin and node: phase_bin, phase_deg
//!                            (bin centre), n_frames, x, y, u_mean, v_mean, omega_mean
//!       events.csv           frame, i, j, kind (outlier | missing | empty | flagged) for every
//!                            corrupted node, frames in order, nodes in node order
//!       params.json          the options, the seed, the run's flow parameters and counts
//!       fields/<frame>.csv   only with truth frames on: x, y, u, v, omega noise-free, SI
//! ```
//!
//! Node indices `i`, `j` follow the layout invariant of `field`:
//! `x = x0 + i dx`, `y = y0 + j dy`.
//!
//! # Determinism
//!
//! The same options and seed give byte-identical files, whatever the number
//! of threads: each frame draws from its own ChaCha8 stream
//! (`corrupt::frame_rng`) and the truth statistics are accumulated in frame
//! order. (Byte identity holds on one platform: another libm may round
//! `exp` differently in the last bit, which can flip a printed last digit.)

pub(crate) mod corrupt;
pub(crate) mod flows;
pub(crate) mod gradients;
pub mod noise;
pub(crate) mod numfmt;
pub(crate) mod options;
pub(crate) mod pipeline;
pub(crate) mod scenario;
pub(crate) mod truth;
pub(crate) mod write;

use std::path::{Path, PathBuf};

use ndarray::Array2;

use crate::error::{Error, Result};
use crate::field::{Field, FrameMeta, Grid, FILLED, MASKED, VALID};
pub use corrupt::Kind;
pub use options::{LengthUnit, OutFormat, Scenario, SynthOptions, VelocityUnit};
pub(crate) use scenario::{Flow, RunSetup};

/// The name of frame `k` (0-based): `f` and the 1-based number, at least
/// five digits.
pub(crate) fn frame_name(k: usize, frames: usize) -> String {
    let width = frames.to_string().len().max(5);
    format!("f{:0width$}", k + 1)
}

/// One frame in memory: the noise-free field, the measured one, and what
/// happened at each node.
#[derive(Debug, Clone)]
pub struct SynthFrame {
    /// Index (0-based), name (`f00001`, …), time (s) and phase (degrees,
    /// `None` for non-periodic scenarios) of the frame.
    pub meta: FrameMeta,
    /// Noise-free; status VALID, MASKED inside a body.
    pub truth: Field,
    /// Noise-free vorticity, 1/s (NaN inside a body).
    pub omega: Array2<f64>,
    /// As a reader sees the file, before printed rounding: outliers VALID
    /// with their random value; gaps (flagged rows too) and body nodes
    /// FILLED (missing or invalid in the input) with NaN. `sigma_u`,
    /// `sigma_v`: the noise sigma with sigma columns on, else NaN.
    pub measured: Field,
    /// `Kind` code per node.
    pub kind: Array2<u8>,
}

/// Frame `k` (0-based) of run number `run` (index into `opts.speeds`), made
/// exactly as `generate` makes it.
pub fn frame_field(opts: &SynthOptions, run: usize, k: usize) -> Result<SynthFrame> {
    let runs = opts.runs()?;
    let setup = runs
        .get(run)
        .ok_or_else(|| Error::usage(format!("run {run} does not exist ({} runs)", runs.len())))?;
    Ok(make_frame(opts, setup, run, k))
}

pub(crate) fn make_frame(
    opts: &SynthOptions,
    setup: &RunSetup,
    run: usize,
    k: usize,
) -> SynthFrame {
    let tf = setup.truth(opts, k);
    let m = corrupt::corrupt(opts, setup, &tf, run, k);
    let g: Grid = setup.grid;
    let mut truth = Field::empty(g);
    let mut measured = Field::empty(g);
    truth.u.assign(&tf.u);
    truth.v.assign(&tf.v);
    measured.u.assign(&m.u);
    measured.v.assign(&m.v);
    for ((j, i), &c) in m.kind.indexed_iter() {
        truth.status[[j, i]] = if tf.body[[j, i]] { MASKED } else { VALID };
        if Kind::from_code(c).is_gap() {
            measured.status[[j, i]] = FILLED;
            measured.u[[j, i]] = f64::NAN;
            measured.v[[j, i]] = f64::NAN;
        } else {
            measured.status[[j, i]] = VALID;
            if opts.sigma_columns {
                measured.sigma_u[[j, i]] = setup.noise_sigma;
                measured.sigma_v[[j, i]] = setup.noise_sigma;
            }
        }
    }
    SynthFrame {
        meta: FrameMeta {
            index: k,
            name: frame_name(k, opts.frames),
            time_s: Some(setup.time(opts, k)),
            phase_deg: setup.phase_deg(opts, k),
        },
        truth,
        omega: tf.omega,
        measured,
        kind: m.kind,
    }
}

/// What `generate` wrote, per run.
#[derive(Debug, Clone, serde::Serialize)]
pub struct RunSummary {
    /// Run id and folder name: `u` and the speed in cm/s (`u015`).
    pub id: String,
    /// The run's velocity scale, m/s: the free stream, or the peak speed.
    pub speed: f64,
    /// Frames written.
    pub frames: usize,
    /// The run's grid (SI, m).
    pub grid: Grid,
    /// Time between the two exposures, s (the pipeline's
    /// `pulse_separation`).
    pub pulse_separation: f64,
    /// Standard deviation of the noise of each velocity component, m/s.
    pub noise_sigma: f64,
    /// Outlier vectors written, summed over all frames.
    pub n_outliers: usize,
    /// Node rows left out of the frame files, summed over all frames.
    pub n_missing: usize,
    /// Rows with empty `u` and `v` cells, summed over all frames.
    pub n_empty: usize,
    /// Rows with a nonzero `flag`, summed over all frames.
    pub n_flagged: usize,
    /// Nodes inside a body, per frame.
    pub n_body: usize,
    /// Bytes of frame data written.
    pub bytes: u64,
}

/// What `generate` wrote.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SynthSummary {
    /// The campaign folder (`--out`).
    pub out: PathBuf,
    /// The pipeline file written into it, `<out>/pipeline.toml`.
    pub pipeline: PathBuf,
    /// One entry per run, in the order of `speeds`.
    pub runs: Vec<RunSummary>,
}

/// Writes a whole synthetic campaign into `out` (layout in the module doc).
///
/// Everything is written into a temporary sibling folder that replaces
/// `out` only when complete; an existing `out` is an error unless
/// `opts.force`, and stays untouched when generation fails.
pub fn generate(opts: &SynthOptions, out: &Path) -> Result<SynthSummary> {
    let runs = opts.runs()?;
    write::write_campaign(opts, &runs, out)
}

#[cfg(test)]
mod tests;
#[cfg(test)]
mod tests_events;
#[cfg(test)]
mod tests_viscous;
