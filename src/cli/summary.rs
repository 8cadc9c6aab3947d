//! The closing summary of `run` and `merge`: what was written and what to
//! look at first.

use std::path::Path;

use curlew::result::CampaignResult;

pub fn print(c: &CampaignResult, out: &Path, seconds: f64) {
    let frames: usize = c.runs.iter().map(|r| r.frames.len()).sum();
    println!(
        "curlew: reduced campaign '{}': {} run(s), {frames} frames in {seconds:.1} s",
        c.name,
        c.runs.len()
    );
    for r in &c.runs {
        let nodes: usize = r.frames.iter().map(|f| f.n_vectors).sum();
        let outl: usize = r.frames.iter().map(|f| f.validation.outliers()).sum();
        let inval: usize = r.frames.iter().map(|f| f.validation.invalid_input).sum();
        let pct = |k: usize| {
            if nodes == 0 {
                0.0
            } else {
                100.0 * k as f64 / nodes as f64
            }
        };
        let noise = curlew::reduce::mean_noise(&r.frames)
            .map_or("-".to_string(), |n| format!("{:.3} mm/s", n * 1e3));
        println!(
            "  {:<12} {:>5} frames  {}x{} nodes  outliers {:.2} %  invalid input {:.2} %  noise {}",
            r.id,
            r.frames.len(),
            r.grid.nx,
            r.grid.ny,
            pct(outl),
            pct(inval),
            noise
        );
    }
    for w in &c.warnings {
        println!("  warning: {w}");
    }
    println!("  written to {}", out.display());
    println!("  open {} first", out.join("index.html").display());
}
