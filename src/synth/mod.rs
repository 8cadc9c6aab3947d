//! Synthetic campaigns with analytic ground truth (`curlew synth`).
//!
//! Owns: the scenarios (`scenario`), their analytic flows (`flows`), the
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
//!                            1-based), x, y, u, v (f64, null where a cell is empty)
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
//! order.

pub mod corrupt;
pub mod flows;
pub mod numfmt;
pub mod pipeline;
pub mod scenario;
pub mod truth;
pub mod write;

use std::path::{Path, PathBuf};
use std::str::FromStr;

use ndarray::Array2;

use crate::error::{Error, Result};
use crate::field::{Field, FrameMeta, Grid, FILLED, MASKED, VALID};
pub use corrupt::Kind;
pub use scenario::{setup_run, Flow, RunSetup, TruthFrame};

/// The synthetic flows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Scenario {
    Wake,
    Vortex,
    SolidBody,
    Cylinder,
    TaylorGreen,
}

impl Scenario {
    pub const NAMES: [&'static str; 5] =
        ["wake", "vortex", "solid-body", "cylinder", "taylor-green"];

    pub fn name(self) -> &'static str {
        match self {
            Scenario::Wake => "wake",
            Scenario::Vortex => "vortex",
            Scenario::SolidBody => "solid-body",
            Scenario::Cylinder => "cylinder",
            Scenario::TaylorGreen => "taylor-green",
        }
    }

    /// True when frames have a phase (the flow is periodic).
    pub fn periodic(self) -> bool {
        self == Scenario::Wake
    }
}

impl FromStr for Scenario {
    type Err = Error;
    fn from_str(s: &str) -> Result<Scenario> {
        Ok(match s {
            "wake" => Scenario::Wake,
            "vortex" => Scenario::Vortex,
            "solid-body" => Scenario::SolidBody,
            "cylinder" => Scenario::Cylinder,
            "taylor-green" => Scenario::TaylorGreen,
            other => {
                return Err(Error::usage(format!(
                    "scenario '{other}' is not known; expected one of {}",
                    Scenario::NAMES.join(", ")
                )))
            }
        })
    }
}

/// Units of the written coordinates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum LengthUnit {
    M,
    Mm,
    Px,
}

/// Units of the written velocities (`Px`: displacement between exposures).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum VelocityUnit {
    MPerS,
    MmPerS,
    Px,
}

impl LengthUnit {
    /// The pipeline's name of the unit.
    pub fn name(self) -> &'static str {
        match self {
            LengthUnit::M => "m",
            LengthUnit::Mm => "mm",
            LengthUnit::Px => "px",
        }
    }
}

impl FromStr for LengthUnit {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        match s {
            "m" => Ok(LengthUnit::M),
            "mm" => Ok(LengthUnit::Mm),
            "px" => Ok(LengthUnit::Px),
            o => Err(Error::usage(format!(
                "length unit '{o}' is not known; expected m, mm or px"
            ))),
        }
    }
}

impl VelocityUnit {
    pub fn name(self) -> &'static str {
        match self {
            VelocityUnit::MPerS => "m/s",
            VelocityUnit::MmPerS => "mm/s",
            VelocityUnit::Px => "px",
        }
    }
}

impl FromStr for VelocityUnit {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        match s {
            "m/s" => Ok(VelocityUnit::MPerS),
            "mm/s" => Ok(VelocityUnit::MmPerS),
            "px" => Ok(VelocityUnit::Px),
            o => Err(Error::usage(format!(
                "velocity unit '{o}' is not known; expected m/s, mm/s or px"
            ))),
        }
    }
}

/// How frames are stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum OutFormat {
    /// One CSV file per frame.
    Csv,
    /// One parquet long table per run.
    Parquet,
}

/// Everything `generate` needs. `Default` is the demo's wake at two speeds.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SynthOptions {
    pub scenario: Scenario,
    /// Frames per run.
    pub frames: usize,
    pub seed: u64,
    /// Grid size and pitch (m); `None`: the scenario's default.
    pub nx: Option<usize>,
    pub ny: Option<usize>,
    pub pitch: Option<f64>,
    /// One run per speed (m/s): the free stream, or the scenario's velocity scale.
    pub speeds: Vec<f64>,
    /// Body diameter for `wake` and `cylinder`, m.
    pub diameter: f64,
    /// Strouhal number of the shedding (`wake`).
    pub strouhal: f64,
    /// Convection speed of the street over the free stream (`wake`).
    pub convection: f64,
    /// Metres per pixel.
    pub pixel_size: f64,
    /// Displacement of the peak speed between exposures, px.
    pub displacement_px: f64,
    /// Frames per second.
    pub frame_rate: f64,
    /// Standard deviation of the noise of each component, px.
    pub noise_px: f64,
    /// Fraction of nodes per frame replaced by random vectors.
    pub outlier_fraction: f64,
    /// Outlier magnitude at most this many times the local speed.
    pub outlier_scale: f64,
    /// Fraction of nodes per frame that are gaps (missing rows, empty cells,
    /// or flagged rows when `flag_column`).
    pub gap_fraction: f64,
    /// Write `sigma_u`, `sigma_v` columns: the noise standard deviation.
    pub sigma_columns: bool,
    /// Write a `flag` column (0, or 1 on flagged gap rows).
    pub flag_column: bool,
    pub length_unit: LengthUnit,
    pub velocity_unit: VelocityUnit,
    pub format: OutFormat,
    /// Significant digits of printed values, relative to each column's scale;
    /// 16 or more: shortest exact representation.
    pub digits: u32,
    /// Write the truth folder.
    pub truth: bool,
    /// Also write every frame's noise-free field (one file per frame).
    pub truth_frames: bool,
    /// Phase bins of the pipeline and of `truth/phase.csv`.
    pub phase_bins: usize,
    pub campaign: String,
    /// Replace an existing output folder (only once the new one is complete).
    pub force: bool,
    /// The command line that made the campaign, for the pipeline comment and README.
    pub command: Option<String>,
    /// Also write the pipeline here, with paths relative to its folder.
    pub pipeline_copy: Option<PathBuf>,
}

