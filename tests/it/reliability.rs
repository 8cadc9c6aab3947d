//! Reliability (issue: no data loss, no crash, no hang on any input): every
//! case asserts the exit status of CONTRACT (1 data, 2 usage) and that the
//! message names the place (file, line, key or column); cases that could
//! lose data assert that the inputs and an earlier output survive.

use std::path::Path;

use crate::util::*;

const G1: G = G {
    nx: 8,
    ny: 6,
    h: 1.0e-3,
    x0: 0.0,
    y0: 0.0,
};

fn swirl(x: f64, y: f64, k: usize) -> (f64, f64) {
    let s = 1.0 + 0.01 * k as f64;
    (0.1 + s * (y - 2.5e-3), -s * (x - 3.5e-3))
}

/// Frames and a pipeline, no run yet.
fn campaign(w: &Work, n: usize, extra: &str) {
    write_frames(&w.path("frames"), G1, n, Units::MmMs, swirl);
    w.write("p.toml", &pipeline(Units::MmMs, extra));
}

/// A campaign already reduced into `out`; returns its ensemble bytes.
fn reduced(w: &Work) -> Vec<u8> {
    campaign(w, 4, "");
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    std::fs::read(w.path("out/a/ensemble.csv")).unwrap()
}

/// The 1-based line of the first line of `p.toml` that starts with `key`.
fn line_of(w: &Work, key: &str) -> usize {
    let text = std::fs::read_to_string(w.path("p.toml")).unwrap();
    text.lines().position(|l| l.starts_with(key)).unwrap() + 1
}

/// Replaces line `no` (1-based) of `rel` by `with`.
fn set_line(w: &Work, rel: &str, no: usize, with: &str) {
    let p = w.path(rel);
    let text = std::fs::read_to_string(&p).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    lines[no - 1] = with.to_string();
    std::fs::write(&p, lines.join("\n") + "\n").unwrap();
}

fn no_leftovers(dir: &Path) {
    let stray: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".partial-") || n.contains(".old-"))
        .collect();
    assert!(stray.is_empty(), "leftovers: {stray:?}");
}

fn frames_intact(w: &Work, n: usize) {
    for k in 1..=n {
        assert!(
            w.path(&format!("frames/f{k:04}.csv")).is_file(),
            "frame {k} was deleted"
        );
    }
    assert!(w.path("p.toml").is_file(), "the pipeline was deleted");
}

// ---- 1. data loss: the output folder -------------------------------------

#[test]
fn out_equal_to_the_frames_folder_is_refused() {
    let w = Work::new();
    campaign(&w, 3, "");
    let err = w.fails(&["run", "p.toml", "--out", "frames"], 2);
    assert!(
        err.contains("frames: the output folder") && err.contains("input"),
        "{err}"
    );
    frames_intact(&w, 3);
    no_leftovers(w.dir.path());
}

#[test]
fn out_holding_the_pipeline_and_the_data_is_refused() {
    let w = Work::new();
    campaign(&w, 3, "");
    let here = w.dir.path().to_string_lossy().into_owned();
    let err = w.fails(&["run", "p.toml", "--out", &here], 2);
    assert!(
        err.contains("holds the input") && err.contains(&here),
        "{err}"
    );
    let err = w.fails(&["run", "p.toml", "--out", "."], 2);
    assert!(
        err.contains("the output folder needs a name") || err.contains("holds the input"),
        "{err}"
    );
    frames_intact(&w, 3);
}

#[test]
fn out_holding_the_frame_table_is_refused() {
    let w = Work::new();
    campaign(&w, 3, "");
    w.write(
        "tables/ft.csv",
        "frame,time_s\nf0001,0\nf0002,0.1\nf0003,0.2\n",
    );
    let p = pipeline(Units::MmMs, "").replace(
        "frames = \"frames/*.csv\"\n",
        "frames = \"frames/*.csv\"\nframe_table = \"tables/ft.csv\"\n",
    );
    w.write("p.toml", &p);
    let err = w.fails(&["run", "p.toml", "--out", "tables"], 2);
    assert!(err.contains("tables") && err.contains("ft.csv"), "{err}");
    assert!(w.path("tables/ft.csv").is_file());
}

