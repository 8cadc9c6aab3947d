//! Reads and decodes every frame of a pipeline's runs and does nothing else:
//! the baseline of issue #7's "reduction within 2 times the time to merely
//! read and decode the same file". Usage: `decode PIPELINE.toml`.

use rayon::prelude::*;

fn main() {
    let path = std::env::args()
        .nth(1)
        .expect("usage: decode PIPELINE.toml");
    let plan = curlew::plan::Plan::load(std::path::Path::new(&path)).unwrap_or_else(|e| {
        eprintln!("{e}");
        std::process::exit(2)
    });
    let t = std::time::Instant::now();
    let mut vectors = 0usize;
    for run in &plan.runs {
        let frames = curlew::reduce::list_run_frames(run).expect("frames");
        vectors += frames
            .par_iter()
            .map(|(_, src)| {
                curlew::io::read_frame(&run.input, src)
                    .expect("read")
                    .u
                    .len()
            })
            .sum::<usize>();
    }
    let s = t.elapsed().as_secs_f64();
    println!(
        "decoded {vectors} vectors in {s:.3} s ({:.1} M vectors/s)",
        vectors as f64 / s / 1e6
    );
}
