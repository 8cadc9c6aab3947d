//! The partial result of `run --shard I/N`, and reading it back for `merge`.
//!
//! Layout of a partial folder (format `curlew-partial`, version 1):
//!
//! ```text
//! PARTIAL/
//!   partial.json            format, version, tool version, the pipeline text and its
//!                           SHA-256, the shard (index, count), and per run: id, grid,
//!                           frames in the run, this shard's frame range, the frame
//!                           records, input files, warnings, timings
//!                           and the peak-locking accumulator (integer histograms),
//!                           when the run has a calibration
//!   <run id>/accumulator.bin   the statistics accumulator (stats' own versioned bytes)
//!   partial.sha256          SHA-256 of partial.json and of every accumulator.bin
//!   <run id>/budget.bin        the vorticity budget's accumulator, when `[budget]` is on
//!                              (`budget::codec`; absent in older partials)
//!   <run id>/modes.bin         the POD sketch, only when `[modes]` asks for it
//!                              (modes::codec's own versioned bytes)
//!   <run id>/correlation.bin   the two-point co-moments at the probes, when the
//!                              run names probes (scales::codec's own bytes)
//!   <run id>/frame-cores.bin   the cores of every frame, with `[vortices] frames = true`
//!                              (vortex::codec)
//! ```
//!
//! Version 2: floats of frame records and grids are exact strings, and
//! every run carries its `seal::Fingerprint` (see `seal`).
//!
//! `merge` accepts any set of partial folders of one pipeline (same SHA-256)
//! that holds every shard `1..=N` exactly once, whose checksums hold and
//! whose fingerprints say they read the same frames, and merges the
//! accumulators in shard order, which is frame order: the result equals a
//! single run, byte for byte.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::seal::{self, exact, exact_opt, Fingerprint};
use super::state::RunState;
use super::{InputFile, Reduced, Shard};
use crate::error::{Error, Result, WithPath};
use crate::field::{FrameMeta, Grid};
use crate::modes::ModeSketch;
use crate::plan::Plan;
use crate::result::FrameRecord;
use crate::stats::RunAccumulator;
use crate::{fill, validate};

pub(crate) const FORMAT: &str = "curlew-partial";
pub(crate) const VERSION: u32 = 2;
/// The POD sketch of a run, when `[modes]` asks for it (absent otherwise:
/// partials without it stay readable).
const MODES_FILE: &str = "modes.bin";
/// The two-point co-moments of a run with probes (absent otherwise).
pub(crate) const CORR_FILE: &str = "correlation.bin";
/// The cores of every frame, only with `[vortices] frames = true`
/// (`vortex::codec`).
pub(crate) const FRAME_CORES_FILE: &str = "frame-cores.bin";

#[derive(Debug, Clone, Serialize, Deserialize)]
struct FrameRow {
    index: usize,
    name: String,
    #[serde(with = "exact_opt")]
    time_s: Option<f64>,
    #[serde(with = "exact_opt")]
    phase_deg: Option<f64>,
    n_vectors: usize,
    validation: validate::Counts,
    fill: fill::Counts,
    rejected: bool,
    #[serde(with = "exact_opt")]
    noise: Option<f64>,
}

