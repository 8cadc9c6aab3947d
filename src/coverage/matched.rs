//! The coverage check of a user's own campaign (`curlew coverage
//! PIPELINE`): a synthetic campaign matched to each run, reduced by the
//! user's own chain of stages, scored like a study cell.
//!
//! Owns: measuring what the match needs from the user's run (by reducing
//! it with their pipeline), building the matched cell, and the section
//! that says how well the uncertainties held. Does not own the scoring
//! (`score`, `cell`) or the output folder (`cli::coverage`).
//!
//! # What is matched, and from what
//!
//! - grid: the run's node count and pitch (x pitch; a different y pitch
//!   is reported as a warning, the synthetic grid is square);
//! - noise: the run's mean per-frame noise estimate (or the fixed
//!   `velocity_noise`), as pixels of displacement at the run's calibration;
//! - error correlation: the window overlap of the pipeline's
//!   `neighbour_correlation` (0: white noise; rho(1) >= 0.625: 75 %
//!   overlap, >= 0.25: 50 %);
//! - fill: the run's fractions of replaced (outliers, injected as random
//!   vectors for the user's validation to find) and filled (gaps) vectors;
//! - frames, and timing: the frame count (or `--frames`), the frame rate of
//!   the frame table's times, the noise memory from the run's effective
//!   sample size (`a = (N - N_eff)/(N + N_eff)`, the AR(1) that gives that
//!   N_eff; Bayley & Hammersley 1946), and, when frames have phases, a
//!   pulsing vortex advancing as many degrees per frame in as many bins;
//! - flow: a Lamb–Oseen vortex at the centre with the run's peak mean
//!   vorticity `w0` (|omega_mean| at its maximum) in a stream of the run's
//!   median mean speed `U`; its core radius gives a peak swirl of `U/2`
//!   (`rc = U / (2 * 0.319 w0)`, from `w0 = Gamma/(pi rc²)` and the peak
//!   swirl `0.638 Gamma/(2 pi rc)`, Saffman 1992), kept between 1.5 and
//!   a sixth of the domain's smaller side in pitches.
//!
//! The stage sections of the user's pipeline (everything but `[campaign]`,
//! `[input]`, `[[run]]`, `[[compare]]`, `[output]`, `[figures]`, and the
//! probes of `[statistics]`) reduce the matched campaign unchanged.

use std::path::Path;

use super::cell::{self, Cell, Row};
use super::score::verdict;
use crate::error::{Error, Result};
use crate::plan::{Plan, RunPlan};
use crate::reduce::{self, Options};
use crate::stencil::correlation::Correlation;
use crate::synth::{Scenario, SynthOptions};

/// What the match took from one run of the user's campaign.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Measured {
    /// The run's id (`[[run]] id`).
    pub run: String,
    /// Nodes along x of the run's grid, and of the matched one.
    pub nx: usize,
    /// Nodes along y of the run's grid, and of the matched one.
    pub ny: usize,
    /// The run's x pitch, m (the matched grid is square).
    pub pitch: f64,
    /// Frames per matched replica: the run's count, or `--frames`.
    pub frames: usize,
    /// Noise of each component, m/s.
    pub noise: f64,
    /// Window overlap of the matched noise (0, 0.5, 0.75).
    pub overlap: f64,
    /// The run's fraction of vectors replaced after validation, injected
    /// as random outliers.
    pub outlier_fraction: f64,
    /// The run's fraction of invalid input vectors filled, injected as
    /// gaps.
    pub gap_fraction: f64,
    /// Frames per second: from the median step of the frame table's times,
    /// 15 when the frames have none.
    pub frame_rate: f64,
    /// AR(1) coefficient of the matched noise from frame to frame,
    /// `(N - N_eff)/(N + N_eff)` clamped to [0, 0.95]; 0 without times or
    /// an effective sample size.
    pub memory: f64,
    /// Phase bins and degrees per frame, when frames have phases.
    pub phase: Option<(usize, f64)>,
    /// Median of the mean speed |(u_mean, v_mean)| over the nodes, m/s:
    /// the matched stream.
    pub mean_speed: f64,
    /// Largest |omega_mean| of the run, 1/s: the matched vortex's peak.
    pub peak_vorticity: f64,
    /// The matched vortex's core radius, pitches.
    pub core_pitches: f64,
    /// What could not be matched exactly (a different y pitch, …).
    pub warnings: Vec<String>,
}

