//! The options of a synthetic campaign: scenario, units, format and every
//! parameter of the acquisition and its errors, with their checks.

use std::path::PathBuf;
use std::str::FromStr;

use super::scenario::{setup_run, RunSetup};
use crate::error::{Error, Result};

/// The synthetic flows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Scenario {
    /// `wake`: a convecting double row of Lamb–Oseen vortices behind a
    /// cylinder, shed at `strouhal` (periodic: frames carry a phase).
    Wake,
    /// `vortex`: a steady Lamb–Oseen vortex (optionally pulsing or in a
    /// stream: `pulse`, `stream`).
    Vortex,
    /// `solid-body`: rigid rotation, vorticity uniform.
    SolidBody,
    /// `cylinder`: potential flow past a cylinder (zero vorticity and
    /// divergence outside the body, which is masked).
    Cylinder,
    /// `taylor-green`: the Taylor–Green vortex array, one wavelength across
    /// the domain height, decaying viscously.
    TaylorGreen,
    /// A uniform stream (no gradients at all): the speed at 20 degrees to x.
    Uniform,
    /// A Lamb–Oseen vortex diffusing in still water (its core grows with time).
    DiffusingVortex,
    /// The steady Burgers vortex: swirl, radial inflow and axial strain.
    Burgers,
}

impl Scenario {
    pub(crate) const NAMES: [&'static str; 8] = [
        "wake",
        "vortex",
        "solid-body",
        "cylinder",
        "taylor-green",
        "uniform",
        "diffusing-vortex",
        "burgers",
    ];

    /// The scenario's command-line name (`curlew synth SCENARIO`), e.g.
    /// `"solid-body"`.
    pub fn name(self) -> &'static str {
        match self {
            Scenario::Wake => "wake",
            Scenario::Vortex => "vortex",
            Scenario::SolidBody => "solid-body",
            Scenario::Cylinder => "cylinder",
            Scenario::TaylorGreen => "taylor-green",
            Scenario::Uniform => "uniform",
            Scenario::DiffusingVortex => "diffusing-vortex",
            Scenario::Burgers => "burgers",
        }
    }

    /// True when frames have a phase (the flow is periodic).
    pub(crate) fn periodic(self) -> bool {
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
            "uniform" => Scenario::Uniform,
            "diffusing-vortex" => Scenario::DiffusingVortex,
            "burgers" => Scenario::Burgers,
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
    /// Metres (`m`).
    M,
    /// Millimetres (`mm`, the `curlew synth` default).
    Mm,
    /// Pixels of `pixel_size`, about the same origin as the SI coordinates
    /// (so px and mm campaigns of one seed give the same SI grid).
    Px,
}

/// Units of the written velocities (`Px`: displacement between exposures).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum VelocityUnit {
    /// Metres per second (`m/s`, the default).
    MPerS,
    /// Millimetres per second (`mm/s`).
    MmPerS,
    /// Pixels of displacement between the two exposures (`px`); the
    /// pipeline then gets `pixel_size` and `pulse_separation`.
    Px,
}

impl LengthUnit {
    /// The pipeline's name of the unit.
    pub(crate) fn name(self) -> &'static str {
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
    pub(crate) fn name(self) -> &'static str {
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
    /// The flow to synthesise (`curlew synth SCENARIO`).
    pub scenario: Scenario,
    /// Frames per run.
    pub frames: usize,
    /// Seed of every random draw (`--seed`); the same seed gives
    /// identical files.
    pub seed: u64,
    /// Nodes along x (`--nx`); `None`: the scenario's default (40 for
    /// `wake`, 48 otherwise).
    pub nx: Option<usize>,
    /// Nodes along y (`--ny`); `None`: the scenario's default (25 for
    /// `wake`, 36 otherwise).
    pub ny: Option<usize>,
    /// Grid pitch, m (`--pitch-mm` on the command line, in mm); `None`:
    /// 2 mm for `wake`, 1 mm otherwise.
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
    /// Correlation coefficient of the noise of adjacent vectors (0 to
    /// 1/sqrt 2; 0: independent).
    pub noise_correlation: f64,
    /// Window noise: each vector's error is the average over an `m x m`
    /// box of sub-cell errors (`m = 1/(1 - overlap)`: 2 at 50 %, 4 at 75 %
    /// overlap; 0 or 1: off). See `noise`.
    #[serde(default)]
    pub noise_window: usize,
    /// AR(1) coefficient of the noise from frame to frame (0: independent
    /// frames; below 1). See `noise`.
    #[serde(default)]
    pub noise_memory: f64,
    /// Core radius of the `vortex` scenario in grid pitches (default: an
    /// eighth of the domain height).
    #[serde(default)]
    pub core_pitches: Option<f64>,
    /// `vortex` scenario: the circulation pulses as `1 + A sin(2 pi f t)`
    /// with `pulse = Some((A, f in Hz))`; frames then carry a phase.
    #[serde(default)]
    pub pulse: Option<(f64, f64)>,
    /// `vortex` scenario: a uniform stream along +x (m/s) added to the
    /// vortex (default 0).
    #[serde(default)]
    pub stream: f64,
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
    /// Write the nodes inside a body as rows with `mask` = 1 (empty u, v)
    /// instead of leaving them out; the pipeline then masks by that column
    /// rather than by a circle (csv only).
    pub mask_column: bool,
    /// Unit of the written coordinates (`--length-unit`; the pipeline's
    /// `length_unit`).
    pub length_unit: LengthUnit,
    /// Unit of the written velocities (`--velocity-unit`; the pipeline's
    /// `velocity_unit`).
    pub velocity_unit: VelocityUnit,
    /// Write image-oriented frames: y and v grow downwards (the files hold
    /// minus the flow's y and v; the pipeline says `y_axis = "down"`).
    pub y_down: bool,
    /// How frames are stored (`--format`; the pipeline's `format`).
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
    /// Campaign name written as the pipeline's `[campaign] name`
    /// (`--campaign`; default `synth-<scenario>`).
    pub campaign: String,
    /// Replace an existing output folder (only once the new one is complete).
    /// Not recorded in the truth, so that a forced regeneration writes the
    /// same bytes.
    #[serde(skip)]
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
            noise_correlation: 0.0,
            noise_window: 0,
            noise_memory: 0.0,
            core_pitches: None,
            pulse: None,
            stream: 0.0,
            outlier_fraction: 0.03,
            outlier_scale: 3.0,
            gap_fraction: 0.02,
            sigma_columns: false,
            flag_column: false,
            mask_column: false,
            length_unit: LengthUnit::Mm,
            velocity_unit: VelocityUnit::MPerS,
            y_down: false,
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
    /// True when frames have a phase: a periodic scenario, or a pulsing vortex.
    pub(crate) fn periodic(&self) -> bool {
        self.scenario.periodic() || (self.scenario == Scenario::Vortex && self.pulse.is_some())
    }

