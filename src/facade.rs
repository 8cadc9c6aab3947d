//! The library's front door: load a campaign, reduce it (whole or one
//! shard), merge shards. `curlew run` and `curlew merge` are thin maps from
//! arguments to these calls, so a script or another program gets exactly
//! what the command line gets.
//!
//! ```no_run
//! use curlew::{Campaign, RunOptions};
//! let campaign = Campaign::load("pipelines/demo.toml")?;
//! let result = campaign.run(&RunOptions {
//!     out: Some("out/demo".into()),
//!     ..RunOptions::default()
//! })?;
//! println!("{} runs reduced", result.runs.len());
//! # Ok::<(), curlew::Error>(())
//! ```
//!
//! Owns: choosing the output folder, listing every run's frames before any
//! work (a glob that matches nothing fails first), the thread count, the
//! provenance of the manifest (its start time is taken when the call
//! starts), and writing the output folder atomically (`io::OutputDir`).
//! Does not own: the stages (`reduce`), the outputs' contents
//! (`reduce::campaign`), the shard format (`reduce::partial`), printing.

use std::path::{Path, PathBuf};

use crate::error::{Error, ErrorKind, Result};
use crate::io::OutputDir;
use crate::plan::{Plan, RunPlan};
use crate::reduce::{self, campaign, partial, Options, Reduced, Shard};
use crate::result::CampaignResult;

/// Told how far a reduction got (a progress bar, a log). Every method has
/// an empty default; calls come from worker threads.
pub trait Progress: Sync {
    /// The number of frames about to be reduced, over every selected run.
    fn begin(&self, _total_frames: u64) {}
    /// A run starts.
    fn run(&self, _id: &str) {}
    /// `frames` more frames are done.
    fn advance(&self, _frames: u64) {}
}

/// How to reduce a campaign. `Default`: every run, all cores, into
/// `out/<campaign name>`, no progress reports.
#[derive(Default)]
pub struct RunOptions<'a> {
    /// The output folder; `None`: `out/<campaign name>` (with
    /// `.shard-I-of-N` appended for a shard).
    pub out: Option<PathBuf>,
    /// Reduce only these run ids (empty: all).
    pub runs: Vec<String>,
    /// Worker threads (0: all cores). Results do not depend on it.
    pub jobs: usize,
    /// Where progress goes.
    pub progress: Option<&'a dyn Progress>,
    /// The command line recorded in the manifest (empty for a library call).
    pub command: Vec<String>,
}

impl RunOptions<'_> {
    /// The worker thread count, 0 resolved to the machine's cores.
    pub(crate) fn threads(&self) -> usize {
        if self.jobs == 0 {
            std::thread::available_parallelism().map_or(1, |n| n.get())
        } else {
            self.jobs
        }
    }
}

/// A campaign read from its pipeline file, ready to reduce.
pub struct Campaign {
    plan: Plan,
}

impl Campaign {
    /// Reads and resolves the pipeline file at `path` (errors name the key
    /// and line).
    pub fn load(path: impl AsRef<Path>) -> Result<Campaign> {
        Ok(Campaign {
            plan: Plan::load(path.as_ref())?,
        })
    }

    /// A campaign from an already resolved plan.
    pub fn from_plan(plan: Plan) -> Campaign {
        Campaign { plan }
    }

    /// The resolved plan.
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// The folder a reduction with `opts` writes (see [`RunOptions::out`]).
    pub fn output_dir(&self, opts: &RunOptions, shard: Option<Shard>) -> PathBuf {
        if let Some(out) = &opts.out {
            return out.clone();
        }
        let base = PathBuf::from("out").join(&self.plan.campaign);
        match shard {
            Some(s) => PathBuf::from(format!(
                "{}.shard-{}-of-{}",
                base.display(),
                s.index,
                s.count
            )),
            None => base,
        }
    }

    /// Reduces the selected runs and writes every output (tables, figures,
    /// campaign.csv, manifest, report) into the output folder, which
    /// appears only when everything succeeded.
    pub fn run(&self, opts: &RunOptions) -> Result<CampaignResult> {
        let started = unix_now();
        let out = self.output_dir(opts, None);
        let dir = OutputDir::begin_over(&out, &self.inputs(opts)?)?;
        let (mut reduced, _) = self.reduce(opts, None, dir.path())?;
        nothing_valid(&mut reduced)?;
        let prov = campaign::Provenance {
            command: opts.command.clone(),
            jobs: opts.threads(),
            started_unix: started,
            merged_shards: None,
        };
        let result = campaign::finish_campaign(&self.plan, reduced, dir.path(), &prov)?;
        dir.commit()?;
        Ok(result)
    }