/// One run's check: what was matched and the scored rows.
#[derive(Debug, Clone)]
pub struct Checked {
    /// What was taken from the run.
    pub measured: Measured,
    /// The scored rows of the matched campaign (`coverage.csv`).
    pub rows: Vec<Row>,
}

/// How to check.
#[derive(Debug, Clone)]
pub struct CheckOptions {
    /// Frames per replica (default: the run's).
    pub frames: Option<usize>,
    /// Seed of the first replica (`--seed`, default 1).
    pub seed: u64,
    /// Synthetic replicas per run (`--replicas`, default 4).
    pub replicas: usize,
    /// Runs to check (empty: every run).
    pub runs: Vec<String>,
}

impl Default for CheckOptions {
    fn default() -> Self {
        CheckOptions {
            frames: None,
            seed: 1,
            replicas: 4,
            runs: Vec::new(),
        }
    }
}

/// Checks every selected run of the plan; `work` is a scratch folder.
pub fn check(plan: &Plan, opts: &CheckOptions, work: &Path) -> Result<Vec<Checked>> {
    let stages = stage_sections(&plan.text)?;
    let mut out = Vec::new();
    for (k, rp) in plan.select_runs(&opts.runs)?.into_iter().enumerate() {
        let m = measure(rp)?;
        let c = matched_cell(&m, rp, &stages, opts);
        let rows = cell::run(&c, &work.join(format!("run{k}")))?;
        out.push(Checked { measured: m, rows });
    }
    Ok(out)
}

/// The user's stage sections as TOML (module doc).
pub(crate) fn stage_sections(text: &str) -> Result<String> {
    let mut t: toml::Table = text
        .parse()
        .map_err(|e| Error::usage(format!("the pipeline is not valid TOML: {e}")))?;
    for k in ["campaign", "input", "run", "compare", "output", "figures"] {
        t.remove(k);
    }
    if let Some(toml::Value::Table(s)) = t.get_mut("statistics") {
        s.remove("probes");
    }
    toml::to_string(&t).map_err(|e| Error::usage(format!("the pipeline cannot be rewritten: {e}")))
}

/// Reduces the user's run and measures what the match needs.
pub(crate) fn measure(rp: &RunPlan) -> Result<Measured> {
    let jobs = std::thread::available_parallelism().map_or(1, |n| n.get());
    let red = reduce::reduce_run(
        rp,
        &Options {
            jobs,
            shard: None,
            progress: None,
            frame_fields_dir: None,
        },
    )?;
    let stats = red.state.acc.finish(&rp.stats);
    let g = red.grid;
    let mut warnings = Vec::new();
    if (g.dy - g.dx).abs() > 1e-6 * g.dx {
        warnings.push(format!(
            "the run's pitches differ (dx {} m, dy {} m); the matched grid uses dx",
            g.dx, g.dy
        ));
    }
    let n = red.state.frames.len().max(1);
    let nodes = (g.len() * n) as f64;
    let replaced: usize = red.state.frames.iter().map(|f| f.fill.replaced).sum();
    let filled: usize = red.state.frames.iter().map(|f| f.fill.filled).sum();
    let noise = match rp.derive.velocity_noise {
        crate::derive::VelocityNoise::Value(x) => x,
        _ => reduce::mean_noise(&red.state.frames).ok_or_else(|| {
            Error::data(format!(
                "run '{}': no noise estimate to match (set [uncertainty] velocity_noise)",
                rp.id
            ))
        })?,
    };
    let overlap = match rp.derive.correlation {
        Correlation::Window(c) => window_overlap(c),
        Correlation::Adjacent(r) => window_overlap(r),
        _ => 0.0,
    };
    let (frame_rate, memory, phase) = timing(&red.state.frames, &stats);
    let (mean_speed, peak_vorticity, core_pitches) = flow_scale(&stats, g);
    Ok(Measured {
        run: rp.id.clone(),
        nx: g.nx,
        ny: g.ny,
        pitch: g.dx,
        frames: n,
        noise,
        overlap,
        outlier_fraction: replaced as f64 / nodes,
        gap_fraction: filled as f64 / nodes,
        frame_rate,
        memory,
        phase,
        mean_speed,
        peak_vorticity,
        core_pitches,
        warnings,
    })
}

