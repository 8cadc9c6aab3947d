//! Drives one run through the stages: read → grid check → validate → fill →
//! derive → accumulate, in parallel, with bounded memory and results that do
//! not depend on the number of threads.
//!
//! Owns: the order of the stages, the passes over the frames, chunking and
//! merging, shards, and what a frame error does to the run. Does not own any
//! numerics (the stages do) or the writing of outputs (`outputs`).
//!
//! Determinism: frames are cut into fixed chunks of `CHUNK` frames in
//! natural order; each chunk is reduced sequentially into its own
//! accumulator and the chunk accumulators are merged in chunk order. The
//! chunking does not depend on `--jobs`, so neither do the bytes written.
//!
//! Memory: at most `2 × jobs` chunks are taken and not yet merged, each
//! holding one frame at a time plus its accumulator; nothing grows with the number of frames
//! except the per-frame records (a few numbers each).
//!
//! Errors: a frame that cannot be read (bad cell, other grid) stops the run
//! with an error naming the file: a campaign reduced from a silently
//! shortened set of frames would mislead. A frame that reads but is mostly
//! spurious is *rejected* (counted, listed in frames.csv, left out of the
//! statistics) when the validation chain sets a limit for that.

pub mod budget;
pub(crate) mod campaign;
mod chunks;
pub(crate) mod outputs;
pub(crate) mod partial;
pub(crate) mod seal;
pub(crate) mod state;
pub mod structures;
pub mod vortices;

use std::path::PathBuf;
use std::time::Instant;

use crate::error::{Error, Result, WithPath};
use crate::field::{FrameMeta, Grid};
use crate::io::{self, FrameSource};
use crate::plan::RunPlan;
pub use crate::result::mean_noise;
use crate::result::FrameRecord;
use crate::validate::{self, EnsembleBuilder, EnsembleRef};
use crate::{derive, fill};
use chunks::fold_chunks;
use state::{RunState, Templates};

/// Frames per chunk. Fixed (not derived from the thread count) so that the
/// merge order, and so every output byte, is the same for any `--jobs`.
pub(crate) const CHUNK: usize = 16;

/// One shard of `N`: the contiguous frames `[start, end)` of a run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Shard {
    /// 1-based shard number.
    pub index: usize,
    /// Number of shards N the run's frames are split into.
    pub count: usize,
}

/// The most shards `--shard I/N` accepts.
pub(crate) const MAX_SHARDS: usize = 1_000_000;

impl Shard {
    /// Parses `I/N` (1 ≤ I ≤ N).
    pub fn parse(s: &str) -> Result<Shard> {
        let bad = || {
            Error::usage(format!(
                "--shard '{s}' must be I/N with 1 <= I <= N, e.g. 2/8"
            ))
        };
        let (a, b) = s.split_once('/').ok_or_else(bad)?;
        let index: usize = a.trim().parse().map_err(|_| bad())?;
        let count: usize = b.trim().parse().map_err(|_| bad())?;
        if index == 0 || count == 0 || index > count {
            return Err(bad());
        }
        if count > MAX_SHARDS {
            return Err(Error::usage(format!(
                "--shard '{s}': at most {MAX_SHARDS} shards (a shard per frame is already finer \
                 than useful)"
            )));
        }
        Ok(Shard { index, count })
    }

    /// The shard of a Slurm array task: `SLURM_ARRAY_TASK_ID` counted from
    /// `SLURM_ARRAY_TASK_MIN`, out of `SLURM_ARRAY_TASK_COUNT`.
    pub fn from_slurm(get: impl Fn(&str) -> Option<String>) -> Result<Shard> {
        let num = |k: &str| -> Result<usize> {
            let v = get(k).ok_or_else(|| {
                Error::usage(format!(
                    "--shard slurm: {k} is not set (not inside a Slurm array job?)"
                ))
            })?;
            v.trim().parse().map_err(|_| {
                Error::usage(format!("--shard slurm: {k} = '{v}' is not a whole number"))
            })
        };
        let id = num("SLURM_ARRAY_TASK_ID")?;
        let min = get("SLURM_ARRAY_TASK_MIN")
            .map(|_| num("SLURM_ARRAY_TASK_MIN"))
            .transpose()?
            .unwrap_or(0);
        let count = num("SLURM_ARRAY_TASK_COUNT")?;
        let index = id
            .checked_sub(min)
            .map(|k| k + 1)
            .filter(|&k| k <= count)
            .ok_or_else(|| {
                Error::usage(format!(
                    "--shard slurm: task {id} does not lie in the array {min}..{} ",
                    min + count.saturating_sub(1)
                ))
            })?;
        Shard::parse(&format!("{index}/{count}"))
    }