#[test]
fn a_folder_that_is_not_a_curlew_output_is_not_replaced() {
    let w = Work::new();
    campaign(&w, 3, "");
    w.write("thesis/chapter1.tex", "precious");
    let err = w.fails(&["run", "p.toml", "--out", "thesis"], 2);
    assert!(
        err.contains("thesis") && err.contains("not a curlew output"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_to_string(w.path("thesis/chapter1.tex")).unwrap(),
        "precious"
    );
    // An empty folder and a previous output are replaced.
    std::fs::create_dir(w.path("empty")).unwrap();
    w.ok(&["run", "p.toml", "--out", "empty", "--quiet"]);
    w.ok(&["run", "p.toml", "--out", "empty", "--quiet"]);
    assert!(w.path("empty/manifest.json").is_file());
}

#[test]
fn an_output_path_that_is_a_file_is_refused() {
    let w = Work::new();
    campaign(&w, 3, "");
    w.write("notes.txt", "keep");
    let err = w.fails(&["run", "p.toml", "--out", "notes.txt"], 2);
    assert!(
        err.contains("notes.txt") && err.contains("not a folder"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_to_string(w.path("notes.txt")).unwrap(),
        "keep"
    );
}

#[test]
fn merge_into_a_partial_folder_is_refused() {
    let w = Work::new();
    campaign(&w, 4, "");
    for s in ["1/2", "2/2"] {
        w.ok(&[
            "run",
            "p.toml",
            "--shard",
            s,
            "--out",
            &format!("s{}", &s[..1]),
            "--quiet",
        ]);
    }
    let err = w.fails(&["merge", "s1", "s2", "--out", "s1"], 2);
    assert!(err.contains("s1") && err.contains("input"), "{err}");
    assert!(w.path("s1/partial.json").is_file());
}

#[test]
fn synth_does_not_replace_a_foreign_folder_even_with_force() {
    let w = Work::new();
    w.write("data/raw.csv", "mine");
    let err = w.fails(
        &[
            "synth", "vortex", "--out", "data", "--frames", "2", "--nx", "8", "--ny", "6",
            "--force",
        ],
        2,
    );
    assert!(
        err.contains("data") && err.contains("not a curlew output"),
        "{err}"
    );
    assert_eq!(
        std::fs::read_to_string(w.path("data/raw.csv")).unwrap(),
        "mine"
    );
}

// ---- 2. crashes -----------------------------------------------------------

#[test]
fn a_stray_coordinate_of_1e20_is_an_error_naming_its_line() {
    let w = Work::new();
    let before = reduced(&w);
    set_line(&w, "frames/f0002.csv", 7, "1e20,2,0.1,0");
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(
        err.contains("f0002.csv:7 (column 'x')") && err.contains("stray"),
        "{err}"
    );
    assert!(err.len() < 600, "{err}");
    assert_eq!(std::fs::read(w.path("out/a/ensemble.csv")).unwrap(), before);
    no_leftovers(w.dir.path());
    let err = w.fails(&["check", "p.toml"], 1);
    assert!(err.contains("f0002.csv:7"), "{err}");
}

#[test]
fn a_huge_y_coordinate_is_an_error_naming_the_column() {
    let w = Work::new();
    campaign(&w, 3, "");
    set_line(&w, "frames/f0001.csv", 3, "1,1e300,0.1,0");
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0001.csv:3 (column 'y')"), "{err}");
}

#[test]
fn subnormal_coordinates_are_an_error_not_a_panic() {
    let w = Work::new();
    campaign(&w, 2, "");
    let mut s = String::from("x,y,u,v\n");
    for j in 0..3 {
        for i in 0..4 {
            s.push_str(&format!(
                "{:e},{:e},0.1,0\n",
                i as f64 * 5e-324,
                j as f64 * 5e-324
            ));
        }
    }
    w.write("frames/f0001.csv", &s);
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(
        err.contains("f0001.csv") && err.contains("cannot resolve"),
        "{err}"
    );
    assert!(!err.contains("panicked"), "{err}");
}

#[test]
fn shard_counts_beyond_the_limit_are_usage_errors() {
    let w = Work::new();
    campaign(&w, 3, "");
    let big = (1u64 << 62).to_string();
    let err = w.fails(
        &[
            "run",
            "p.toml",
            "--shard",
            &format!("{big}/{big}"),
            "--out",
            "s",
        ],
        2,
    );
    assert!(
        err.contains("--shard") && err.contains("at most 1000000"),
        "{err}"
    );
    let err = w.fails(
        &[
            "run",
            "p.toml",
            "--shard",
            "18446744073709551617/2",
            "--out",
            "s",
        ],
        2,
    );
    assert!(err.contains("--shard '18446744073709551617/2'"), "{err}");
    for bad in ["0/4", "5/4", "1/0", "a/b", "2"] {
        let err = w.fails(&["run", "p.toml", "--shard", bad, "--out", "s"], 2);
        assert!(err.contains(&format!("--shard '{bad}'")), "{err}");
    }
    assert!(!w.path("s").exists());
}

#[test]
fn more_shards_than_frames_still_merge_to_one_run() {
    let w = Work::new();
    campaign(&w, 3, "");
    w.ok(&["run", "p.toml", "--out", "whole", "--quiet"]);
    let mut parts = Vec::new();
    for k in 1..=5 {
        let out = format!("p{k}");
        w.ok(&[
            "run",
            "p.toml",
            "--shard",
            &format!("{k}/5"),
            "--out",
            &out,
            "--quiet",
        ]);
        parts.push(out);
    }
    let mut args: Vec<&str> = vec!["merge"];
    args.extend(parts.iter().map(String::as_str));
    args.extend(["--out", "merged", "--quiet"]);
    w.ok(&args);
    same_as_single_run(&w, "whole", "merged", "a");
}

/// frames.csv byte for byte; the statistics to rounding (accumulators
/// merged in another grouping than one run's: 1e-10 relative, 1e-12
/// absolute for moments near zero).
fn same_as_single_run(w: &Work, whole: &str, merged: &str, run: &str) {
    let a = std::fs::read(w.path(&format!("{whole}/{run}/frames.csv"))).unwrap();
    let b = std::fs::read(w.path(&format!("{merged}/{run}/frames.csv"))).unwrap();
    assert!(
        a == b,
        "{run}/frames.csv of the merge differs from the single run"
    );
    let a = Csv::read(&w.path(&format!("{whole}/{run}/ensemble.csv")));
    let b = Csv::read(&w.path(&format!("{merged}/{run}/ensemble.csv")));
    assert_eq!(a.header, b.header);
    for name in &a.header {
        assert_all_close(&b.col(name), &a.col(name), 1e-12, 1e-10, name);
    }
}

#[test]
fn a_gaussian_sigma_of_1e4_is_refused_before_allocating() {
    let w = Work::new();
    campaign(&w, 2, "[smoothing]\nmethod = \"gaussian\"\nsigma = 1e4\n");
    let line = line_of(&w, "sigma");
    let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
    assert!(
        err.contains(&format!("p.toml:{line}")) && err.contains("[smoothing] sigma"),
        "{err}"
    );
    w.fails(&["check", "p.toml"], 2);
}

// ---- 3. hangs: parameters bounded by the grid -----------------------------

#[test]
fn a_gaussian_wider_than_the_grid_names_the_grid() {
    let w = Work::new();
    campaign(&w, 2, "[smoothing]\nmethod = \"gaussian\"\nsigma = 10\n");
    let line = line_of(&w, "sigma");
    let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
    assert!(err.contains(&format!("p.toml:{line}")), "{err}");
    assert!(
        err.contains("8 x 6 nodes") && err.contains("at most 7"),
        "{err}"
    );
    let err = w.fails(&["check", "p.toml"], 2);
    assert!(err.contains("8 x 6 nodes"), "{err}");
}

#[test]
fn a_pls_parameter_beyond_the_grid_is_refused() {
    let w = Work::new();
    campaign(&w, 4, "[smoothing]\nmethod = \"pls\"\ns = 100\n");
    let line = line_of(&w, "s =");
    let t = std::time::Instant::now();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
    assert!(
        err.contains(&format!("p.toml:{line}")) && err.contains("[smoothing] s = 100"),
        "{err}"
    );
    assert!(err.contains("8 x 6 nodes"), "{err}");
    assert!(t.elapsed().as_secs() < 60, "took {:?}", t.elapsed());
}

#[test]
fn a_huge_vorticity_limit_is_refused_with_its_line() {
    let w = Work::new();
    campaign(&w, 2, "[figures]\nvorticity_limit = 9e307\n");
    let line = line_of(&w, "vorticity_limit");
    let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
    assert!(
        err.contains(&format!("p.toml:{line}")) && err.contains("vorticity_limit"),
        "{err}"
    );
}

// ---- 4. silent wrong results ----------------------------------------------

#[test]
fn runs_named_twice_are_refused() {
    let w = Work::new();
    campaign(&w, 2, "");
    let err = w.fails(&["run", "p.toml", "--runs", "a,a", "--out", "out"], 2);
    assert!(err.contains("--runs names 'a' twice"), "{err}");
    let err = w.fails(&["run", "p.toml", "--runs", "zz", "--out", "out"], 2);
    assert!(err.contains("'zz'") && err.contains("(a)"), "{err}");
}

#[test]
fn a_header_naming_a_column_twice_is_an_error() {
    let w = Work::new();
    campaign(&w, 2, "");
    let p = w.path("frames/f0002.csv");
    let text = std::fs::read_to_string(&p)
        .unwrap()
        .replacen("x,y,u,v", "x,y,u,v,u", 1);
    let text = text
        .lines()
        .enumerate()
        .map(|(k, l)| {
            if k == 0 {
                l.to_string()
            } else {
                format!("{l},9")
            }
        })
        .collect::<Vec<_>>()
        .join("\n");
    std::fs::write(&p, text + "\n").unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(
        err.contains("f0002.csv:1 (column 'u')") && err.contains("twice"),
        "{err}"
    );
}

#[test]
fn a_campaign_with_every_vector_empty_is_an_error() {
    let w = Work::new();
    campaign(&w, 3, "");
    for k in 1..=3 {
        let p = w.path(&format!("frames/f{k:04}.csv"));
        let mut s = String::from("x,y,u,v\n");
        for j in 0..G1.ny {
            for i in 0..G1.nx {
                s.push_str(&format!("{},{},,\n", i, j));
            }
        }
        std::fs::write(p, s).unwrap();
    }
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(
        err.contains("nothing to reduce") && err.contains("1 run"),
        "{err}"
    );
    assert!(!w.path("out").exists());
}

/// Two shards over different frames (one regenerated): the boundary
/// hashes differ and merge refuses.
#[test]
fn shards_over_different_frames_do_not_merge() {
    let w = Work::new();
    campaign(&w, 4, "");
    w.ok(&["run", "p.toml", "--shard", "1/2", "--out", "s1", "--quiet"]);
    // Frame 3 (the first of shard 2) changes before shard 2 runs: one digit,
    // so its size (and the list of names and sizes) stays the same.
    let p = w.path("frames/f0003.csv");
    let mut bytes = std::fs::read(&p).unwrap();
    let k = bytes.iter().rposition(|b| b.is_ascii_digit()).unwrap();
    bytes[k] = if bytes[k] == b'9' { b'8' } else { bytes[k] + 1 };
    std::fs::write(&p, bytes).unwrap();
    w.ok(&["run", "p.toml", "--shard", "2/2", "--out", "s2", "--quiet"]);
    let err = w.fails(&["merge", "s1", "s2", "--out", "m"], 1);
    assert!(
        err.contains("s2") && err.contains("frame f0003.csv has another content"),
        "{err}"
    );
    assert!(!w.path("m").exists());
}

#[test]
fn an_edited_partial_does_not_merge() {
    let w = Work::new();
    campaign(&w, 4, "");
    for s in ["1/2", "2/2"] {
        w.ok(&[
            "run",
            "p.toml",
            "--shard",
            s,
            "--out",
            &format!("s{}", &s[..1]),
            "--quiet",
        ]);
    }
    let p = w.path("s2/partial.json");
    let text =
        std::fs::read_to_string(&p)
            .unwrap()
            .replacen("\"rejected\":false", "\"rejected\":true", 1);
    std::fs::write(&p, text).unwrap();
    let err = w.fails(&["merge", "s1", "s2", "--out", "m"], 1);
    assert!(
        err.contains("s2/partial.json") && err.contains("changed"),
        "{err}"
    );
    // An edited accumulator is named too.
    let a = w.path("s1/a/accumulator.bin");
    let mut bytes = std::fs::read(&a).unwrap();
    let k = bytes.len() - 3;
    bytes[k] ^= 1;
    std::fs::write(&a, bytes).unwrap();
    let err = w.fails(&["merge", "s1", "s1", "--out", "m"], 1);
    assert!(
        err.contains("accumulator.bin") && err.contains("changed"),
        "{err}"
    );
    std::fs::remove_file(w.path("s1/partial.sha256")).unwrap();
    let err = w.fails(&["merge", "s1", "s2", "--out", "m"], 1);
    assert!(
        err.contains("partial.sha256") && err.contains("missing"),
        "{err}"
    );
}

#[test]
fn merging_a_folder_that_is_no_partial_is_a_usage_error() {
    let w = Work::new();
    std::fs::create_dir(w.path("nothing")).unwrap();
    let err = w.fails(&["merge", "nothing", "--out", "m"], 2);
    assert!(err.contains("nothing/partial.json"), "{err}");
}

/// The demo-like synthetic campaign (noise estimates in frames.csv) merged
/// from 3 shards: frames.csv byte for byte (the noise estimate once
/// differed by 1 ulp through JSON), statistics to rounding.
#[test]
fn a_merged_synthetic_campaign_equals_a_single_run() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "d", "--frames", "12", "--nx", "24", "--ny", "16",
    ]);
    w.ok(&["run", "d/pipeline.toml", "--out", "whole", "--quiet"]);
    for k in 1..=3 {
        w.ok(&[
            "run",
            "d/pipeline.toml",
            "--shard",
            &format!("{k}/3"),
            "--out",
            &format!("s{k}"),
            "--quiet",
        ]);
    }
    w.ok(&["merge", "s2", "s3", "s1", "--out", "merged", "--quiet"]);
    let runs: Vec<String> = std::fs::read_dir(w.path("whole"))
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.path().join("frames.csv").is_file())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect();
    assert!(!runs.is_empty());
    for r in &runs {
        same_as_single_run(&w, "whole", "merged", r);
        let f = Csv::read(&w.path(&format!("whole/{r}/frames.csv")));
        assert!(f.col("noise_estimate").iter().any(|x| x.is_finite()));
    }
}