/// `Grid` with exact floats.
#[derive(Debug, Clone, Serialize, Deserialize)]
struct GridRow {
    nx: usize,
    ny: usize,
    #[serde(with = "exact")]
    x0: f64,
    #[serde(with = "exact")]
    y0: f64,
    #[serde(with = "exact")]
    dx: f64,
    #[serde(with = "exact")]
    dy: f64,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
struct RunPart {
    id: String,
    grid: GridRow,
    fingerprint: Fingerprint,
    n_frames_run: usize,
    range: (usize, usize),
    frames: Vec<FrameRow>,
    inputs: Vec<InputFile>,
    warnings: Vec<String>,
    timings: Vec<(String, f64)>,
    scheme_counts: Vec<(String, usize)>,
    /// The peak-locking accumulator (absent in partials of runs without a
    /// calibration, and in those written before it was carried).
    #[serde(default)]
    peak_acc: Option<validate::peaklock::PeakLockAcc>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
struct PartialFile {
    format: String,
    version: u32,
    tool_version: String,
    pipeline_path: String,
    pipeline_sha256: String,
    pipeline_text: String,
    shard: Shard,
    runs: Vec<RunPart>,
}

/// A partial folder read back.
pub(crate) struct Partial {
    pub dir: PathBuf,
    pub shard: Shard,
    pub pipeline_path: PathBuf,
    pub pipeline_text: String,
    pub pipeline_sha256: String,
    pub runs: Vec<Reduced>,
    /// Per run (same order): the frames it belongs to.
    pub fingerprints: Vec<Fingerprint>,
}

/// The state in an optional file of a partial folder: `None` when the file
/// is absent (the stage was off), its parse otherwise; errors name the file.
fn optional<T>(p: &Path, parse: impl FnOnce(&[u8]) -> Result<T>) -> Result<Option<T>> {
    match std::fs::read(p) {
        Ok(b) => Ok(Some(parse(&b).with_path(p)?)),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(Error::io(p, e)),
    }
}

impl From<Grid> for GridRow {
    fn from(g: Grid) -> GridRow {
        GridRow {
            nx: g.nx,
            ny: g.ny,
            x0: g.x0,
            y0: g.y0,
            dx: g.dx,
            dy: g.dy,
        }
    }
}

impl From<GridRow> for Grid {
    fn from(g: GridRow) -> Grid {
        Grid {
            nx: g.nx,
            ny: g.ny,
            x0: g.x0,
            y0: g.y0,
            dx: g.dx,
            dy: g.dy,
        }
    }
}

impl From<&FrameRecord> for FrameRow {
    fn from(f: &FrameRecord) -> FrameRow {
        FrameRow {
            index: f.meta.index,
            name: f.meta.name.clone(),
            time_s: f.meta.time_s,
            phase_deg: f.meta.phase_deg,
            n_vectors: f.n_vectors,
            validation: f.validation,
            fill: f.fill,
            rejected: f.rejected,
            noise: f.noise,
        }
    }
}

impl From<FrameRow> for FrameRecord {
    fn from(f: FrameRow) -> FrameRecord {
        FrameRecord {
            meta: FrameMeta {
                index: f.index,
                name: f.name,
                time_s: f.time_s,
                phase_deg: f.phase_deg,
            },
            n_vectors: f.n_vectors,
            validation: f.validation,
            fill: f.fill,
            rejected: f.rejected,
            noise: f.noise,
        }
    }
}

/// Writes the partial result of one shard into `dir` (a fresh folder).
pub(crate) fn write(dir: &Path, plan: &Plan, shard: Shard, runs: &[Reduced]) -> Result<()> {
    use sha2::{Digest, Sha256};
    let (pipeline_path, pipeline_text) = (&plan.path, &plan.text);
    let mut parts = Vec::with_capacity(runs.len());
    for r in runs {
        let rd = dir.join(&r.id);
        std::fs::create_dir_all(&rd).with_path(&rd)?;
        let p = rd.join("accumulator.bin");
        std::fs::write(&p, r.state.acc.to_bytes()).with_path(&p)?;
        let run_plan = plan
            .runs
            .iter()
            .find(|p| p.id == r.id)
            .ok_or_else(|| Error::data(format!("run '{}' is not in the pipeline", r.id)))?;
        write_optional_states(&rd, &r.state)?;
        parts.push(RunPart {
            id: r.id.clone(),
            grid: r.grid.into(),
            fingerprint: seal::fingerprint(run_plan, r.range)?,
            n_frames_run: r.n_frames_run,
            range: r.range,
            frames: r.state.frames.iter().map(FrameRow::from).collect(),
            inputs: r.state.inputs.clone(),
            warnings: r.warnings.clone(),
            timings: r.timings.clone(),
            scheme_counts: r.state.scheme_counts.clone(),
            peak_acc: r.state.peak_acc.clone(),
        });
    }
    let pf = PartialFile {
        format: FORMAT.into(),
        version: VERSION,
        tool_version: crate::VERSION.into(),
        pipeline_path: pipeline_path.display().to_string(),
        pipeline_sha256: super::campaign::hex(&Sha256::digest(pipeline_text.as_bytes())),
        pipeline_text: pipeline_text.into(),
        shard,
        runs: parts,
    };
    let p = dir.join("partial.json");
    let text = serde_json::to_string(&pf).map_err(|e| Error::data(format!("partial: {e}")))?;
    std::fs::write(&p, text).with_path(&p)?;
    seal::write_checksums(dir, runs)
}

/// Writes the accumulators of the optional stages a run has (budget, POD
/// sketch, two-point co-moments, frame cores) into its folder `rd`.
fn write_optional_states(rd: &Path, state: &RunState) -> Result<()> {
    if let Some(b) = &state.budget {
        let p = rd.join("budget.bin");
        std::fs::write(&p, b.to_bytes()).with_path(&p)?;
    }
    if let Some(m) = &state.modes {
        let p = rd.join(MODES_FILE);
        std::fs::write(&p, m.to_bytes()).with_path(&p)?;
    }
    if let Some(c) = &state.corr {
        let p = rd.join(CORR_FILE);
        std::fs::write(&p, c.to_bytes()).with_path(&p)?;
    }
    if let Some(c) = &state.frame_cores {
        let p = rd.join(FRAME_CORES_FILE);
        std::fs::write(&p, c.to_bytes()).with_path(&p)?;
    }
    Ok(())
}

/// Reads a partial folder.
pub(crate) fn read(dir: &Path) -> Result<Partial> {
    let pf = read_partial_file(dir)?;
    let mut runs = Vec::with_capacity(pf.runs.len());
    let mut fingerprints = Vec::with_capacity(pf.runs.len());
    for r in pf.runs {
        fingerprints.push(r.fingerprint.clone());
        runs.push(read_run(dir, r)?);
    }
    Ok(Partial {
        dir: dir.to_path_buf(),
        shard: pf.shard,
        pipeline_path: PathBuf::from(pf.pipeline_path),
        pipeline_text: pf.pipeline_text,
        pipeline_sha256: pf.pipeline_sha256,
        runs,
        fingerprints,
    })
}

/// The `partial.json` of a partial folder, after checking its format and
/// version and the folder's checksums.
fn read_partial_file(dir: &Path) -> Result<PartialFile> {
    let p = dir.join("partial.json");
    let text = std::fs::read_to_string(&p).map_err(|e| {
        Error::usage(format!(
            "not a partial result folder of 'curlew run --shard' ({e})"
        ))
        .with_path(&p)
    })?;
    #[derive(Deserialize)]
    struct Head {
        format: String,
        version: u32,
    }
    let head: Head = serde_json::from_str(&text)
        .map_err(|e| Error::data(format!("partial.json cannot be read: {e}")).with_path(&p))?;
    if head.format != FORMAT || head.version != VERSION {
        return Err(Error::data(format!(
            "partial format '{}' version {} is not '{FORMAT}' version {VERSION}; \
             rerun the shards with this curlew",
            head.format, head.version
        ))
        .with_path(&p));
    }
    seal::verify_checksums(dir)?;
    serde_json::from_str(&text)
        .map_err(|e| Error::data(format!("partial.json cannot be read: {e}")).with_path(&p))
}

/// One run of a partial folder: its record in `partial.json` with the
/// accumulators in its folder.
fn read_run(dir: &Path, r: RunPart) -> Result<Reduced> {
    let ap = dir.join(&r.id).join("accumulator.bin");
    let bytes = std::fs::read(&ap).with_path(&ap)?;
    let acc = RunAccumulator::from_bytes(&bytes).with_path(&ap)?;
    let bp = dir.join(&r.id).join("budget.bin");
    let budget = match bp.exists() {
        true => {
            let b = std::fs::read(&bp).with_path(&bp)?;
            Some(crate::budget::BudgetAcc::from_bytes(&b).with_path(&bp)?)
        }
        false => None,
    };
    let rd = dir.join(&r.id);
    let modes = optional(&rd.join(MODES_FILE), ModeSketch::from_bytes)?;
    let corr = optional(&rd.join(CORR_FILE), crate::scales::CorrAcc::from_bytes)?;
    let frame_cores = optional(
        &rd.join(FRAME_CORES_FILE),
        crate::vortex::frames::FrameCores::from_bytes,
    )?;
    Ok(Reduced {
        id: r.id,
        grid: r.grid.into(),
        n_frames_run: r.n_frames_run,
        range: r.range,
        state: RunState {
            frames: r.frames.into_iter().map(FrameRecord::from).collect(),
            acc,
            budget,
            inputs: r.inputs,
            scheme_counts: r.scheme_counts,
            peak_acc: r.peak_acc,
            modes,
            corr,
            frame_cores,
        },
        warnings: r.warnings,
        timings: r.timings,
        peak_lock: None,
    })
}

/// Merges partials of one pipeline, holding every shard once, into one
/// `Reduced` per run (in the pipeline's run order of the first partial).
pub(crate) fn merge(mut parts: Vec<Partial>) -> Result<(Partial, Vec<Reduced>)> {
    check_shard_set(&mut parts)?;
    let mut iter = parts.into_iter();
    let mut first = iter.next().unwrap();
    let mut runs = std::mem::take(&mut first.runs);
    // Per run: the fingerprint and inputs of the shard merged last.
    let mut last: Vec<(Fingerprint, Vec<InputFile>)> = first
        .fingerprints
        .iter()
        .cloned()
        .zip(runs.iter().map(|r| r.state.inputs.clone()))
        .collect();
    for p in iter {
        let dir = p.dir.clone();
        for (r, fp) in p.runs.into_iter().zip(p.fingerprints) {
            let at = runs.iter().position(|x| x.id == r.id).ok_or_else(|| {
                Error::data(format!("run '{}' is not in the first partial", r.id)).with_path(&dir)
            })?;
            let prev = &last[at];
            seal::check_follows(&r.id, (&prev.0, &prev.1), (&fp, &r.state.inputs), &dir)?;
            last[at] = (fp, r.state.inputs.clone());
            merge_run(&mut runs[at], r, &dir)?;
        }
    }
    for r in &runs {
        if r.range != (0, r.n_frames_run) {
            return Err(Error::data(format!(
                "run '{}': the shards cover frames {}..{} of {}",
                r.id, r.range.0, r.range.1, r.n_frames_run
            )));
        }
    }
    for r in &mut runs {
        r.finish_peak_lock();
    }
    Ok((first, runs))
}

/// Sorts the partials by shard and checks that they come from one pipeline
/// and hold every shard `1..=N` of one N exactly once.
fn check_shard_set(parts: &mut [Partial]) -> Result<()> {
    if parts.is_empty() {
        return Err(Error::usage("merge needs at least one partial folder"));
    }
    parts.sort_by_key(|p| p.shard.index);
    let count = parts[0].shard.count;
    for p in parts.iter() {
        if p.pipeline_sha256 != parts[0].pipeline_sha256 {
            return Err(Error::data(format!(
                "this partial comes from another pipeline than {} (pipeline text differs)",
                parts[0].dir.display()
            ))
            .with_path(&p.dir));
        }
        if p.shard.count != count {
            return Err(Error::data(format!(
                "shard {}/{} does not belong with shards of {count}",
                p.shard.index, p.shard.count
            ))
            .with_path(&p.dir));
        }
    }
    for (k, p) in parts.iter().enumerate() {
        if p.shard.index != k + 1 {
            let have: Vec<String> = parts
                .iter()
                .map(|p| format!("{}/{}", p.shard.index, p.shard.count))
                .collect();
            return Err(Error::data(format!(
                "merge needs every shard 1..{count} exactly once; got {}",
                have.join(", ")
            )));
        }
    }
    Ok(())
}

/// Merges run `r` of a later shard (read from `dir`) into `into`, the same
/// run of the shards before it: the frames must follow on the same grid.
fn merge_run(into: &mut Reduced, r: Reduced, dir: &Path) -> Result<()> {
    if into.range.1 != r.range.0 || into.grid != r.grid {
        return Err(Error::data(format!(
            "run '{}': frames {}..{} do not follow frames ..{} of the earlier shards",
            r.id, r.range.0, r.range.1, into.range.1
        ))
        .with_path(dir));
    }
    into.state
        .merge(r.state)
        .map_err(|e| Error::data(format!("run '{}': {e}", r.id)).with_path(dir))?;
    into.range.1 = r.range.1;
    into.warnings.extend(r.warnings);
    for (k, v) in r.timings {
        match into.timings.iter_mut().find(|(n, _)| *n == k) {
            Some(t) => t.1 += v,
            None => into.timings.push((k, v)),
        }
    }
    Ok(())
}
