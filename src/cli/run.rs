//! `curlew run PIPELINE.toml`: reduce every run of the campaign (or one
//! shard of it) into an output folder that appears only when all succeeded.

use std::io::IsTerminal;
use std::path::PathBuf;
use std::time::Instant;

use curlew::reduce::Shard;
use curlew::{Campaign, Progress, Result, RunOptions};

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

/// The progress bar on a terminal (hidden otherwise).
struct Bar(indicatif::ProgressBar);

impl Progress for Bar {
    fn begin(&self, total: u64) {
        self.0.set_length(total);
    }
    fn run(&self, id: &str) {
        self.0.set_prefix(id.to_string());
    }
    fn advance(&self, frames: u64) {
        self.0.inc(frames);
    }
}

pub fn run(args: Args) -> Result<()> {
    let started = Instant::now();
    let campaign = Campaign::load(&args.pipeline)?;
    let shard = match args.shard.as_deref() {
        None => None,
        Some("slurm") => Some(Shard::from_slurm(|k| std::env::var(k).ok())?),
        Some(s) => Some(Shard::parse(s)?),
    };
    let bar = Bar(if !args.quiet && std::io::stderr().is_terminal() {
        let b = indicatif::ProgressBar::new(0);
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
    });
    let opts = RunOptions {
        out: args.out.clone(),
        runs: args.runs.clone(),
        jobs: args.jobs,
        progress: Some(&bar),
        command: std::env::args().collect(),
    };
    let out = campaign.output_dir(&opts, shard);
    let Some(s) = shard else {
        let result = campaign.run(&opts)?;
        bar.0.finish_and_clear();
        if !args.quiet {
            super::summary::print(&result, &out, started.elapsed().as_secs_f64());
        }
        return Ok(());
    };
    let total = campaign.run_shard(s, &opts)?;
    bar.0.finish_and_clear();
    if !args.quiet {
        println!(
            "curlew: shard {}/{} of '{}' ({} frames) written to {}",
            s.index,
            s.count,
            campaign.plan().campaign,
            total,
            out.display()
        );
        println!("        combine all shards with: curlew merge <shard folders...> --out DIR");
    }
    Ok(())
}
