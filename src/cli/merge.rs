//! `curlew merge PARTIAL_DIR... --out DIR`: combine the partial results of
//! `run --shard` into the outputs a single run writes.

use std::path::PathBuf;
use std::time::Instant;

use curlew::io::OutputDir;
use curlew::plan::Plan;
use curlew::reduce::{campaign, partial};
use curlew::Result;

#[derive(clap::Args, Debug)]
pub struct Args {
    /// Partial folders written by `curlew run --shard I/N`, every shard once, in any order.
    #[arg(required = true)]
    pub partials: Vec<PathBuf>,
    /// Output folder; replaced only when the merge succeeds.
    #[arg(long)]
    pub out: PathBuf,
    /// Print nothing but errors.
    #[arg(long)]
    pub quiet: bool,
}

pub fn run(args: Args) -> Result<()> {
    let started = Instant::now();
    let parts = args
        .partials
        .iter()
        .map(|p| partial::read(p))
        .collect::<Result<Vec<_>>>()?;
    let n = parts.len();
    let (first, mut reduced) = partial::merge(parts)?;
    super::run::nothing_valid(&mut reduced)?;
    let plan = Plan::from_str(&first.pipeline_text, &first.pipeline_path)?;
    let dir = OutputDir::begin_over(&args.out, &args.partials)?;
    let prov = campaign::Provenance {
        command: std::env::args().collect(),
        jobs: 1,
        started_unix: std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0.0, |d| d.as_secs_f64()),
        merged_shards: Some(n),
    };
    let result = campaign::finish_campaign(&plan, reduced, dir.path(), &prov)?;
    dir.commit()?;
    if !args.quiet {
        super::summary::print(&result, &args.out, started.elapsed().as_secs_f64());
    }
    Ok(())
}
