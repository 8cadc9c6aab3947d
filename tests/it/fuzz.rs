//! Property test: random mutations of a valid campaign (frames, frame
//! table and pipeline) fed to `curlew run` never panic, never hang (each
//! run is killed after a time bound) and exit 0, 1 or 2 only; a failed run
//! leaves no temporary folder behind.
//!
//! Seeded: `CURLEW_FUZZ_SEED` (default 1) and `CURLEW_FUZZ_RUNS` (default
//! 24 here; `.ci/run` runs a few hundred with a fresh seed). The seed is
//! printed, so any failure replays with the same seed.

use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::util::*;

const G1: G = G {
    nx: 8,
    ny: 6,
    h: 1.0e-3,
    x0: 0.0,
    y0: 0.0,
};

/// Values that have broken parsers and kernels before.
const NASTY: [&str; 16] = [
    "1e20",
    "-1e300",
    "5e-324",
    "1e308",
    "0",
    "-0",
    "nan",
    "inf",
    "",
    "1e-300",
    "9e307",
    "x",
    "100",
    "1e4",
    "-1",
    "18446744073709551617",
];

/// Keys worth setting to a nasty value (section, key).
const KEYS: [(&str, &str); 16] = [
    ("smoothing", "method = \"gaussian\"\nsigma"),
    ("smoothing", "method = \"pls\"\ns"),
    ("smoothing", "method = \"savitzky-golay\"\nhalf_width"),
    ("figures", "vorticity_limit"),
    ("figures", "vector_every"),
    ("figures", "width"),
    ("validation", "max_rejected_fraction"),
    ("validation", "median.threshold"),
    ("validation", "median.eps"),
    ("fill", "max_distance"),
    ("fill", "min_neighbours"),
    ("phase", "bins"),
    ("input", "grid_tolerance"),
    ("input", "skip_lines"),
    ("derivatives", "gamma_radius"),
    ("statistics", "coverage"),
];

fn mutate_text(text: &str, r: &mut ChaCha8Rng) -> String {
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    if lines.is_empty() {
        return "x".into();
    }
    for _ in 0..r.random_range(1..4) {
        let k = r.random_range(0..lines.len());
        match r.random_range(0..8) {
            0 => {
                lines.remove(k);
                if lines.is_empty() {
                    lines.push(String::new());
                }
            }
            1 => {
                let l = lines[k].clone();
                lines.insert(k, l);
            }
            2 => {
                let cells: Vec<&str> = lines[k].split(',').collect();
                let c = r.random_range(0..cells.len());
                let mut cells: Vec<String> = cells.iter().map(|s| s.to_string()).collect();
                cells[c] = NASTY[r.random_range(0..NASTY.len())].to_string();
                lines[k] = cells.join(",");
            }
            3 => {
                let l = &mut lines[k];
                if !l.is_empty() {
                    let p = r.random_range(0..l.len());
                    if l.is_char_boundary(p) {
                        l.remove(p);
                    }
                }
            }
            4 => {
                let l = &mut lines[k];
                let ch = [
                    ',', '"', '#', '\r', ' ', '\t', '9', '.', 'e', '-', '\u{feff}',
                ][r.random_range(0..11)];
                let p = r.random_range(0..=l.len());
                if l.is_char_boundary(p) {
                    l.insert(p, ch);
                }
            }
            5 => {
                let j = r.random_range(0..lines.len());
                lines.swap(k, j);
            }
            6 => lines.truncate(k + 1),
            _ => lines[k] = lines[k].replace(',', ";"),
        }
    }
    let end = if r.random_bool(0.1) { "\r" } else { "\n" };
    lines.join(end) + end
}

fn mutate_pipeline(text: &str, r: &mut ChaCha8Rng) -> String {
    if r.random_bool(0.5) {
        let (section, key) = KEYS[r.random_range(0..KEYS.len())];
        let value = NASTY[r.random_range(0..NASTY.len())];
        // Not a TOML number: a string (the key's type check must say so).
        let value = if value.is_empty() || value == "x" {
            "\"x\""
        } else {
            value
        };
        format!("{text}\n[{section}]\n{key} = {value}\n")
    } else {
        mutate_text(text, r)
    }
}