    /// The frames `[start, end)` of `n` that this shard reduces: contiguous
    /// ranges, as equal as possible, earlier shards first.
    pub(crate) fn range(&self, n: usize) -> (usize, usize) {
        // In u128: k n cannot overflow for any usize k and n.
        let (k, n, c) = ((self.index - 1) as u128, n as u128, self.count as u128);
        ((k * n / c) as usize, ((k + 1) * n / c) as usize)
    }
}

/// How to run: threads, shard, progress.
pub(crate) struct Options<'a> {
    /// Worker threads (0: all cores).
    pub jobs: usize,
    pub shard: Option<Shard>,
    /// Called with the number of frames just finished (for a progress bar).
    pub progress: Option<&'a (dyn Fn(u64) + Sync)>,
    /// Where to write per-frame fields (`<run>/fields/`), when asked.
    pub frame_fields_dir: Option<PathBuf>,
}

/// An input file of the run, for the manifest.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub(crate) struct InputFile {
    pub path: String,
    pub bytes: u64,
    pub sha256: String,
}

/// What reducing a run (or one shard of it) gives, before finishing.
pub(crate) struct Reduced {
    pub id: String,
    pub grid: Grid,
    /// Frames of the whole run (all shards).
    pub n_frames_run: usize,
    /// The frame range of this shard.
    pub range: (usize, usize),
    /// What the frames of the range add up to (`state`).
    pub state: RunState,
    pub warnings: Vec<String>,
    pub timings: Vec<(String, f64)>,
    /// The peak-locking diagnostic of the valid displacements, when the
    /// calibration is known (of the whole run: a shard leaves it to `merge`).
    pub peak_lock: Option<validate::peaklock::PeakLock>,
}

impl Reduced {
    /// Finishes the peak-locking diagnostic from the accumulator and adds
    /// its warning, if any.
    pub(crate) fn finish_peak_lock(&mut self) {
        if let Some(acc) = &self.state.peak_acc {
            let p = acc.finish();
            if let Some(w) = &p.warning {
                self.warnings.push(format!("run '{}': {w}", self.id));
            }
            self.peak_lock = Some(p);
        }
    }
}

/// The frames of a run with their metadata, in natural order.
pub fn list_run_frames(run: &RunPlan) -> Result<Vec<(FrameMeta, FrameSource)>> {
    let listed = io::list_frames(&run.input, &run.frames)?;
    let table = match &run.frame_table {
        Some(p) => Some(io::read_frame_table(p)?),
        None => None,
    };
    let mut out = Vec::with_capacity(listed.len());
    for (index, (name, src)) in listed.into_iter().enumerate() {
        let (time_s, phase_deg) = match &table {
            Some(t) => t.lookup(&name).ok_or_else(|| {
                Error::data(format!(
                    "frame '{name}' of run '{}' has no row in the frame table",
                    run.id
                ))
                .with_path(run.frame_table.as_deref().unwrap())
            })?,
            None => (None, None),
        };
        out.push((
            FrameMeta {
                index,
                name,
                time_s,
                phase_deg,
            },
            src,
        ));
    }
    Ok(out)
}

fn source_path(src: &FrameSource) -> &std::path::Path {
    src.path()
}

/// The run's grid and its geometry mask (`None` when nothing is masked).
type OnGrid = (Grid, Option<crate::mask::NodeMask>);

/// Reads a frame, checks it lies on the run's grid and masks it.
fn read_on_grid(run: &RunPlan, src: &FrameSource, g: &OnGrid) -> Result<crate::field::Field> {
    Ok(read_on_grid_hashed(run, src, g, false)?.0)
}