    /// Reduces shard `shard` of every selected run and writes its partial
    /// state for [`merge`]; returns the number of frames it reduced.
    pub fn run_shard(&self, shard: Shard, opts: &RunOptions) -> Result<u64> {
        let out = self.output_dir(opts, Some(shard));
        let dir = OutputDir::begin_over(&out, &self.inputs(opts)?)?;
        let (reduced, total) = self.reduce(opts, Some(shard), dir.path())?;
        partial::write(dir.path(), &self.plan, shard, &reduced)?;
        dir.commit()?;
        Ok(total)
    }

    /// Every file a reduction with `opts` reads (the pipeline, the frames,
    /// the frame tables): the output folder may be none of them and hold
    /// none of them (`OutputDir::begin_over`).
    fn inputs(&self, opts: &RunOptions) -> Result<Vec<PathBuf>> {
        let mut inputs = vec![self.plan.path.clone()];
        for r in self.plan.select_runs(&opts.runs)? {
            for (_, src) in reduce::list_run_frames(r)? {
                inputs.push(src.path().to_path_buf());
            }
            inputs.extend(r.frame_table.iter().cloned());
        }
        inputs.dedup();
        Ok(inputs)
    }

    /// Lists every selected run's frames (failing before any work), then
    /// reduces the runs in order; also returns the number of frames.
    fn reduce(
        &self,
        opts: &RunOptions,
        shard: Option<Shard>,
        dir: &Path,
    ) -> Result<(Vec<Reduced>, u64)> {
        let runs: Vec<&RunPlan> = self.plan.select_runs(&opts.runs)?;
        let mut total = 0u64;
        for r in &runs {
            let n = reduce::list_run_frames(r)?.len();
            total += shard.map_or(n, |s| {
                let (a, b) = s.range(n);
                b - a
            }) as u64;
        }
        if let Some(p) = opts.progress {
            p.begin(total);
        }
        let tick = |k: u64| {
            if let Some(p) = opts.progress {
                p.advance(k);
            }
        };
        let mut reduced = Vec::with_capacity(runs.len());
        for r in runs {
            if let Some(p) = opts.progress {
                p.run(&r.id);
            }
            let fields = if self.plan.frame_fields && shard.is_none() {
                let d = dir.join(&r.id).join("fields");
                std::fs::create_dir_all(&d).map_err(|e| Error::io(&d, e))?;
                Some(d)
            } else {
                None
            };
            let o = Options {
                jobs: opts.threads(),
                shard,
                progress: Some(&tick),
                frame_fields_dir: fields,
            };
            reduced.push(reduce::reduce_run(r, &o).map_err(|e| at_pipeline(&self.plan, e))?);
        }
        Ok((reduced, total))
    }
}

/// Combines the partial folders of [`Campaign::run_shard`] (every shard
/// once, any order) into the outputs one unsharded run writes, in `out`;
/// `command` is recorded in the manifest.
pub fn merge(partials: &[PathBuf], out: &Path, command: Vec<String>) -> Result<CampaignResult> {
    let started = unix_now();
    let parts = partials
        .iter()
        .map(|p| partial::read(p))
        .collect::<Result<Vec<_>>>()?;
    let n = parts.len();
    let (first, mut reduced) = partial::merge(parts)?;
    nothing_valid(&mut reduced)?;
    let plan = Plan::from_str(&first.pipeline_text, &first.pipeline_path)?;
    let dir = OutputDir::begin_over(out, partials)?;
    let prov = campaign::Provenance {
        command,
        jobs: 1,
        started_unix: started,
        merged_shards: Some(n),
    };
    let result = campaign::finish_campaign(&plan, reduced, dir.path(), &prov)?;
    dir.commit()?;
    Ok(result)
}

/// Seconds since the Unix epoch (0 if the clock is before it).
fn unix_now() -> f64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}

/// A pipeline error raised during the reduction (a bound by the grid, say)
/// names the pipeline file and the key's line.
fn at_pipeline(plan: &Plan, e: Error) -> Error {
    if e.kind == ErrorKind::Usage && e.path.is_none() {
        plan.pipeline_error(e)
    } else {
        e
    }
}

/// A run whose every vector is empty, NaN or flagged in the input gets a
/// warning; a campaign with no valid vector at all is an error (nothing
/// was measured, or the wrong columns were read).
fn nothing_valid(reduced: &mut [Reduced]) -> Result<()> {
    let mut empty = 0;
    for r in reduced.iter_mut() {
        let valid: usize = r
            .state
            .frames
            .iter()
            .map(|f| f.n_vectors.saturating_sub(f.validation.invalid_input))
            .sum();
        if valid == 0 {
            empty += 1;
            r.warnings.push(format!(
                "run '{}': every vector of every frame is empty, NaN or flagged invalid in the input",
                r.id
            ));
        }
    }
    if empty == reduced.len() {
        return Err(Error::data(format!(
            "every vector of every frame of the {} run(s) is empty, NaN or flagged invalid in the \
             input: there is nothing to reduce (are the velocity columns the right ones?)",
            reduced.len()
        )));
    }
    Ok(())
}