// ---- 5. leftovers and signals ---------------------------------------------

fn host() -> String {
    let h = std::fs::read_to_string("/proc/sys/kernel/hostname").unwrap_or_default();
    let h: String = h
        .trim()
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
        .take(64)
        .collect();
    if h.is_empty() {
        "host".into()
    } else {
        h
    }
}

#[test]
fn leftovers_of_killed_runs_are_cleaned_at_the_next_run() {
    let w = Work::new();
    campaign(&w, 3, "");
    // A dead process id (above the kernel's default pid_max of 4194304).
    let stale = w.path(&format!(".out.partial-{}-4999999", host()));
    std::fs::create_dir_all(stale.join("a")).unwrap();
    std::fs::write(stale.join("a/ensemble.csv"), "half").unwrap();
    // A live process (this test) is never touched.
    let live = w.path(&format!(".out.partial-{}-{}", host(), std::process::id()));
    std::fs::create_dir_all(&live).unwrap();
    let o = w.curlew(&["run", "p.toml", "--out", "out", "--quiet"]);
    assert!(o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("removed") && err.contains("4999999"), "{err}");
    assert!(!stale.exists() && live.exists());
}

#[test]
fn an_old_output_moved_aside_by_a_killed_commit_is_put_back() {
    let w = Work::new();
    let before = reduced(&w);
    let old = w.path(&format!(".out.old-{}-4999999", host()));
    std::fs::rename(w.path("out"), &old).unwrap();
    // The next run fails (bad pipeline value) but the old output is back.
    w.write(
        "p.toml",
        &pipeline(
            Units::MmMs,
            "[smoothing]\nmethod = \"gaussian\"\nsigma = 10\n",
        ),
    );
    let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
    assert!(err.contains("put back"), "{err}");
    assert_eq!(std::fs::read(w.path("out/a/ensemble.csv")).unwrap(), before);
    no_leftovers(w.dir.path());
}