/// `read_on_grid`, with the file's size and SHA-256 when `hash`.
fn read_on_grid_hashed(
    run: &RunPlan,
    src: &FrameSource,
    (grid, mask): &OnGrid,
    hash: bool,
) -> Result<(crate::field::Field, io::FileHash)> {
    let (mut f, h) = io::read_frame_hashed(&run.input, src, hash)?;
    if let Some(d) = grid.difference(&f.grid, run.input.grid_tolerance) {
        return Err(
            Error::data(format!("{d} (the run's first frame sets the grid)"))
                .with_path(source_path(src)),
        );
    }
    if let Some(m) = mask {
        crate::mask::apply(m, &mut f);
    }
    Ok((f, h))
}

/// Reduces one run (or one shard of it) up to merged accumulators.
pub(crate) fn reduce_run(run: &RunPlan, opts: &Options) -> Result<Reduced> {
    let t0 = Instant::now();
    let mut timings = Vec::new();
    let mut warnings = run.input_warnings.clone();
    let frames = list_run_frames(run)?;
    let n = frames.len();
    let range = opts.shard.map_or((0, n), |s| s.range(n));
    let on_grid = run_grid(run, &frames)?;
    let grid = on_grid.0;
    timings.push(("list".to_string(), t0.elapsed().as_secs_f64()));
    let ens = ensemble_pass(run, opts.jobs, &frames, &on_grid, &mut timings)?;
    let choice = pilot_pass(run, opts, &frames, &on_grid, ens.as_ref(), &mut timings)?;

    // Pass 2: every stage, frame by frame.
    let t = Instant::now();
    let names = derive::quantity_names(&run.derive);
    let mine = &frames[range.0..range.1];
    let templates = Templates::of(run, grid, frames.len() as u64);
    let pass = FramePass {
        run,
        opts,
        on_grid: &on_grid,
        ens: ens.as_ref(),
        choice: choice.as_ref(),
        names,
        templates,
    };
    let mut state = pass.reduce(mine)?;
    add_shared_inputs(run, mine, &mut state)?;
    timings.push(("reduce".to_string(), t.elapsed().as_secs_f64()));
    let n_rej = state.frames.iter().filter(|r| r.rejected).count();
    if n_rej > 0 {
        warnings.push(format!(
            "run '{}': {n_rej} of {} frames rejected as a whole and left out of the statistics (see frames.csv)",
            run.id,
            state.frames.len()
        ));
    }
    let mut out = Reduced {
        id: run.id.clone(),
        grid,
        n_frames_run: n,
        range,
        state,
        warnings,
        timings,
        peak_lock: None,
    };
    // A shard's part of the run is finished by `merge`, over all shards.
    if opts.shard.is_none() {
        out.finish_peak_lock();
    }
    Ok(out)
}

/// The run's grid, set by its first frame and checked against the plan's
/// bounds, with its geometry mask.
fn run_grid(run: &RunPlan, frames: &[(FrameMeta, FrameSource)]) -> Result<OnGrid> {
    let grid = io::read_frame(&run.input, &frames[0].1)?.grid;
    crate::plan::bounds::check_grid(run, &grid)?;
    Ok((
        grid,
        if run.mask.is_empty() {
            None
        } else {
            Some(run.mask.nodes(&grid, run.input.grid_tolerance)?)
        },
    ))
}

/// Pass 1 (only when the chain has an ensemble test): robust per-node
/// statistics over every frame of the run, whatever the shard, so that a
/// sharded campaign validates exactly as a single run does.
fn ensemble_pass(
    run: &RunPlan,
    jobs: usize,
    frames: &[(FrameMeta, FrameSource)],
    on_grid: &OnGrid,
    timings: &mut Vec<(String, f64)>,
) -> Result<Option<EnsembleRef>> {
    if !run.validation.needs_ensemble_pass() {
        return Ok(None);
    }
    let t = Instant::now();
    let grid = on_grid.0;
    let mut total: Option<EnsembleBuilder> = None;
    fold_chunks(
        jobs,
        frames,
        |_: &mut (), chunk| {
            let mut b = EnsembleBuilder::new(&run.validation, grid);
            for (_, src) in chunk {
                b.push(&read_on_grid(run, src, on_grid)?);
            }
            Ok(b)
        },
        |b| match total.as_mut() {
            Some(t) => t.merge(b),
            None => total = Some(b),
        },
    )?;
    timings.push(("ensemble_pass".to_string(), t.elapsed().as_secs_f64()));
    Ok(total.map(|b| b.finish()))
}

