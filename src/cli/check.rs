//! `curlew check PIPELINE.toml`: read the pipeline and every input's header
//! and grid, print the plan, compute nothing. Exit 0 only if `run` would start.

use std::path::PathBuf;

use rayon::prelude::*;

use curlew::describe::num;
use curlew::field::{FrameMeta, Grid};
use curlew::io::{self, FrameSource};
use curlew::plan::{Plan, RunPlan};
use curlew::reduce;
use curlew::{Error, Result};

#[derive(clap::Args, Debug)]
pub struct Args {
    /// The pipeline file (TOML).
    pub pipeline: PathBuf,
}

fn path_of(src: &FrameSource) -> &std::path::Path {
    src.path()
}

/// Checks one run without computing anything and prints its plan: frames,
/// grid, inputs, stages and what the analyses will find.
fn check_run(plan: &Plan, r: &RunPlan) -> Result<()> {
    let frames = reduce::list_run_frames(r)?;
    let first = io::read_grid(&r.input, &frames[0].1)?;
    curlew::plan::bounds::check_grid(r, &first).map_err(|e| plan.pipeline_error(e))?;
    check_frame_grids(r, &frames, &first)?;
    let with_time = frames.iter().filter(|(m, _)| m.time_s.is_some()).count();
    let with_phase = frames.iter().filter(|(m, _)| m.phase_deg.is_some()).count();
    print_frames(r, &frames, with_time, with_phase);
    print_grid_and_input(r, &first)?;
    print_stages(r);
    print_analysis_checks(r, &frames, with_phase)
}

/// Reads every frame's header and grid (each file once) and fails on the
/// first that cannot be read or whose grid differs from `first`.
fn check_frame_grids(r: &RunPlan, frames: &[(FrameMeta, FrameSource)], first: &Grid) -> Result<()> {
    // Every frame's header and grid, in parallel; the first that differs is named.
    let files: Vec<&FrameSource> = {
        let mut seen: Vec<&std::path::Path> = Vec::new();
        frames
            .iter()
            .map(|(_, s)| s)
            .filter(|s| match s {
                FrameSource::File(_) => true,
                FrameSource::Parquet { path, .. } | FrameSource::Indexed { path, .. } => {
                    let new = !seen.contains(&path.as_path());
                    seen.push(path);
                    new
                }
            })
            .collect()
    };
    let bad = files
        .par_iter()
        .find_map_first(|s| match io::read_grid(&r.input, s) {
            Err(e) => Some(e),
            Ok(g) => first.difference(&g, r.input.grid_tolerance).map(|d| {
                Error::data(format!("{d} (the run's first frame sets the grid)"))
                    .with_path(path_of(s))
            }),
        });
    if let Some(e) = bad {
        return Err(e);
    }
    Ok(())
}

/// Prints the run's name, its frame count and where the frames come from.
fn print_frames(
    r: &RunPlan,
    frames: &[(FrameMeta, FrameSource)],
    with_time: usize,
    with_phase: usize,
) {
    println!("run '{}'", r.id);
    let files = {
        let mut p: Vec<&std::path::Path> = frames.iter().map(|(_, s)| s.path()).collect();
        p.dedup();
        p.len()
    };
    let timed = frames
        .iter()
        .filter(|(_, s)| matches!(s, FrameSource::Indexed { .. }))
        .count();
    let split = if timed > 0 {
        format!("; {timed} from the time dimension of {files} file(s), named <file>_t<index>")
    } else {
        String::new()
    };
    println!("  frames        {} ({}{split})", frames.len(), r.frames);
    if let Some(t) = &r.frame_table {
        println!(
            "  frame table   {} ({with_time} with time, {with_phase} with phase)",
            t.display()
        );
    }
}

/// Prints the grid, units, orientation, mask, input warnings and
/// calibration.
fn print_grid_and_input(r: &RunPlan, first: &Grid) -> Result<()> {
    println!(
        "  grid          {} x {} nodes, pitch {:.4} x {:.4} mm, x {:.3}..{:.3} mm, y {:.3}..{:.3} mm",
        first.nx,
        first.ny,
        first.dx * 1e3,
        first.dy * 1e3,
        first.x0 * 1e3,
        first.x(first.nx - 1) * 1e3,
        first.y0 * 1e3,
        first.y(first.ny - 1) * 1e3
    );
    println!(
        "  units         {} files; x, y in units of {} m; u, v in units of {} m/s",
        r.input.format.name(),
        num(r.input.length_scale, 6),
        num(r.input.velocity_scale, 6)
    );
    println!("  unit source   {}", io::units::describe(&r.input));
    println!("  orientation   {}", r.input.orientation.describe());
    if !r.mask.is_empty() {
        let m = r.mask.nodes(first, r.input.grid_tolerance)?;
        let n = m.iter().filter(|&&b| b).count();
        println!(
            "  mask          {n} of {} nodes masked (status 3: never filled, never counted)",
            first.len()
        );
    }
    if let Some(c) = &r.input.columns.mask {
        println!("  mask column   '{c}': nonzero cells mask their node");
    }
    for w in &r.input_warnings {
        println!("  warning       {w}");
    }
    match r.px_velocity {
        Some(p) => println!("  calibration   1 px of displacement = {} m/s", num(p, 6)),
        None => println!("  calibration   none (pixel size and pulse separation not given)"),
    }
    Ok(())
}

/// Prints the processing stages, each stage's name once.
fn print_stages(r: &RunPlan) {
    let mut last = "";
    for (stage, text) in r.describe_stages() {
        let label = if stage == last { "" } else { stage };
        println!("  {label:<13} {text}");
        last = stage;
    }
}

/// Prints what the vortex, budget and structure analyses will do with the
/// run's times and phases.
fn print_analysis_checks(
    r: &RunPlan,
    frames: &[(FrameMeta, FrameSource)],
    with_phase: usize,
) -> Result<()> {
    let tp: Vec<_> = frames
        .iter()
        .map(|(m, _)| (m.time_s, m.phase_deg))
        .collect();
    let f = match r.vortices.is_some() && with_phase > 0 {
        true => curlew::reduce::budget::frequency(r, &curlew::reduce::budget::time_phase(&tp))?
            .map(|f| f.hz),
        false => None,
    };
    for line in curlew::reduce::vortices::check_lines(r, with_phase > 0, f) {
        println!("  {line}");
    }
    for line in curlew::reduce::budget::check_lines(r, &tp)? {
        println!("  {line}");
    }
    let times: Vec<Option<f64>> = tp.iter().map(|t| t.0).collect();
    for line in reduce::structures::check_lines(r, &times) {
        println!("  {line}");
    }
    Ok(())
}

pub fn run(args: Args) -> Result<()> {
    let plan = Plan::load(&args.pipeline)?;
    println!("campaign '{}' ({})", plan.campaign, plan.path.display());
    for r in &plan.runs {
        check_run(&plan, r)?;
    }
    println!(
        "ok: {} run(s) ready; outputs go to out/{} unless --out is given",
        plan.runs.len(),
        plan.campaign
    );
    Ok(())
}