#[cfg(unix)]
#[test]
fn sigint_and_sigterm_remove_the_unfinished_output() {
    use std::process::{Command, Stdio};
    let w = Work::new();
    let before = reduced(&w);
    write_frames(
        &w.path("frames"),
        G {
            nx: 48,
            ny: 40,
            ..G1
        },
        60,
        Units::MmMs,
        swirl,
    );
    for (sig, code) in [("INT", 130), ("TERM", 143)] {
        let child = Command::new(env!("CARGO_BIN_EXE_curlew"))
            .args(["run", "p.toml", "--out", "out", "--quiet", "--jobs", "1"])
            .current_dir(w.dir.path())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let partial = w.path(&format!(".out.partial-{}-{}", host(), child.id()));
        let t = std::time::Instant::now();
        while !partial.exists() && t.elapsed().as_secs() < 60 {
            std::thread::sleep(std::time::Duration::from_millis(5));
        }
        assert!(partial.exists(), "the run never started its output");
        let ok = Command::new("kill")
            .args([&format!("-{sig}"), &child.id().to_string()])
            .status()
            .unwrap();
        assert!(ok.success());
        let o = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(code), "SIG{sig}: {err}");
        assert!(err.contains("interrupted"), "{err}");
        assert!(!partial.exists(), "SIG{sig} left {}", partial.display());
        assert_eq!(std::fs::read(w.path("out/a/ensemble.csv")).unwrap(), before);
    }
}

