//! `curlew coverage PIPELINE`: checks how well curlew's uncertainties hold
//! for a campaign like the user's (the library's `coverage::matched`), and
//! writes the coverage table and a report section into one output folder
//! that appears only when complete.

use std::path::PathBuf;
use std::time::Instant;

use curlew::coverage::matched::{self, CheckOptions};
use curlew::coverage::study;
use curlew::io::OutputDir;
use curlew::plan::Plan;
use curlew::{Error, Result};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The pipeline file (TOML) of the campaign to check.
    pub pipeline: PathBuf,
    /// Output folder [default: out/<campaign name>-coverage]; replaced only when complete.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Frames per simulated replica [default: as many as the run has].
    #[arg(long)]
    pub frames: Option<usize>,
    /// Seed of the simulated campaigns; the same seed gives the same table.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Independent simulated campaigns per run (at least 2). Costs one reduction each,
    /// plus one of the run itself.
    #[arg(long, default_value_t = 4)]
    pub replicas: usize,
    /// Check only these runs (comma-separated ids).
    #[arg(long, value_delimiter = ',')]
    pub runs: Vec<String>,
    /// Print nothing but errors.
    #[arg(long)]
    pub quiet: bool,
}

pub fn run(args: Args) -> Result<()> {
    let t0 = Instant::now();
    if args.replicas < 2 {
        return Err(Error::usage(format!(
            "--replicas {} must be at least 2",
            args.replicas
        )));
    }
    if args.frames.is_some_and(|n| n < 2) {
        return Err(Error::usage("--frames must be at least 2"));
    }
    let plan = Plan::load(&args.pipeline)?;
    let out = args
        .out
        .clone()
        .unwrap_or_else(|| PathBuf::from("out").join(format!("{}-coverage", plan.campaign)));
    let dir = OutputDir::begin(&out)?;
    let work = dir.path().join(".work");
    let opts = CheckOptions {
        frames: args.frames,
        seed: args.seed,
        replicas: args.replicas,
        runs: args.runs.clone(),
    };
    let checked = matched::check(&plan, &opts, &work)?;
    std::fs::remove_dir_all(&work).map_err(|e| Error::io(&work, e))?;
    let rows: Vec<_> = checked.iter().flat_map(|c| c.rows.clone()).collect();
    let write = |name: &str, text: String| -> Result<()> {
        let p = dir.path().join(name);
        std::fs::write(&p, text).map_err(|e| Error::io(&p, e))
    };
    write("coverage.csv", study::csv(&rows))?;
    let command = format!("curlew coverage {}", args.pipeline.display());
    write("coverage.md", matched::section(&checked, &command))?;
    let measured: Vec<_> = checked.iter().map(|c| &c.measured).collect();
    write(
        "matched.json",
        serde_json::to_string_pretty(&serde_json::json!({
            "tool": format!("curlew {}", curlew::VERSION),
            "pipeline": args.pipeline.display().to_string(),
            "seed": args.seed,
            "replicas": args.replicas,
            "runs": measured,
        }))
        .map_err(|e| Error::usage(format!("matched.json: {e}")))?,
    )?;
    dir.commit()?;
    if !args.quiet {
        println!(
            "curlew: coverage check of '{}' ({} runs) written to {} in {:.1} s",
            plan.campaign,
            checked.len(),
            out.display(),
            t0.elapsed().as_secs_f64()
        );
        println!("        {}", study::summary(&rows));
    }
    Ok(())
}