/// Pass 1b (only with scheme = "auto"): the scheme maps from a pilot of
/// frames spread over the whole run, whatever the shard (`derive::choice`).
fn pilot_pass(
    run: &RunPlan,
    opts: &Options,
    frames: &[(FrameMeta, FrameSource)],
    on_grid: &OnGrid,
    ens: Option<&EnsembleRef>,
    timings: &mut Vec<(String, f64)>,
) -> Result<Option<derive::choice::Choice>> {
    let tp = Instant::now();
    // The instantaneous map only matters (and costs a pass over the nodes
    // per frame) when the per-frame fields are written.
    let choice = scheme_choice(run, frames, on_grid, ens)?.map(|mut c| {
        c.fields = opts.frame_fields_dir.is_some();
        c
    });
    if choice.is_some() {
        timings.push(("scheme_pilot".to_string(), tp.elapsed().as_secs_f64()));
    }
    Ok(choice)
}

/// What pass 2 (every stage, frame by frame) needs besides the frames.
struct FramePass<'a> {
    run: &'a RunPlan,
    opts: &'a Options<'a>,
    on_grid: &'a OnGrid,
    /// The ensemble statistics of pass 1, when the chain has an ensemble test.
    ens: Option<&'a EnsembleRef>,
    /// The scheme maps of pass 1b, with `scheme = "auto"`.
    choice: Option<&'a derive::choice::Choice>,
    /// The derived quantities accumulated.
    names: Vec<&'static str>,
    templates: Templates,
}

impl FramePass<'_> {
    /// The state of no frames.
    fn empty(&self) -> RunState {
        RunState::empty(self.run, self.on_grid.0, &self.names, &self.templates)
    }

    /// Reduces `frames` in chunks on the worker threads and merges the chunk
    /// states in frame order.
    fn reduce(&self, frames: &[(FrameMeta, FrameSource)]) -> Result<RunState> {
        let mut state = self.empty();
        let mut merge_error: Option<Error> = None;
        fold_chunks(
            self.opts.jobs,
            frames,
            |ws: &mut derive::Workspace, chunk| self.reduce_chunk(ws, chunk),
            |c| {
                if merge_error.is_none() {
                    merge_error = state.merge(c).err();
                }
            },
        )?;
        if let Some(e) = merge_error {
            return Err(e);
        }
        Ok(state)
    }

    /// The state of one chunk of frames, reduced in frame order.
    fn reduce_chunk(
        &self,
        ws: &mut derive::Workspace,
        chunk: &[(FrameMeta, FrameSource)],
    ) -> Result<RunState> {
        let mut out = self.empty();
        out.frames.reserve(chunk.len());
        for (meta, src) in chunk {
            self.reduce_frame(ws, &mut out, meta, src)?;
            if let Some(p) = self.opts.progress {
                p(1);
            }
        }
        Ok(out)
    }

    /// Reads, validates, fills and derives one frame and adds it to `out`
    /// (its record always; its values unless the frame is rejected).
    fn reduce_frame(
        &self,
        ws: &mut derive::Workspace,
        out: &mut RunState,
        meta: &FrameMeta,
        src: &FrameSource,
    ) -> Result<()> {
        let (run, grid) = (self.run, self.on_grid.0);
        let (mut field, hash) = read_on_grid_hashed(run, src, self.on_grid, true)?;
        if let (FrameSource::File(p), Some((bytes, sha256))) = (src, hash) {
            out.inputs.push(InputFile {
                path: p.display().to_string(),
                bytes,
                sha256,
            });
        }
        let vcounts = validate::validate_frame(&run.validation, &mut field, self.ens);
        let rejected = validate::frame_rejected(&run.validation, &vcounts, grid.len());
        if let (Some(p), false) = (out.peak_acc.as_mut(), rejected) {
            // valid displacements only: after validation, before filling
            p.push(&field);
        }
        let fcounts = fill::fill(&run.fill, &mut field);
        let derived = derive::derive_with(ws, &run.derive, &field, self.choice, None);
        add_scheme_counts(out, &derived);
        if !rejected {
            out.push(meta, &field, &derived);
        }
        if let Some(dir) = &self.opts.frame_fields_dir {
            outputs::write_frame_field(&dir.join(format!("{}.csv", meta.name)), &field, &derived)?;
        }
        out.frames.push(FrameRecord {
            meta: meta.clone(),
            n_vectors: grid.len(),
            validation: vcounts,
            fill: fcounts,
            rejected,
            noise: derived.noise_estimate,
        });
        Ok(())
    }
}

