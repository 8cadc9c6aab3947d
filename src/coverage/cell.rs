//! One cell of a coverage study: a synthetic campaign with known truth,
//! reduced by the real pipeline, every uncertainty column scored.
//!
//! Owns: making the replicas of a cell (`synth::generate`, parquet, SI),
//! the pipeline that reduces them (the cell's stage sections over an
//! `[input]` and `[[run]]`s of our own), reducing them through
//! `reduce::reduce_run` and the statistics' `finish` (the same library
//! calls `curlew run` makes; no subprocess), and turning outputs and truth
//! into scored pairs. Does not own: the scoring rule (`score`), the matrix
//! (`study`).
//!
//! # What "actual error" means, per column
//!
//! Node sets: every node of every replica where the column and its error
//! are finite; regions split them (module `region`).
//!
//! - `X_mean_unc` (u, v and each quantity): `X_mean - truth`, the truth
//!   being the analytic value of a steady flow; for a pulsing flow the
//!   analytic average over a whole period (the ensemble mean estimates the
//!   time average: the flow's own sampling over the frames is part of its
//!   uncertainty) or over the phase interval of the bin (a bin's mean
//!   estimates the phase average over its window). The default phase
//!   window (the whole bin) is assumed.
//! - `X_mean_unc_p95`: the same error, read as an expanded 95 % interval.
//! - `X_std_unc`, `uv_cov_unc`: the population value is not known in closed
//!   form once noise passes a smoother and a stencil, so it is estimated
//!   from the other replicas (leave one out): `e_r = s_r - sqrt(mean over
//!   r' != r of s_r'²)` (for the covariance, the mean of the others). The
//!   other replicas' estimate has its own error, about `u / sqrt(R - 1)`,
//!   independent of `e_r`'s, so the reported `u` is scored as
//!   `u sqrt(R / (R - 1))` (the standard deviation of the difference of two
//!   independent estimates when `u` is right).
//! - `omega_inst_unc`: per frame, `omega_k - truth` at every valid node of
//!   every frame (read from the per-frame fields the run writes), against
//!   the node's `omega_inst_unc`. Steady cells only.
//! - `X_inst_unc` of the other quantities and of u, v: width only, from the
//!   identity `mean_k (x_k - t)² = (N-1)/N s² + (mean - t)²` per node
//!   (steady cells); coverage is not scored (NaN).
//! - `X_bias`: the systematic error of the mean, `mean over replicas of
//!   (X_mean - truth)` per node. That average still holds the replicas'
//!   random error divided by `sqrt(R)`, so it is scored against
//!   `sqrt(b² + r² / R)`, with `b` the mean over replicas of `X_bias` and
//!   `r²` the mean over replicas of the random part of `X_mean_unc`,
//!   `X_mean_unc² - X_bias²` (itself scored in the `X_mean_unc` rows). Where
//!   the true systematic error is far below `r / sqrt(R)` (a uniform stream
//!   has none) the row checks only that `X_bias` is not too large; where it
//!   is above, the row checks `X_bias`. Scored against `b` alone, as before
//!   2026-12-05, the noise of the average made 828 of 1080 bias rows "too
//!   small", the uniform stream's among them.

use std::path::{Path, PathBuf};

use super::region::{self, Region};
use super::score::{score, Reading, Score};
use super::truth::{self, Truth};
use crate::error::{Error, Result};
use crate::field::{NodeTable, VALID};
use crate::io::{self, Values};
use crate::plan::Plan;
use crate::reduce::{self, Options};
use crate::stats::RunStats;
use crate::synth::{self, OutFormat, RunSetup, SynthOptions};

