//! `curlew merge PARTIAL_DIR... --out DIR`: combine the partial results of
//! `run --shard` into the outputs a single run writes.

use std::path::PathBuf;
use std::time::Instant;

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
    let result = curlew::merge(&args.partials, &args.out, std::env::args().collect())?;
    if !args.quiet {
        super::summary::print(&result, &args.out, started.elapsed().as_secs_f64());
    }
    Ok(())
}