/// Runs curlew with a time bound; returns (exit code, stderr).
fn run_bounded(w: &Work, args: &[&str], limit: Duration) -> (Option<i32>, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_curlew"))
        .args(args)
        .current_dir(w.dir.path())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run curlew");
    let t = Instant::now();
    loop {
        if let Some(_status) = child.try_wait().unwrap() {
            let o = child.wait_with_output().unwrap();
            return (
                o.status.code(),
                String::from_utf8_lossy(&o.stderr).into_owned(),
            );
        }
        if t.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("curlew {args:?} did not finish within {limit:?} (a hang)");
        }
        std::thread::sleep(Duration::from_millis(10));
    }
}

#[test]
fn random_mutations_never_panic_hang_or_exit_oddly() {
    let seed: u64 = std::env::var("CURLEW_FUZZ_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(1);
    let runs: usize = std::env::var("CURLEW_FUZZ_RUNS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(24);
    let limit = Duration::from_secs(
        std::env::var("CURLEW_FUZZ_LIMIT_S")
            .ok()
            .and_then(|s| s.parse().ok())
            .unwrap_or(60),
    );
    eprintln!("fuzz: CURLEW_FUZZ_SEED={seed} CURLEW_FUZZ_RUNS={runs}");
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    let base = Work::new();
    write_frames(&base.path("frames"), G1, 3, Units::MmMs, |x, y, k| {
        (0.1 + (y - 2.5e-3) * (1.0 + k as f64), -(x - 3.5e-3))
    });
    let frames: Vec<String> = (1..=3)
        .map(|k| std::fs::read_to_string(base.path(&format!("frames/f{k:04}.csv"))).unwrap())
        .collect();
    let table = "frame,time_s,phase_deg\nf0001,0,0\nf0002,0.1,120\nf0003,0.2,240\n";
    let pipe = pipeline(Units::MmMs, "[phase]\nbins = 3\n").replace(
        "frames = \"frames/*.csv\"\n",
        "frames = \"frames/*.csv\"\nframe_table = \"ft.csv\"\n",
    );
    let mut codes = [0usize; 3];
    for case in 0..runs {
        let w = Work::new();
        let mut ft = table.to_string();
        let mut p = pipe.clone();
        let mut fs = frames.clone();
        match r.random_range(0..4) {
            0 => p = mutate_pipeline(&p, &mut r),
            1 => ft = mutate_text(&ft, &mut r),
            _ => {
                let k = r.random_range(0..fs.len());
                fs[k] = mutate_text(&fs[k], &mut r);
            }
        }
        for (k, f) in fs.iter().enumerate() {
            w.write(&format!("frames/f{:04}.csv", k + 1), f);
        }
        w.write("ft.csv", &ft);
        w.write("p.toml", &p);
        let (code, err) = run_bounded(&w, &["run", "p.toml", "--out", "out", "--quiet"], limit);
        let what = format!("seed {seed}, case {case}: exit {code:?}\n{err}\npipeline:\n{p}");
        assert!(!err.contains("panicked"), "panic: {what}");
        match code {
            Some(c @ 0..=2) => codes[c as usize] += 1,
            _ => panic!("unexpected exit: {what}"),
        }
        if code != Some(0) {
            assert!(err.starts_with("curlew: error: "), "{what}");
            assert!(
                !w.path("out").exists(),
                "a failed run left an output: {what}"
            );
        }
        let stray = std::fs::read_dir(w.dir.path())
            .unwrap()
            .filter_map(|e| e.ok())
            .any(|e| e.file_name().to_string_lossy().contains(".partial-"));
        assert!(!stray, "temporary folder left: {what}");
    }
    eprintln!("fuzz: exits 0/1/2 = {codes:?}");
}
