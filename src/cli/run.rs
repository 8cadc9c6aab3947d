//! `curlew run PIPELINE.toml`: reduce every run of the campaign (or one
//! shard of it) into an output folder that appears only when all succeeded.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::time::Instant;

use curlew::io::{FrameSource, OutputDir};
use curlew::plan::Plan;
use curlew::reduce::{self, campaign, partial, Options, Reduced, Shard};
use curlew::{Error, ErrorKind, Result};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The pipeline file (TOML).
    pub pipeline: PathBuf,
    /// Output folder [default: out/<campaign name>, or out/<campaign name>.shard-I-of-N
    /// with --shard]. An existing folder is replaced only when the run succeeds.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Reduce only these runs (comma-separated ids).
    #[arg(long, value_delimiter = ',')]
    pub runs: Vec<String>,
    /// Reduce only shard I of N (1-based; contiguous frame ranges) and write its partial
    /// state for `curlew merge`; `slurm` takes I and N from a Slurm array job's environment.
    /// A shard still reads every frame once more when the chain has an ensemble test.
    #[arg(long)]
    pub shard: Option<String>,
    /// Worker threads [default: all cores]. Results do not depend on it.
    #[arg(long, default_value_t = 0)]
    pub jobs: usize,
    /// Print nothing but errors.
    #[arg(long)]
    pub quiet: bool,
}

pub fn run(args: Args) -> Result<()> {
    let started = Instant::now();
    let plan = Plan::load(&args.pipeline)?;
    let runs = plan.select_runs(&args.runs)?;
    let shard = match args.shard.as_deref() {
        None => None,
        Some("slurm") => Some(Shard::from_slurm(|k| std::env::var(k).ok())?),
        Some(s) => Some(Shard::parse(s)?),
    };
    let jobs = if args.jobs == 0 {
        std::thread::available_parallelism().map_or(1, |n| n.get())
    } else {
        args.jobs
    };
    let out = args.out.clone().unwrap_or_else(|| {
        let base = PathBuf::from("out").join(&plan.campaign);
        match shard {
            Some(s) => PathBuf::from(format!(
                "{}.shard-{}-of-{}",
                base.display(),
                s.index,
                s.count
            )),
            None => base,
        }
    });

    // List every run's frames first: a glob that matches nothing fails before any work.
    // Every file read is an input the output folder must not be or hold.
    let mut total = 0u64;
    let mut inputs = vec![plan.path.clone()];
    for r in &runs {
        let listed = reduce::list_run_frames(r)?;
        let n = listed.len();
        for (_, src) in &listed {
            match src {
                FrameSource::File(p) => inputs.push(p.clone()),
                FrameSource::Parquet { path, .. } => inputs.push(path.clone()),
            }
        }
        inputs.extend(r.frame_table.iter().cloned());
        total += shard.map_or(n, |s| {
            let (a, b) = s.range(n);
            b - a
        }) as u64;
    }
    let show = !args.quiet && std::io::stderr().is_terminal();
    let bar = if show {
        let b = indicatif::ProgressBar::new(total);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{prefix:>10} [{bar:36}] {pos}/{len} frames  {per_sec}  eta {eta}",
            )
            .unwrap()
            .progress_chars("=> "),
        );
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    let tick = |k: u64| bar.inc(k);

    inputs.dedup();
    let dir = OutputDir::begin_over(&out, &inputs)?;
    let mut reduced = Vec::with_capacity(runs.len());
    for r in &runs {
        bar.set_prefix(r.id.clone());
        let fields = if plan.frame_fields && shard.is_none() {
            let d = dir.path().join(&r.id).join("fields");
            std::fs::create_dir_all(&d).map_err(|e| Error::io(&d, e))?;
            Some(d)
        } else {
            None
        };
        let opts = Options {
            jobs,
            shard,
            progress: Some(&tick),
            frame_fields_dir: fields,
        };
        reduced.push(reduce::reduce_run(r, &opts).map_err(|e| at_pipeline(&plan, e))?);
    }
    bar.finish_and_clear();

    if let Some(s) = shard {
        partial::write(dir.path(), &plan, s, &reduced)?;
        dir.commit()?;
        if !args.quiet {
            println!(
                "curlew: shard {}/{} of '{}' ({} frames) written to {}",
                s.index,
                s.count,
                plan.campaign,
                total,
                out.display()
            );
            println!("        combine all shards with: curlew merge <shard folders...> --out DIR");
        }
        return Ok(());
    }
    nothing_valid(&mut reduced)?;
    let prov = campaign::Provenance {
        command: std::env::args().collect(),
        jobs,
        started_unix: std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0.0, |d| d.as_secs_f64()),
        merged_shards: None,
    };
    let result = campaign::finish_campaign(&plan, reduced, dir.path(), &prov)?;
    dir.commit()?;
    if !args.quiet {
        super::summary::print(&result, &out, started.elapsed().as_secs_f64());
    }
    Ok(())
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
pub(crate) fn nothing_valid(reduced: &mut [Reduced]) -> Result<()> {
    let mut empty = 0;
    for r in reduced.iter_mut() {
        let valid: usize = r
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
