//! Reliability against leftovers and signals (split from
//! `reliability.rs`): partial folders of killed runs are cleaned, a live
//! run's are never touched, and an interrupted run leaves no half output.

use super::reliability::*;
use crate::util::*;

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