/// The run's frame rate (15 Hz without frame times), its noise memory
/// (the AR(1) coefficient that gives its effective sample size; 0 without
/// times for every frame) and, when every frame has a phase, the bin count
/// and the median phase step in degrees.
fn timing(
    frames: &[crate::result::FrameRecord],
    stats: &crate::stats::RunStats,
) -> (f64, f64, Option<(usize, f64)>) {
    let n = frames.len().max(1);
    let times: Vec<f64> = frames.iter().filter_map(|f| f.meta.time_s).collect();
    let frame_rate = median_step(&times).map_or(15.0, |dt| 1.0 / dt);
    let memory = match stats.n_eff {
        Some(ne) if ne.is_finite() && ne > 0.0 && times.len() == n => {
            ((n as f64 - ne) / (n as f64 + ne)).clamp(0.0, 0.95)
        }
        _ => 0.0,
    };
    let phases: Vec<f64> = frames.iter().filter_map(|f| f.meta.phase_deg).collect();
    let phase = (phases.len() == n && !stats.phase.is_empty()).then(|| {
        let steps: Vec<f64> = phases
            .windows(2)
            .map(|w| (w[1] - w[0]).rem_euclid(360.0))
            .collect();
        let mut s = steps.clone();
        (stats.phase.len(), super::score::median(&mut s))
    });
    (frame_rate, memory, phase)
}

/// The run's median mean speed, its peak mean vorticity (|omega_mean| at
/// its maximum) and the matched vortex's core radius in pitches.
fn flow_scale(stats: &crate::stats::RunStats, g: crate::field::Grid) -> (f64, f64, f64) {
    let e = &stats.ensemble;
    let col = |name: &str| e.get(name).map(|c| c.to_vec()).unwrap_or_default();
    let (u, v, w) = (col("u_mean"), col("v_mean"), col("omega_mean"));
    let mut speeds: Vec<f64> = u
        .iter()
        .zip(&v)
        .map(|(a, b)| a.hypot(*b))
        .filter(|s| s.is_finite())
        .collect();
    let mean_speed = super::score::median(&mut speeds);
    let peak_vorticity = w
        .iter()
        .filter(|x| x.is_finite())
        .fold(0.0f64, |m, x| m.max(x.abs()));
    let lim = (g.nx.min(g.ny) as f64 / 6.0).max(1.5);
    let core_pitches = if peak_vorticity > 0.0 && mean_speed > 0.0 {
        (mean_speed / (2.0 * 0.319 * peak_vorticity) / g.dx).clamp(1.5, lim)
    } else {
        4.0f64.min(lim)
    };
    (mean_speed, peak_vorticity, core_pitches)
}

/// The window overlap whose lag-one correlation is nearest `rho` among
/// 0, 0.5 and 0.75.
fn window_overlap(rho: f64) -> f64 {
    if rho >= 0.625 {
        0.75
    } else if rho >= 0.25 {
        0.5
    } else {
        0.0
    }
}

/// The median of successive differences, if positive.
fn median_step(t: &[f64]) -> Option<f64> {
    let mut d: Vec<f64> = t.windows(2).map(|w| w[1] - w[0]).collect();
    let m = super::score::median(&mut d);
    (m.is_finite() && m > 0.0).then_some(m)
}