/// The synthetic campaign and the pipeline of one cell.
#[derive(Debug, Clone)]
pub struct Cell {
    /// Short name, unique in a study (e.g. `vortex-1.5h/white/lsq`).
    pub name: String,
    /// The campaign: scenario, grid, noise, gaps, frames, timing. Seeds
    /// follow from `synth.seed` per replica; format, units and truth
    /// writing are set by the cell.
    pub synth: SynthOptions,
    /// Independent campaigns (replicas) reduced and pooled (>= 2 for the
    /// std and covariance columns).
    pub replicas: usize,
    /// The pipeline's stage sections (`[validation]`, `[fill]`,
    /// `[smoothing]`, `[derivatives]`, `[uncertainty]`, `[statistics]`,
    /// `[phase]`) as TOML; no `[campaign]`, `[input]` or `[[run]]`.
    pub stages: String,
    /// Also score `omega_inst_unc` per frame (writes every frame's field).
    pub instantaneous: bool,
}

/// One scored column in one region of one table.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Row {
    /// The cell's name (`Cell::name`; for `curlew coverage`, the run id).
    pub cell: String,
    /// `ensemble` or `phase` (all bins pooled).
    pub table: String,
    /// The scored uncertainty column, e.g. `omega_mean_unc`.
    pub column: String,
    /// The nodes scored: `all`, `interior`, `edge`, `core` (near the
    /// vortex core) or `far`.
    pub region: String,
    /// Coverage, error-to-uncertainty ratio and counts of the pairs
    /// (flattened into the `coverage.csv` row).
    #[serde(flatten)]
    pub score: Score,
}

/// A reduced replica: its statistics and, when asked, its per-frame fields.
struct Replica {
    stats: RunStats,
    fields: Option<PathBuf>,
    frames: usize,
}

/// Runs the cell in `work` (a scratch folder it may fill) and scores it.
pub fn run(cell: &Cell, work: &Path) -> Result<Vec<Row>> {
    if cell.replicas < 2 {
        return Err(Error::usage(format!(
            "cell '{}': at least 2 replicas are needed",
            cell.name
        )));
    }
    let opts = synth_options(cell);
    let setup = opts
        .runs()?
        .into_iter()
        .next()
        .ok_or_else(|| Error::usage("a coverage cell needs one speed"))?;
    let mut reps = Vec::with_capacity(cell.replicas);
    for r in 0..cell.replicas {
        reps.push(reduce_replica(cell, &opts, &setup, r, work)?);
    }
    Ok(score_cell(cell, &opts, &setup, &reps))
}

/// The synth options of the cell's campaign (parquet, SI, no truth files).
pub(crate) fn synth_options(cell: &Cell) -> SynthOptions {
    let mut o = cell.synth.clone();
    o.format = OutFormat::Parquet;
    o.length_unit = synth::LengthUnit::M;
    o.velocity_unit = synth::VelocityUnit::MPerS;
    o.truth = false;
    o.truth_frames = false;
    o.digits = 17;
    o.force = true;
    o.campaign = "coverage".into();
    o.speeds.truncate(1);
    o
}

/// The pipeline text reducing replica folder `dir` (relative to the
/// pipeline) with the cell's stages.
pub(crate) fn pipeline_text(
    cell: &Cell,
    opts: &SynthOptions,
    setup: &RunSetup,
    dir: &str,
) -> String {
    let (frames, table) = synth::pipeline::run_paths(opts, &setup.id);
    format!(
        "[campaign]\nname = \"coverage\"\n\n[input]\nformat = \"parquet\"\n\
         columns = {{ x = \"x\", y = \"y\", u = \"u\", v = \"v\" }}\nlength_unit = \"m\"\n\
         velocity_unit = \"m/s\"\npixel_size = {:e}\npulse_separation = {:e}\n\n{}\n\n\
         [output]\nfigures = false\n\n[[run]]\nid = \"{}\"\nframes = \"{dir}/{frames}\"\n\
         frame_table = \"{dir}/{table}\"\n",
        opts.pixel_size, setup.pulse_separation, cell.stages, setup.id
    )
}

