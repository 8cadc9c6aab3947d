//! `curlew synth SCENARIO --out DIR`: writes a synthetic campaign with
//! analytic ground truth and a ready pipeline file (layout in the library's
//! `synth` module doc), then prints a short summary.

use std::path::PathBuf;
use std::time::Instant;

use curlew::synth::{
    self, LengthUnit, OutFormat, Scenario, SynthOptions, SynthSummary, VelocityUnit,
};
use curlew::{Error, Result};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The flow: wake (vortex street behind a cylinder, periodic), vortex
    /// (steady Lamb-Oseen), solid-body, cylinder (potential flow), taylor-green,
    /// uniform, diffusing-vortex (Lamb-Oseen in still water; with a high
    /// --frame-rate, time-resolved), burgers (steady Burgers vortex).
    #[arg(value_parser = parse::<Scenario>)]
    pub scenario: Scenario,
    /// Output folder; it appears only when complete.
    #[arg(long)]
    pub out: PathBuf,
    /// Frames per run.
    #[arg(long, default_value_t = 100)]
    pub frames: usize,
    /// Seed of every random draw; the same seed gives identical files.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Free-stream speeds (or the scenario's velocity scale), m/s, one run each.
    /// Default: 0.15,0.30 for wake, 0.2 otherwise.
    #[arg(long, value_delimiter = ',')]
    pub speeds: Vec<f64>,
    /// Nodes along x (default: 40 for wake, 48 otherwise).
    #[arg(long)]
    pub nx: Option<usize>,
    /// Nodes along y (default: 25 for wake, 36 otherwise).
    #[arg(long)]
    pub ny: Option<usize>,
    /// Grid pitch, mm (default: 2 for wake, 1 otherwise).
    #[arg(long)]
    pub pitch_mm: Option<f64>,
    /// Cylinder diameter for wake and cylinder, mm.
    #[arg(long, default_value_t = 10.0)]
    pub diameter_mm: f64,
    /// Strouhal number of the shedding (wake).
    #[arg(long, default_value_t = 0.21)]
    pub strouhal: f64,
    /// Convection speed of the vortex street as a fraction of the free stream (wake).
    #[arg(long, default_value_t = 0.85)]
    pub convection: f64,
    /// Random error of each component, pixels of displacement.
    #[arg(long, default_value_t = 0.1)]
    pub noise_px: f64,
    /// Correlation coefficient of the noise of adjacent vectors (0 to 0.707),
    /// as overlapping interrogation windows make it; written into the pipeline.
    #[arg(long, default_value_t = 0.0)]
    pub noise_correlation: f64,
    /// Overlap of the interrogation windows whose averaging correlates the noise
    /// (0, 0.5 or 0.75: each error is the mean over a window of 1/(1-overlap)
    /// sub-cells per axis). Not with --noise-correlation.
    #[arg(long, default_value_t = 0.0)]
    pub noise_overlap: f64,
    /// AR(1) coefficient of the noise from frame to frame (0 to below 1), as a
    /// time-resolved camera sees it.
    #[arg(long, default_value_t = 0.0)]
    pub noise_memory: f64,
    /// Core radius of the vortex scenario in grid pitches (default: an eighth
    /// of the domain height).
    #[arg(long)]
    pub core_pitches: Option<f64>,
    /// Fraction of vectors per frame replaced by random vectors.
    #[arg(long, default_value_t = 0.03)]
    pub outliers: f64,
    /// Largest outlier magnitude, in multiples of the local speed.
    #[arg(long, default_value_t = 3.0)]
    pub outlier_scale: f64,
    /// Fraction of vectors per frame that are gaps (missing rows or empty cells).
    #[arg(long, default_value_t = 0.02)]
    pub gaps: f64,
    /// Also write sigma_u, sigma_v columns (the noise standard deviation);
    /// the pipeline then takes the velocity noise from them.
    #[arg(long)]
    pub sigma_columns: bool,
    /// Also write a flag column; a third of the gaps become flagged rows
    /// (a value written with flag = 1).
    #[arg(long)]
    pub flag_column: bool,
    /// Write the nodes inside a body as rows with mask = 1 and empty u, v
    /// (instead of leaving them out); the pipeline masks by that column.
    #[arg(long)]
    pub mask_column: bool,
    /// Camera calibration, micrometres per pixel.
    #[arg(long, default_value_t = 40.0)]
    pub pixel_um: f64,
    /// Displacement of the peak speed between the exposures, pixels (sets each
    /// run's pulse separation).
    #[arg(long, default_value_t = 8.0)]
    pub displacement_px: f64,
    /// Frames per second.
    #[arg(long, default_value_t = 15.0)]
    pub frame_rate: f64,
    /// Unit of the written x, y: m, mm or px.
    #[arg(long, default_value = "mm", value_parser = parse::<LengthUnit>)]
    pub length_unit: LengthUnit,
    /// Unit of the written u, v: m/s, mm/s or px (displacement between exposures).
    #[arg(long, default_value = "m/s", value_parser = parse::<VelocityUnit>)]
    pub velocity_unit: VelocityUnit,
    /// Which way the written y and v point: up, or down as in image
    /// coordinates (the files then hold minus the flow's y and v).
    #[arg(long, default_value = "up", value_parser = ["up", "down"])]
    pub y_axis: String,
    /// csv (one file per frame) or parquet (one long table per run).
    #[arg(long, default_value = "csv", value_parser = parse_format)]
    pub format: OutFormat,
    /// Significant digits of printed values; 16 or more: exact (bigger files).
    #[arg(long, default_value_t = 5)]
    pub digits: u32,
    /// Do not write the truth folders.
    #[arg(long)]
    pub no_truth: bool,
    /// Also write every frame's noise-free field under truth/fields/ (one file per frame).
    #[arg(long)]
    pub truth_frames: bool,
    /// Phase bins of the pipeline and of truth/phase.csv (periodic scenarios).
    #[arg(long, default_value_t = 12)]
    pub phase_bins: usize,
    /// Campaign name in the pipeline (default: synth-SCENARIO).
    #[arg(long)]
    pub campaign: Option<String>,
    /// Also write the pipeline to this file, with paths relative to its folder.
    #[arg(long)]
    pub pipeline: Option<PathBuf>,
    /// Replace an existing output folder (only once the new one is complete).
    #[arg(long)]
    pub force: bool,
}