    /// Checks the options; errors are usage errors naming the option.
    pub(crate) fn validate(&self) -> Result<()> {
        if self.mask_column && self.format != OutFormat::Csv {
            return Err(Error::usage("--mask-column is written in csv frames only"));
        }
        if self.frames == 0 {
            return Err(Error::usage("frames must be at least 1"));
        }
        if self.speeds.is_empty() {
            return Err(Error::usage("give at least one speed"));
        }
        self.check_corruption()?;
        self.check_scenario()?;
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
        self.check_acquisition()?;
        self.check_output()
    }

    /// Checks the measurement errors: outliers, gaps and noise.
    fn check_corruption(&self) -> Result<()> {
        fraction("outlier fraction", self.outlier_fraction)?;
        if !(0.0..=super::corrupt::MAX_NOISE_CORRELATION).contains(&self.noise_correlation) {
            return Err(Error::usage(format!(
                "noise correlation = {} must lie between 0 and 0.7071 (1/sqrt 2)",
                self.noise_correlation
            )));
        }
        fraction("gap fraction", self.gap_fraction)?;
        if self.noise_window > 16 {
            return Err(Error::usage(format!(
                "noise window = {} sub-cells must lie between 0 and 16 (overlap at most 94 %)",
                self.noise_window
            )));
        }
        if !(0.0..1.0).contains(&self.noise_memory) {
            return Err(Error::usage(format!(
                "noise memory = {} must lie in [0, 1)",
                self.noise_memory
            )));
        }
        if self.noise_correlation > 0.0 && super::noise::structured(self) {
            return Err(Error::usage(
                "noise correlation cannot be combined with window noise or noise memory",
            ));
        }
        Ok(())
    }

    /// Checks the flow's options: stream, core radius and pulse.
    fn check_scenario(&self) -> Result<()> {
        if !(self.stream.is_finite() && self.stream >= 0.0) {
            return Err(Error::usage(format!(
                "stream = {} m/s must be zero or positive",
                self.stream
            )));
        }
        if let Some(c) = self.core_pitches {
            positive("core radius", c)?;
        }
        if let Some((a, f)) = self.pulse {
            fraction("pulse amplitude", a)?;
            positive("pulse frequency", f)?;
        }
        Ok(())
    }

    /// Checks the camera, the flow's sizes and the outliers' scale.
    fn check_acquisition(&self) -> Result<()> {
        for (n, v) in [
            ("pixel size", self.pixel_size),
            ("displacement", self.displacement_px),
            ("frame rate", self.frame_rate),
            ("diameter", self.diameter),
            ("strouhal", self.strouhal),
        ] {
            positive(n, v)?;
        }
        if let Some(p) = self.pitch {
            positive("pitch", p)?;
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
        Ok(())
    }

    /// Checks the grid size and what is written: digits, phase bins, campaign name.
    fn check_output(&self) -> Result<()> {
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
        if self.campaign.trim().is_empty() || self.campaign.contains(['"', '\\', '\n']) {
            return Err(Error::usage(format!(
                "campaign name '{}' must not be empty nor contain quotes, backslashes or line breaks",
                self.campaign
            )));
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

/// Usage error unless `v` (option `name`) lies between 0 and 1.
fn fraction(name: &str, v: f64) -> Result<()> {
    if (0.0..=1.0).contains(&v) {
        Ok(())
    } else {
        Err(Error::usage(format!(
            "{name} = {v} must lie between 0 and 1"
        )))
    }
}

/// Usage error unless `v` (option `name`) is a positive number.
fn positive(name: &str, v: f64) -> Result<()> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(Error::usage(format!(
            "{name} = {v} must be a positive number"
        )))
    }
}