/// Counts which scheme each node of a frame used, for the derived
/// quantities and, when written, the instantaneous fields.
fn add_scheme_counts(out: &mut RunState, derived: &derive::Derived) {
    out.add_scheme_counts(&derived.scheme_names, &derived.scheme_counts);
    if let Some((_, counts)) = &derived.inst_omega {
        let names: Vec<String> = derived
            .scheme_names
            .iter()
            .map(|n| format!("instantaneous fields: {n}"))
            .collect();
        let names: Vec<&str> = names.iter().map(String::as_str).collect();
        out.add_scheme_counts(&names, counts);
    }
}

/// Adds the input files that hold several frames (each hashed once) and
/// the frame table to the run's inputs.
fn add_shared_inputs(
    run: &RunPlan,
    mine: &[(FrameMeta, FrameSource)],
    state: &mut RunState,
) -> Result<()> {
    let mut seen_parquet: Vec<PathBuf> = Vec::new();
    for (_, src) in mine {
        if src.shares_file() {
            let path = &src.path().to_path_buf();
            if !seen_parquet.contains(path) {
                seen_parquet.push(path.clone());
                let (bytes, sha256) = io::hash_file(path)?;
                state.inputs.push(InputFile {
                    path: path.display().to_string(),
                    bytes,
                    sha256,
                });
            }
        }
    }
    if let Some(ft) = &run.frame_table {
        let (bytes, sha256) = io::hash_file(ft).with_path(ft)?;
        state.inputs.push(InputFile {
            path: ft.display().to_string(),
            bytes,
            sha256,
        });
    }
    Ok(())
}

/// The run's scheme maps for `scheme = "auto"` (`derive::choice`): the
/// pilot frames are validated, filled and differentiated with every
/// candidate in frame order, one after the other (so the sums, and the
/// choice, are the same whatever the thread count or the shard). `None`
/// for a fixed scheme.
fn scheme_choice(
    run: &RunPlan,
    frames: &[(FrameMeta, FrameSource)],
    on_grid: &OnGrid,
    ens: Option<&EnsembleRef>,
) -> Result<Option<derive::choice::Choice>> {
    if run.derive.scheme != derive::Scheme::Auto || run.derive.candidates.len() < 2 {
        return Ok(None);
    }
    let grid = on_grid.0;
    let mut pilot = derive::choice::Pilot::new(run.derive.candidates.len(), grid.shape());
    let mut ws = derive::Workspace::new();
    for k in derive::choice::pilot_indices(frames.len()) {
        let mut field = read_on_grid(run, &frames[k].1, on_grid)?;
        let vcounts = validate::validate_frame(&run.validation, &mut field, ens);
        if validate::frame_rejected(&run.validation, &vcounts, grid.len()) {
            continue;
        }
        fill::fill(&run.fill, &mut field);
        derive::derive_with(&mut ws, &run.derive, &field, None, Some(&mut pilot));
    }
    Ok(Some(pilot.finish(frames.len())))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shard_ranges_cover_every_frame_once() {
        for n in [0usize, 1, 7, 100, 101] {
            for count in 1..6 {
                let mut next = 0;
                for index in 1..=count {
                    let (a, b) = Shard { index, count }.range(n);
                    assert_eq!(a, next);
                    next = b;
                }
                assert_eq!(next, n);
            }
        }
    }

    #[test]
    fn shard_parse_rejects_zero_and_overflow() {
        assert_eq!(Shard::parse("2/8").unwrap(), Shard { index: 2, count: 8 });
        assert!(Shard::parse("0/8").is_err());
        assert!(Shard::parse("9/8").is_err());
        assert!(Shard::parse("x").is_err());
    }

    #[test]
    fn slurm_environment_gives_the_shard() {
        let env = |k: &str| match k {
            "SLURM_ARRAY_TASK_ID" => Some("5".to_string()),
            "SLURM_ARRAY_TASK_MIN" => Some("1".to_string()),
            "SLURM_ARRAY_TASK_COUNT" => Some("8".to_string()),
            _ => None,
        };
        assert_eq!(
            Shard::from_slurm(env).unwrap(),
            Shard { index: 5, count: 8 }
        );
        assert!(Shard::from_slurm(|_| None).is_err());
    }
}