impl Default for SynthOptions {
    fn default() -> Self {
        SynthOptions {
            scenario: Scenario::Wake,
            frames: 100,
            seed: 1,
            nx: None,
            ny: None,
            pitch: None,
            speeds: vec![0.15, 0.30],
            diameter: 0.01,
            strouhal: 0.21,
            convection: 0.85,
            pixel_size: 4.0e-5,
            displacement_px: 8.0,
            frame_rate: 15.0,
            noise_px: 0.1,
            outlier_fraction: 0.03,
            outlier_scale: 3.0,
            gap_fraction: 0.02,
            sigma_columns: false,
            flag_column: false,
            length_unit: LengthUnit::Mm,
            velocity_unit: VelocityUnit::MPerS,
            format: OutFormat::Csv,
            digits: 5,
            truth: true,
            truth_frames: false,
            phase_bins: 12,
            campaign: "synth".into(),
            force: false,
            command: None,
            pipeline_copy: None,
        }
    }
}

impl SynthOptions {
    /// Checks the options; errors are usage errors naming the option.
    pub fn validate(&self) -> Result<()> {
        let frac = |name: &str, v: f64| {
            if (0.0..=1.0).contains(&v) {
                Ok(())
            } else {
                Err(Error::usage(format!(
                    "{name} = {v} must lie between 0 and 1"
                )))
            }
        };
        let pos = |name: &str, v: f64| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(Error::usage(format!(
                    "{name} = {v} must be a positive number"
                )))
            }
        };
        if self.frames == 0 {
            return Err(Error::usage("frames must be at least 1"));
        }
        if self.speeds.is_empty() {
            return Err(Error::usage("give at least one speed"));
        }
        frac("outlier fraction", self.outlier_fraction)?;
        frac("gap fraction", self.gap_fraction)?;
        if self.outlier_fraction + self.gap_fraction > 1.0 {
            return Err(Error::usage(
                "outlier fraction plus gap fraction must not exceed 1",
            ));
        }
        if !(self.noise_px.is_finite() && self.noise_px >= 0.0) {
            return Err(Error::usage(format!(
                "noise = {} px must be zero or positive",
                self.noise_px
            )));
        }
        for (n, v) in [
            ("pixel size", self.pixel_size),
            ("displacement", self.displacement_px),
            ("frame rate", self.frame_rate),
            ("diameter", self.diameter),
            ("strouhal", self.strouhal),
        ] {
            pos(n, v)?;
        }
        if let Some(p) = self.pitch {
            pos("pitch", p)?;
        }
        if !(self.convection > 0.0 && self.convection < 1.0) {
            return Err(Error::usage(format!(
                "convection = {} must lie strictly between 0 and 1 (a fraction of the free stream)",
                self.convection
            )));
        }
        if self.outlier_scale < 0.5 {
            return Err(Error::usage(format!(
                "outlier scale = {} must be at least 0.5",
                self.outlier_scale
            )));
        }
        if self.nx.is_some_and(|n| n < 3) || self.ny.is_some_and(|n| n < 3) {
            return Err(Error::usage("the grid needs at least 3 x 3 nodes"));
        }
        if !(1..=17).contains(&self.digits) {
            return Err(Error::usage(format!(
                "digits = {} must lie between 1 and 17",
                self.digits
            )));
        }
        if self.phase_bins == 0 || self.phase_bins > 3600 {
            return Err(Error::usage(format!(
                "phase bins = {} must lie between 1 and 3600",
                self.phase_bins
            )));
        }
        if self.campaign.trim().is_empty() || self.campaign.contains('"') {
            return Err(Error::usage(
                "the campaign name must not be empty nor contain '\"'",
            ));
        }
        Ok(())
    }

    /// Every run's setup, in the order of `speeds`; error if two speeds give
    /// the same run id.
    pub fn runs(&self) -> Result<Vec<RunSetup>> {
        self.validate()?;
        let mut out: Vec<RunSetup> = Vec::new();
        for &s in &self.speeds {
            let r = setup_run(self, s)?;
            if out.iter().any(|o| o.id == r.id) {
                return Err(Error::usage(format!(
                    "speeds {s} m/s and another give the same run id '{}' (ids use cm/s)",
                    r.id
                )));
            }
            out.push(r);
        }
        Ok(out)
    }
}

/// The name of frame `k` (0-based): `f` and the 1-based number, at least
/// five digits.
pub fn frame_name(k: usize, frames: usize) -> String {
    let width = frames.to_string().len().max(5);
    format!("f{:0width$}", k + 1)
}

/// One frame in memory: the noise-free field, the measured one, and what
/// happened at each node.
#[derive(Debug, Clone)]
pub struct SynthFrame {
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
    pub id: String,
    pub speed: f64,
    pub frames: usize,
    pub grid: Grid,
    pub pulse_separation: f64,
    pub noise_sigma: f64,
    pub n_outliers: usize,
    pub n_missing: usize,
    pub n_empty: usize,
    pub n_flagged: usize,
    /// Nodes inside a body, per frame.
    pub n_body: usize,
    /// Bytes of frame data written.
    pub bytes: u64,
}

/// What `generate` wrote.
#[derive(Debug, Clone, serde::Serialize)]
pub struct SynthSummary {
    pub out: PathBuf,
    pub pipeline: PathBuf,
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