fn reduce_replica(
    cell: &Cell,
    opts: &SynthOptions,
    setup: &RunSetup,
    r: usize,
    work: &Path,
) -> Result<Replica> {
    let mut o = opts.clone();
    o.seed = opts.seed.wrapping_add(7919 * r as u64);
    let dir = format!("rep{r}");
    synth::generate(&o, &work.join(&dir))?;
    let text = pipeline_text(cell, &o, setup, &dir);
    let pp = work.join(format!("rep{r}.toml"));
    let plan = Plan::from_str(&text, &pp)?;
    let rp = &plan.runs[0];
    let fields = cell
        .instantaneous
        .then(|| work.join(format!("rep{r}-fields")));
    if let Some(f) = &fields {
        if f.exists() {
            std::fs::remove_dir_all(f).map_err(|e| Error::io(f, e))?;
        }
        std::fs::create_dir_all(f).map_err(|e| Error::io(f, e))?;
    }
    let jobs = std::thread::available_parallelism().map_or(1, |n| n.get());
    let red = reduce::reduce_run(
        rp,
        &Options {
            jobs,
            shard: None,
            progress: None,
            frame_fields_dir: fields.clone(),
        },
    )?;
    let frames = red.state.frames.iter().filter(|f| !f.rejected).count();
    Ok(Replica {
        stats: red.state.acc.finish(&rp.stats),
        fields,
        frames,
    })
}

/// Pairs of (error, uncertainty) gathered per (table, column, region), in
/// first-seen order.
#[derive(Default)]
struct Pairs {
    keys: Vec<(String, String, String, Reading)>,
    vals: Vec<Vec<(f64, f64)>>,
}

impl Pairs {
    fn add(&mut self, table: &str, column: &str, region: &str, reading: Reading, e: f64, u: f64) {
        let pos = self
            .keys
            .iter()
            .position(|(t, c, r, _)| t == table && c == column && r == region);
        let k = match pos {
            Some(k) => k,
            None => {
                self.keys
                    .push((table.into(), column.into(), region.into(), reading));
                self.vals.push(Vec::new());
                self.keys.len() - 1
            }
        };
        self.vals[k].push((e, u));
    }

    /// Adds the pair to every region the node belongs to.
    #[allow(clippy::too_many_arguments)]
    fn add_node(
        &mut self,
        regions: &[Region],
        node: usize,
        table: &str,
        column: &str,
        reading: Reading,
        e: f64,
        u: f64,
    ) {
        for r in regions.iter().filter(|r| r.contains(node)) {
            self.add(table, column, r.name, reading, e, u);
        }
    }
}

/// The quantities of the run that have a truth, u and v first.
fn scored_quantities(t: &NodeTable) -> Vec<String> {
    let mut out = vec!["u".to_string(), "v".to_string()];
    for q in truth::QUANTITIES {
        if t.get(&format!("{q}_mean")).is_some() {
            out.push(q.to_string());
        }
    }
    out
}

fn col<'a>(t: &'a NodeTable, name: &str) -> Option<&'a [f64]> {
    t.get(name)
}