fn parse<T: std::str::FromStr<Err = Error>>(s: &str) -> std::result::Result<T, String> {
    s.parse::<T>().map_err(|e| e.message)
}

fn parse_format(s: &str) -> std::result::Result<OutFormat, String> {
    match s {
        "csv" => Ok(OutFormat::Csv),
        "parquet" => Ok(OutFormat::Parquet),
        o => Err(format!(
            "format '{o}' is not known; expected csv or parquet"
        )),
    }
}

/// Writes the synthetic campaign the arguments describe and prints its
/// summary.
pub fn run(args: Args) -> Result<()> {
    let opts = options(&args)?;
    let t0 = Instant::now();
    let s = synth::generate(&opts, &args.out)?;
    let secs = t0.elapsed().as_secs_f64();
    print_summary(&opts, &s, secs);
    Ok(())
}

/// The generator's options from the command-line arguments (lengths in
/// metres).
fn options(args: &Args) -> Result<SynthOptions> {
    let speeds = if !args.speeds.is_empty() {
        args.speeds.clone()
    } else if args.scenario == Scenario::Wake {
        vec![0.15, 0.30]
    } else {
        vec![0.2]
    };
    Ok(SynthOptions {
        scenario: args.scenario,
        frames: args.frames,
        seed: args.seed,
        nx: args.nx,
        ny: args.ny,
        pitch: args.pitch_mm.map(|p| p / 1e3),
        speeds,
        diameter: args.diameter_mm / 1e3,
        strouhal: args.strouhal,
        convection: args.convection,
        pixel_size: args.pixel_um / 1e6,
        displacement_px: args.displacement_px,
        frame_rate: args.frame_rate,
        noise_px: args.noise_px,
        noise_correlation: args.noise_correlation,
        noise_window: curlew::synth::noise::window_of_overlap(args.noise_overlap)?,
        noise_memory: args.noise_memory,
        core_pitches: args.core_pitches,
        pulse: None,
        stream: 0.0,
        outlier_fraction: args.outliers,
        outlier_scale: args.outlier_scale,
        gap_fraction: args.gaps,
        sigma_columns: args.sigma_columns,
        flag_column: args.flag_column,
        mask_column: args.mask_column,
        length_unit: args.length_unit,
        velocity_unit: args.velocity_unit,
        y_down: args.y_axis == "down",
        format: args.format,
        digits: args.digits,
        truth: !args.no_truth,
        truth_frames: args.truth_frames,
        phase_bins: args.phase_bins,
        campaign: args
            .campaign
            .clone()
            .unwrap_or_else(|| format!("synth-{}", args.scenario.name())),
        force: args.force,
        command: Some(typed_command()),
        pipeline_copy: args.pipeline.clone(),
    })
}

/// The command as typed, without --force (so that regenerating with
/// --force writes identical files), the program named `curlew` and words
/// other than plain ones quoted.
fn typed_command() -> String {
    let mut command = std::env::args()
        .filter(|a| a != "--force")
        .map(|a| {
            if a.chars()
                .all(|c| c.is_ascii_alphanumeric() || "-_./,=:".contains(c))
            {
                a
            } else {
                format!("'{a}'")
            }
        })
        .collect::<Vec<_>>();
    if let Some(first) = command.first_mut() {
        *first = "curlew".into();
    }
    command.join(" ")
}

/// Prints what was written: the campaign, each run's frames, grid, noise
/// and corruption counts, and the pipeline's path.
fn print_summary(opts: &SynthOptions, s: &SynthSummary, secs: f64) {
    let total: u64 = s.runs.iter().map(|r| r.bytes).sum();
    println!(
        "wrote {} scenario '{}' to {} in {:.2} s ({:.1} MB of frames)",
        opts.scenario.name(),
        opts.campaign,
        s.out.display(),
        secs,
        total as f64 / 1e6
    );
    for r in &s.runs {
        println!(
            "  run {}: {} frames of {} x {} at {} mm, pulse separation {} ms, noise {:.3e} m/s; {} outliers, {} missing, {} empty, {} flagged",
            r.id,
            r.frames,
            r.grid.nx,
            r.grid.ny,
            r.grid.dx * 1e3,
            r.pulse_separation * 1e3,
            r.noise_sigma,
            r.n_outliers,
            r.n_missing,
            r.n_empty,
            r.n_flagged
        );
    }
    println!("  pipeline: {}", s.pipeline.display());
    if let Some(p) = &opts.pipeline_copy {
        println!("  pipeline copy: {}", p.display());
    }
}