// ---- 6. messages ----------------------------------------------------------

#[test]
fn a_stray_row_is_reported_with_its_line_and_a_short_pitch() {
    let w = Work::new();
    campaign(&w, 2, "");
    set_line(&w, "frames/f0001.csv", 4, "20.5,1,0.1,0");
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(
        err.contains("f0001.csv:4 (column 'x')") && err.contains("x = 20.5"),
        "{err}"
    );
    assert!(
        err.contains("pitch 1,") || err.contains("pitch 1 "),
        "{err}"
    );
    assert!(err.len() < 400, "{err}");
}

#[test]
fn cr_only_line_endings_are_read_and_errors_show_no_raw_cr() {
    let w = Work::new();
    campaign(&w, 2, "");
    for k in 1..=2 {
        let p = w.path(&format!("frames/f{k:04}.csv"));
        let t = std::fs::read_to_string(&p).unwrap().replace('\n', "\r");
        std::fs::write(&p, t).unwrap();
    }
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    let p = w.path("frames/f0002.csv");
    let t = std::fs::read_to_string(&p).unwrap();
    let mut lines: Vec<&str> = t.split('\r').collect();
    let bad = lines[4].replacen(",0.", ",zz0.", 1);
    lines[4] = &bad;
    std::fs::write(&p, lines.join("\r")).unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0002.csv:5") && err.contains("zz0."), "{err}");
    assert!(!err.contains('\r'), "{err:?}");
}