fn score_cell(cell: &Cell, opts: &SynthOptions, setup: &RunSetup, reps: &[Replica]) -> Vec<Row> {
    let regions = region::regions(setup);
    let mut pairs = Pairs::default();
    // targets (module doc): a steady flow's value; for a pulsing flow the
    // average over a period (ensemble) or over a bin's phases (phase table)
    let pulse = truth::pulse_frequency(setup);
    let t_all = match pulse {
        Some(f) => truth::over_times(setup, opts, &truth::phase_times(f, 0.0, 360.0, 96)),
        None => truth::over_times(setup, opts, &[0.0]),
    };
    let ens: Vec<&NodeTable> = reps.iter().map(|r| &r.stats.ensemble).collect();
    score_table(&mut pairs, &regions, "ensemble", &ens, &t_all);
    if opts.periodic() {
        let bins = reps[0].stats.phase.len();
        for b in 0..bins {
            let tabs: Vec<&NodeTable> = reps
                .iter()
                .filter_map(|r| r.stats.phase.get(b).map(|p| &p.table))
                .collect();
            if tabs.len() != reps.len() {
                continue;
            }
            let Some(f) = pulse else { continue };
            let k = reps[0].stats.phase[b].bin as f64;
            let w = 360.0 / opts.phase_bins.max(1) as f64;
            let tb = truth::over_times(
                setup,
                opts,
                &truth::phase_times(f, k * w, (k + 1.0) * w, 16),
            );
            score_table(&mut pairs, &regions, "phase", &tabs, &tb);
        }
    } else {
        score_instantaneous(&mut pairs, &regions, &ens, &t_all, reps);
    }
    pairs
        .keys
        .iter()
        .zip(pairs.vals)
        .map(|((t, c, r, reading), v)| Row {
            cell: cell.name.clone(),
            table: t.clone(),
            column: c.clone(),
            region: r.clone(),
            score: score(v, *reading),
        })
        .collect()
}

/// Means, p95, bias, std and covariance columns of one table (ensemble or
/// one phase bin) over the replicas.
fn score_table(
    pairs: &mut Pairs,
    regions: &[Region],
    label: &str,
    tabs: &[&NodeTable],
    tr: &Truth,
) {
    let nr = tabs.len();
    let inflate = (nr as f64 / (nr as f64 - 1.0)).sqrt();
    let nodes = tr.grid.len();
    for q in scored_quantities(tabs[0]) {
        let Some(t) = tr.mean(&q) else { continue };
        let mean_name = format!("{q}_mean");
        for (suffix, reading) in [
            ("_mean_unc", Reading::Standard),
            ("_mean_unc_p95", Reading::Expanded95),
        ] {
            let name = format!("{q}{suffix}");
            for tab in tabs {
                let (Some(m), Some(u)) = (col(tab, &mean_name), col(tab, &name)) else {
                    continue;
                };
                for k in 0..nodes {
                    pairs.add_node(regions, k, label, &name, reading, m[k] - t[k], u[k]);
                }
            }
        }
        // bias: replica-averaged error of the mean against the mean bias
        // and the noise that average keeps (module docs)
        let bias_name = format!("{q}_bias");
        let unc_name = format!("{q}_mean_unc");
        if tabs.iter().all(|t| col(t, &bias_name).is_some()) {
            for k in 0..nodes {
                let avg = |name: &str, f: &dyn Fn(f64, f64) -> f64| {
                    tabs.iter()
                        .map(|tab| match (col(tab, name), col(tab, &bias_name)) {
                            (Some(x), Some(b)) => f(x[k], b[k]),
                            _ => f64::NAN,
                        })
                        .sum::<f64>()
                        / nr as f64
                };
                let e = avg(&mean_name, &|m, _| m) - t[k];
                let b = avg(&bias_name, &|b, _| b);
                let random2 = avg(&unc_name, &|u, b| {
                    let d = u * u - b * b;
                    if d.is_nan() {
                        f64::NAN
                    } else {
                        d.max(0.0)
                    }
                });
                let u = (b * b + random2 / nr as f64).sqrt();
                pairs.add_node(regions, k, label, &bias_name, Reading::Standard, e, u);
            }
        }
        // std: leave-one-out against the other replicas
        let std_name = format!("{q}_std");
        let unc_name = format!("{q}_std_unc");
        loo(
            pairs, regions, label, tabs, &std_name, &unc_name, true, inflate,
        );
    }
    loo(
        pairs,
        regions,
        label,
        tabs,
        "uv_cov",
        "uv_cov_unc",
        false,
        inflate,
    );
}

