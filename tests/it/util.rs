//! The harness: a temporary work folder, the curlew binary, and a small
//! campaign writer (analytic fields written as frame files).

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

pub struct Work {
    pub dir: tempfile::TempDir,
}

impl Work {
    pub fn new() -> Work {
        Work {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }
    pub fn path(&self, rel: &str) -> PathBuf {
        self.dir.path().join(rel)
    }
    pub fn write(&self, rel: &str, text: &str) -> PathBuf {
        let p = self.path(rel);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, text).unwrap();
        p
    }
    /// Runs curlew with `args` in the work folder.
    pub fn curlew(&self, args: &[&str]) -> Output {
        Command::new(env!("CARGO_BIN_EXE_curlew"))
            .args(args)
            .current_dir(self.dir.path())
            .output()
            .expect("run curlew")
    }
    /// Runs curlew and asserts success, returning stdout.
    pub fn ok(&self, args: &[&str]) -> String {
        let o = self.curlew(args);
        assert!(
            o.status.success(),
            "curlew {args:?} failed ({:?}):\n{}\n{}",
            o.status.code(),
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        );
        String::from_utf8_lossy(&o.stdout).into_owned()
    }
    /// Runs curlew, asserts the exit code, returns stderr.
    pub fn fails(&self, args: &[&str], code: i32) -> String {
        let o = self.curlew(args);
        let err = String::from_utf8_lossy(&o.stderr).into_owned();
        assert_eq!(
            o.status.code(),
            Some(code),
            "curlew {args:?}: stderr:\n{err}"
        );
        err
    }
}

/// Units to write a campaign in.
#[derive(Clone, Copy)]
pub enum Units {
    /// x, y in mm; u, v in m/s.
    MmMs,
    /// x, y in px; u, v in px of displacement (pixel size PX, pulse separation DT).
    Px,
}

pub const PX: f64 = 2.0e-5; // m per px
pub const DT: f64 = 4.0e-4; // s

/// A grid of nx × ny nodes at pitch h (m) from (x0, y0).
#[derive(Clone, Copy)]
pub struct G {
    pub nx: usize,
    pub ny: usize,
    pub h: f64,
    pub x0: f64,
    pub y0: f64,
}

/// Writes `n` frames `dir/f0001.csv…` of `f(x, y, k) -> (u, v)` (SI), rows
/// in reverse order (any order is allowed), in `units`.
pub fn write_frames(
    dir: &Path,
    g: G,
    n: usize,
    units: Units,
    f: impl Fn(f64, f64, usize) -> (f64, f64),
) {
    std::fs::create_dir_all(dir).unwrap();
    for k in 0..n {
        let mut s = String::from("x,y,u,v\n");
        for j in (0..g.ny).rev() {
            for i in (0..g.nx).rev() {
                let x = g.x0 + i as f64 * g.h;
                let y = g.y0 + j as f64 * g.h;
                let (u, v) = f(x, y, k);
                match units {
                    Units::MmMs => s.push_str(&format!("{},{},{},{}\n", x * 1e3, y * 1e3, u, v)),
                    Units::Px => s.push_str(&format!(
                        "{},{},{},{}\n",
                        x / PX,
                        y / PX,
                        u * DT / PX,
                        v * DT / PX
                    )),
                }
            }
        }
        std::fs::write(dir.join(format!("f{:04}.csv", k + 1)), s).unwrap();
    }
}

/// A pipeline for one run `a` reading `frames/*.csv` in `units`.
pub fn pipeline(units: Units, extra: &str) -> String {
    let input = match units {
        Units::MmMs => "length_unit = \"mm\"\nvelocity_unit = \"m/s\"\n".to_string(),
        Units::Px => format!(
            "length_unit = \"px\"\nvelocity_unit = \"px\"\npixel_size = {PX:e}\npulse_separation = {DT:e}\n"
        ),
    };
    format!(
        "[campaign]\nname = \"t\"\n\n[input]\nformat = \"csv\"\n{input}\n{extra}\n[[run]]\nid = \"a\"\nframes = \"frames/*.csv\"\n"
    )
}

/// A pipeline's text without its `frame_table` lines (runs with no times
/// and no phases).
pub fn without_frame_table(text: &str) -> String {
    text.lines()
        .filter(|l| !l.starts_with("frame_table"))
        .map(|l| format!("{l}\n"))
        .collect()
}

/// A decoded CSV table: header and rows of numbers (empty cells as NaN).
pub struct Csv {
    pub header: Vec<String>,
    pub rows: Vec<Vec<f64>>,
}

impl Csv {
    pub fn read(p: &Path) -> Csv {
        let text = std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
        let mut lines = text.lines();
        let header: Vec<String> = lines
            .next()
            .unwrap()
            .split(',')
            .map(|s| s.to_string())
            .collect();
        let rows = lines
            .map(|l| {
                l.split(',')
                    .map(|c| {
                        if c.is_empty() {
                            f64::NAN
                        } else {
                            c.parse().unwrap_or(f64::NAN)
                        }
                    })
                    .collect()
            })
            .collect();
        Csv { header, rows }
    }
    pub fn col(&self, name: &str) -> Vec<f64> {
        let k = self
            .header
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column {name} in {:?}", self.header));
        self.rows.iter().map(|r| r[k]).collect()
    }
}

/// |a - b| <= abs + rel |b| for every pair, NaN matching NaN.
#[track_caller]
pub fn assert_all_close(a: &[f64], b: &[f64], abs: f64, rel: f64, what: &str) {
    assert_eq!(a.len(), b.len(), "{what}: lengths");
    for (k, (x, y)) in a.iter().zip(b).enumerate() {
        let ok = (x.is_nan() && y.is_nan()) || (x - y).abs() <= abs + rel * y.abs();
        assert!(ok, "{what}[{k}]: {x:e} vs {y:e}");
    }
}