#[test]
fn run_ids_are_checked_when_the_pipeline_is_read() {
    let w = Work::new();
    campaign(&w, 2, "");
    let long = "r".repeat(300);
    for id in ["campaign.csv", "compare", "a/b", ".hidden", "x y", &long] {
        w.write(
            "p.toml",
            &pipeline(Units::MmMs, "").replace("id = \"a\"", &format!("id = \"{id}\"")),
        );
        let line = line_of(&w, "id =");
        for cmd in ["run", "check"] {
            let err = w.fails(&[cmd, "p.toml"], 2);
            assert!(
                err.contains(&format!("p.toml:{line}")) && err.contains("[[run]] id"),
                "{err}"
            );
            assert!(err.len() < 400, "{err}");
        }
    }
    assert!(!w.path("out").exists());
}

#[test]
fn a_missing_or_non_utf8_pipeline_is_a_usage_error() {
    let w = Work::new();
    let err = w.fails(&["run", "nowhere.toml"], 2);
    assert!(
        err.contains("nowhere.toml") && err.contains("cannot read the pipeline"),
        "{err}"
    );
    let err = w.fails(&["check", "nowhere.toml"], 2);
    assert!(err.contains("nowhere.toml"), "{err}");
    std::fs::write(w.path("p.toml"), b"[campaign]\nname = \"t\xff\xfe\"\n").unwrap();
    let err = w.fails(&["run", "p.toml"], 2);
    assert!(err.contains("p.toml:2") && err.contains("UTF-8"), "{err}");
}