/// Leave-one-out scoring of a second-moment column (module doc): `is_std`
/// pools variances and compares square roots, else pools the values.
#[allow(clippy::too_many_arguments)]
fn loo(
    pairs: &mut Pairs,
    regions: &[Region],
    label: &str,
    tabs: &[&NodeTable],
    value: &str,
    unc: &str,
    is_std: bool,
    inflate: f64,
) {
    let cols: Option<Vec<(&[f64], &[f64])>> = tabs
        .iter()
        .map(|t| Some((col(t, value)?, col(t, unc)?)))
        .collect();
    let Some(cols) = cols else { return };
    let nr = cols.len() as f64;
    let nodes = cols[0].0.len();
    for k in 0..nodes {
        let sum: f64 = cols
            .iter()
            .map(|(s, _)| if is_std { s[k] * s[k] } else { s[k] })
            .sum();
        for (s, u) in &cols {
            let own = if is_std { s[k] * s[k] } else { s[k] };
            let others = (sum - own) / (nr - 1.0);
            let t = if is_std {
                others.max(0.0).sqrt()
            } else {
                others
            };
            pairs.add_node(
                regions,
                k,
                label,
                unc,
                Reading::Standard,
                s[k] - t,
                u[k] * inflate,
            );
        }
    }
}

/// Instantaneous columns of a steady cell (module doc).
fn score_instantaneous(
    pairs: &mut Pairs,
    regions: &[Region],
    tabs: &[&NodeTable],
    tr: &Truth,
    reps: &[Replica],
) {
    let nodes = tr.grid.len();
    for q in scored_quantities(tabs[0]) {
        let Some(t) = tr.mean(&q) else { continue };
        let name = format!("{q}_inst_unc");
        if q == "omega" && reps.iter().all(|r| r.fields.is_some()) {
            for (rep, tab) in reps.iter().zip(tabs) {
                let Some(u) = col(tab, &name) else { continue };
                for (om, st) in read_fields(rep.fields.as_deref().unwrap_or(Path::new(""))) {
                    for k in 0..nodes.min(om.len()) {
                        if st[k] == VALID as f64 {
                            pairs.add_node(
                                regions,
                                k,
                                "ensemble",
                                &name,
                                Reading::Standard,
                                om[k] - t[k],
                                u[k],
                            );
                        }
                    }
                }
            }
            continue;
        }
        // width only: rms over frames per node from the moments
        for (rep, tab) in reps.iter().zip(tabs) {
            let (Some(m), Some(s), Some(u)) = (
                col(tab, &format!("{q}_mean")),
                col(tab, &format!("{q}_std")),
                col(tab, &name),
            ) else {
                continue;
            };
            let n = rep.frames as f64;
            let mut errs = Vec::new();
            for k in 0..nodes {
                let rms = ((n - 1.0) / n * s[k] * s[k] + (m[k] - t[k]).powi(2)).sqrt();
                errs.push((k, rms));
            }
            for (k, rms) in errs {
                // a pair whose error is the node's rms: the score's rms is
                // then the rms over nodes; coverage is not defined here
                pairs.add_node(regions, k, "ensemble", &name, Reading::WidthOnly, rms, u[k]);
            }
        }
    }
}

/// omega and status of every frame file in `dir` (fields/<frame>.csv).
fn read_fields(dir: &Path) -> Vec<(Vec<f64>, Vec<f64>)> {
    let mut out = Vec::new();
    let Ok(rd) = std::fs::read_dir(dir) else {
        return out;
    };
    let mut paths: Vec<PathBuf> = rd.filter_map(|e| e.ok().map(|e| e.path())).collect();
    paths.sort();
    for p in paths {
        let Ok(t) = io::read_table(&p, io::Format::Csv, 0) else {
            continue;
        };
        let f = |name: &str| match t.get(name) {
            Some(Values::F64(v)) => v.clone(),
            Some(Values::I64(v)) => v.iter().map(|&x| x as f64).collect(),
            _ => Vec::new(),
        };
        out.push((f("omega"), f("status")));
    }
    out
}
