//! Reliability (issue: no data loss, no crash, no hang on any input): every
//! case asserts the exit status of CONTRACT (1 data, 2 usage) and that the
//! message names the place (file, line, key or column); cases that could
//! lose data assert that the inputs and an earlier output survive.

use std::path::Path;

use crate::util::*;

pub(crate) const G1: G = G {
    nx: 8,
    ny: 6,
    h: 1.0e-3,
    x0: 0.0,
    y0: 0.0,
};

pub(crate) fn swirl(x: f64, y: f64, k: usize) -> (f64, f64) {
    let s = 1.0 + 0.01 * k as f64;
    (0.1 + s * (y - 2.5e-3), -s * (x - 3.5e-3))
}

/// Frames and a pipeline, no run yet.
pub(crate) fn campaign(w: &Work, n: usize, extra: &str) {
    write_frames(&w.path("frames"), G1, n, Units::MmMs, swirl);
    w.write("p.toml", &pipeline(Units::MmMs, extra));
}

/// A campaign already reduced into `out`; returns its ensemble bytes.
pub(crate) fn reduced(w: &Work) -> Vec<u8> {
    campaign(w, 4, "");
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    std::fs::read(w.path("out/a/ensemble.csv")).unwrap()
}

/// The 1-based line of the first line of `p.toml` that starts with `key`.
pub(crate) fn line_of(w: &Work, key: &str) -> usize {
    let text = std::fs::read_to_string(w.path("p.toml")).unwrap();
    text.lines().position(|l| l.starts_with(key)).unwrap() + 1
}

/// Replaces line `no` (1-based) of `rel` by `with`.
pub(crate) fn set_line(w: &Work, rel: &str, no: usize, with: &str) {
    let p = w.path(rel);
    let text = std::fs::read_to_string(&p).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    lines[no - 1] = with.to_string();
    std::fs::write(&p, lines.join("\n") + "\n").unwrap();
}

/// Reduces `p.toml` as shards 1/2 and 2/2 into `s1` and `s2`.
pub(crate) fn two_shards(w: &Work) {
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
}

pub(crate) fn no_leftovers(dir: &Path) {
    let stray: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".partial-") || n.contains(".old-"))
        .collect();
    assert!(stray.is_empty(), "leftovers: {stray:?}");
}

pub(crate) fn frames_intact(w: &Work, n: usize) {
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
    two_shards(&w);
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
