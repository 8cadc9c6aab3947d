//! Bad input: each case exits as docs/interface.md says, names the file (and line
//! where there is one), and leaves an earlier good output folder untouched.

use crate::util::*;

const G1: G = G {
    nx: 8,
    ny: 6,
    h: 1.0e-3,
    x0: 0.0,
    y0: 0.0,
};

fn uniform(_: f64, _: f64, _: usize) -> (f64, f64) {
    (0.1, 0.0)
}

/// A good campaign reduced into `out`; returns the bytes of its ensemble.
fn good(w: &Work) -> Vec<u8> {
    write_frames(&w.path("frames"), G1, 3, Units::MmMs, uniform);
    w.write("p.toml", &pipeline(Units::MmMs, ""));
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    std::fs::read(w.path("out/a/ensemble.csv")).unwrap()
}

fn untouched(w: &Work, before: &[u8]) {
    assert_eq!(
        std::fs::read(w.path("out/a/ensemble.csv")).unwrap(),
        before,
        "the earlier output changed"
    );
    let stray: Vec<_> = std::fs::read_dir(w.dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(stray.is_empty(), "temporary folders left behind: {stray:?}");
}

#[test]
fn a_non_numeric_cell_names_file_line_column_and_value() {
    let w = Work::new();
    let before = good(&w);
    let p = w.path("frames/f0002.csv");
    let text = std::fs::read_to_string(&p).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    lines[4] = lines[4].replacen(",0.1,", ",0.1x,", 1);
    std::fs::write(&p, lines.join("\n") + "\n").unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0002.csv:5"), "{err}");
    assert!(err.contains("'u'") && err.contains("0.1x"), "{err}");
    untouched(&w, &before);
}

#[test]
fn a_missing_column_names_the_column_and_the_file() {
    let w = Work::new();
    let before = good(&w);
    let p = w.path("frames/f0001.csv");
    let text = std::fs::read_to_string(&p)
        .unwrap()
        .replacen("x,y,u,v", "x,y,u,vv", 1);
    std::fs::write(&p, text).unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0001.csv") && err.contains("'v'"), "{err}");
    untouched(&w, &before);
}

#[test]
fn frames_on_different_grids_name_the_first_file_that_differs() {
    let w = Work::new();
    let before = good(&w);
    write_frames(&w.path("other"), G { nx: 9, ..G1 }, 1, Units::MmMs, uniform);
    std::fs::rename(w.path("other/f0001.csv"), w.path("frames/f0003.csv")).unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0003.csv") && err.contains("9 x 6"), "{err}");
    untouched(&w, &before);
    let err = w.fails(&["check", "p.toml"], 1);
    assert!(err.contains("f0003.csv"), "{err}");
}

#[test]
fn an_irregular_grid_names_the_file() {
    let w = Work::new();
    let before = good(&w);
    let p = w.path("frames/f0001.csv");
    let text = std::fs::read_to_string(&p).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    // Move one node by 0.4 of a pitch in x.
    let cells: Vec<String> = lines[3].split(',').map(String::from).collect();
    let x: f64 = cells[0].parse().unwrap();
    lines[3] = format!("{},{},{},{}", x + 0.4, cells[1], cells[2], cells[3]);
    std::fs::write(&p, lines.join("\n") + "\n").unwrap();
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("f0001.csv"), "{err}");
    untouched(&w, &before);
}

#[test]
fn a_glob_that_matches_nothing_names_the_pattern() {
    let w = Work::new();
    let before = good(&w);
    w.write(
        "p.toml",
        &pipeline(Units::MmMs, "").replace("frames/*.csv", "nowhere/*.csv"),
    );
    let err = w.fails(&["run", "p.toml", "--out", "out"], 1);
    assert!(err.contains("nowhere/*.csv"), "{err}");
    untouched(&w, &before);
}

#[test]
fn an_unknown_pipeline_key_is_a_usage_error_naming_key_and_line() {
    let w = Work::new();
    let before = good(&w);
    let text = pipeline(Units::MmMs, "").replace(
        "format = \"csv\"",
        "format = \"csv\"\nvelocty_unit = \"m/s\"",
    );
    let line = text
        .lines()
        .position(|l| l.starts_with("velocty_unit"))
        .unwrap()
        + 1;
    w.write("p.toml", &text);
    let err = w.fails(&["run", "p.toml", "--out", "out"], 2);
    assert!(
        err.contains("velocty_unit") && err.contains(&format!("p.toml:{line}")),
        "{err}"
    );
    untouched(&w, &before);
    w.fails(&["check", "p.toml"], 2);
}

#[test]
fn check_reports_the_plan_and_computes_nothing() {
    let w = Work::new();
    write_frames(&w.path("frames"), G1, 3, Units::MmMs, uniform);
    w.write("p.toml", &pipeline(Units::MmMs, ""));
    let out = w.ok(&["check", "p.toml"]);
    assert!(
        out.contains("8 x 6 nodes") && out.contains("pitch 1.0000 x 1.0000 mm"),
        "{out}"
    );
    assert!(out.contains("frames        3"), "{out}");
    assert!(!w.path("out").exists());
}