/// The cell matched to a measured run.
pub(crate) fn matched_cell(m: &Measured, rp: &RunPlan, stages: &str, opts: &CheckOptions) -> Cell {
    let peak = 0.5 * m.mean_speed.max(1e-12);
    let swirl = if m.mean_speed > 0.0 { peak } else { 0.1 };
    let mut o = SynthOptions {
        scenario: Scenario::Vortex,
        frames: opts.frames.unwrap_or(m.frames).max(2),
        seed: opts.seed,
        nx: Some(m.nx),
        ny: Some(m.ny),
        pitch: Some(m.pitch),
        speeds: vec![swirl],
        stream: m.mean_speed.max(0.0),
        core_pitches: Some(m.core_pitches),
        frame_rate: m.frame_rate,
        noise_window: super::super::synth::noise::window_of_overlap(m.overlap).unwrap_or(0),
        noise_memory: m.memory,
        outlier_fraction: m.outlier_fraction,
        gap_fraction: m.gap_fraction,
        noise_px: 1.0,
        ..SynthOptions::default()
    };
    if let Some((bins, step)) = m.phase {
        o.phase_bins = bins;
        o.pulse = Some((0.3, step / 360.0 * m.frame_rate));
    }
    // the run's calibration: pulse separation giving its m/s per pixel
    let peak_speed = swirl + o.stream;
    if let Some(pv) = rp.px_velocity {
        o.displacement_px = (peak_speed / pv).max(1e-3);
    }
    // noise in pixels at the matched calibration
    if let Ok(runs) = o.runs() {
        if let Some(s) = runs.first() {
            o.noise_px = m.noise / s.px_velocity;
        }
    }
    Cell {
        name: format!("matched-{}", m.run),
        synth: o,
        replicas: opts.replicas.max(2),
        stages: stages.to_string(),
        instantaneous: m.phase.is_none(),
    }
}

/// The report section (markdown) of the checked runs.
pub fn section(checked: &[Checked], command: &str) -> String {
    use std::fmt::Write as _;
    let mut s = String::from("## How well the uncertainties held (coverage check)\n\n");
    let _ = writeln!(
        s,
        "Made by `{command}`: for each run a synthetic campaign matched to it (grid, noise, \
         error correlation, filled fraction, frames and timing, the same pipeline stages) around \
         a Lamb-Oseen vortex in a stream sized from the run's mean field, reduced with this \
         pipeline and compared with its analytic truth. Coverage is the fraction of nodes where \
         the actual error lies within 2 standard uncertainties (target 0.93-0.97); the width \
         ratio is the median uncertainty over the RMS actual error (target 0.8-1.25). \
         The method and its limits: docs/uncertainty.md.\n"
    );
    for c in checked {
        let m = &c.measured;
        let _ = writeln!(
            s,
            "### Run {}\n\nMatched: {} x {} nodes at {:.4} mm, {} frames, noise {:.3e} m/s, \
             window overlap {:.0} %, outliers {:.2} %, gaps {:.2} %, frame rate {:.3} Hz, \
             noise memory a = {:.2}{}; vortex core {:.2} pitches, peak mean vorticity {:.4e} 1/s, \
             stream {:.4e} m/s.\n",
            m.run,
            m.nx,
            m.ny,
            m.pitch * 1e3,
            m.frames,
            m.noise,
            100.0 * m.overlap,
            100.0 * m.outlier_fraction,
            100.0 * m.gap_fraction,
            m.frame_rate,
            m.memory,
            m.phase
                .map(|(b, d)| format!(", {b} phase bins at {d:.1} degrees per frame"))
                .unwrap_or_default(),
            m.core_pitches,
            m.peak_vorticity,
            m.mean_speed
        );
        for w in &m.warnings {
            let _ = writeln!(s, "- warning: {w}");
        }
        s.push_str("| table | column | region | n | coverage (k=2) | width ratio | verdict |\n");
        s.push_str("|---|---|---|---:|---:|---:|---|\n");
        for r in c.rows.iter().filter(|r| super::study::shown(r)) {
            let f = |x: f64| {
                if x.is_finite() {
                    format!("{x:.3}")
                } else {
                    "-".into()
                }
            };
            let _ = writeln!(
                s,
                "| {} | {} | {} | {} | {} | {} | {} |",
                r.table,
                r.column,
                r.region,
                r.score.n,
                f(r.score.coverage),
                f(r.score.ratio),
                verdict(&r.score).name()
            );
        }
        s.push('\n');
    }
    s
}