#[test]
fn a_very_long_line_is_clipped_in_the_message() {
    let w = Work::new();
    campaign(&w, 2, "");
    set_line(
        &w,
        "frames/f0001.csv",
        3,
        &format!("1,1,{},0", "9".repeat(1 << 20) + "x"),
    );
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(
        err.contains("f0001.csv:3 (column 'u')") && err.contains("more characters"),
        "{err}"
    );
    assert!(err.len() < 400, "stderr is {} bytes", err.len());
    // A huge header without the wanted column.
    let p = w.path("frames/f0002.csv");
    let t = std::fs::read_to_string(&p).unwrap();
    std::fs::write(
        &p,
        t.replacen("x,y,u,v", &format!("x,y,u,{}", "w".repeat(100_000)), 1),
    )
    .unwrap();
    std::fs::write(w.path("frames/f0001.csv"), t).unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0002.csv:1") && err.contains("'v'"), "{err}");
    assert!(err.len() < 600, "stderr is {} bytes", err.len());
}

/// Range errors of pipeline keys name the line the key is on.
#[test]
fn range_errors_name_the_line_of_the_key() {
    let cases: [(&str, &str); 8] = [
        (
            "[validation]\nmax_rejected_fraction = 2\n",
            "max_rejected_fraction",
        ),
        ("[validation]\nmedian = { radius = 3 }\n", "median"),
        ("[fill]\nmin_neighbours = 9\n", "min_neighbours"),
        (
            "[fill]\nmethod = \"inpaint\"\niterations = 1\n",
            "iterations",
        ),
        (
            "[smoothing]\nmethod = \"savitzky-golay\"\nhalf_width = 40\n",
            "half_width",
        ),
        ("[smoothing]\nmethod = \"gaussian\"\nsigma = -1\n", "sigma"),
        ("[smoothing]\nmethod = \"pls\"\ns = 1e9\n", "s ="),
        ("[figures]\nvorticity_limit = -1\n", "vorticity_limit"),
    ];
    for (extra, key) in cases {
        let w = Work::new();
        campaign(&w, 2, extra);
        let line = line_of(&w, key);
        let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
        assert!(err.contains(&format!("p.toml:{line}")), "{extra}: {err}");
    }
}

#[test]
fn a_frame_table_with_a_bad_value_names_file_line_and_column() {
    let w = Work::new();
    campaign(&w, 2, "");
    w.write(
        "ft.csv",
        &format!("frame,time_s\nf0001,0\nf0002,{}\n", "7".repeat(5000) + "q"),
    );
    let p = pipeline(Units::MmMs, "").replace(
        "frames = \"frames/*.csv\"\n",
        "frames = \"frames/*.csv\"\nframe_table = \"ft.csv\"\n",
    );
    w.write("p.toml", &p);
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("ft.csv:3 (column 'time_s')"), "{err}");
    assert!(err.len() < 400, "{err}");
}
