//! Reduce a campaign through the library, as a program of your own would:
//! load the pipeline, run it with a progress report of your own, and read
//! the results in memory (here: each run's peak mean vorticity with its
//! uncertainty) instead of parsing the output tables.
//!
//! Usage: cargo run --release --example reduce_campaign -- PIPELINE.toml OUT_DIR

use std::sync::atomic::{AtomicU64, Ordering};

use curlew::{Campaign, Progress, RunOptions};

/// Prints a line every 100 frames.
struct Every100 {
    done: AtomicU64,
}

impl Progress for Every100 {
    fn begin(&self, total: u64) {
        eprintln!("{total} frames to reduce");
    }
    fn run(&self, id: &str) {
        eprintln!("run {id}");
    }
    fn advance(&self, frames: u64) {
        let before = self.done.fetch_add(frames, Ordering::Relaxed);
        if (before + frames) / 100 > before / 100 {
            eprintln!("  {} frames done", before + frames);
        }
    }
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let (pipeline, out) = match &args[..] {
        [_, p, o] => (p.clone(), o.clone()),
        _ => return Err("usage: reduce_campaign PIPELINE.toml OUT_DIR".into()),
    };
    let progress = Every100 {
        done: AtomicU64::new(0),
    };
    let campaign = Campaign::load(&pipeline)?;
    let result = campaign.run(&RunOptions {
        out: Some(out.clone().into()),
        progress: Some(&progress),
        command: args.clone(),
        ..RunOptions::default()
    })?;
    for run in &result.runs {
        let t = &run.stats.ensemble;
        let (w, u) = (t.get("omega_mean"), t.get("omega_mean_unc"));
        if let (Some(w), Some(u)) = (w, u) {
            if let Some(k) = (0..w.len())
                .filter(|&k| w[k].is_finite())
                .max_by(|&a, &b| w[a].abs().total_cmp(&w[b].abs()))
            {
                println!(
                    "{}: peak mean vorticity {:.2} ± {:.2} 1/s (k = 1) at x = {:.1} mm, y = {:.1} mm",
                    run.id,
                    w[k],
                    u[k],
                    1e3 * run.grid.x(k % run.grid.nx),
                    1e3 * run.grid.y(k / run.grid.nx)
                );
            }
        }
    }
    println!("outputs in {out}");
    Ok(())
}
