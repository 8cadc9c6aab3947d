//! The vorticity transport budget end to end: `[budget]`, `budget.csv`,
//! `curlew check`, shards.

use crate::util::*;

const G2: G = G {
    nx: 25,
    ny: 25,
    h: 0.5e-3,
    x0: -6e-3,
    y0: -6e-3,
};
const GAMMA: f64 = 2e-4;
const RC: f64 = 3e-3;
const R: f64 = 1.5e-3;
const F: f64 = 2.0;

/// Centre of the vortex of frame `k`: round a circle of radius R, 45° per
/// frame, frames at the centres of 8 bins (22.5° + 45° k).
fn centre(k: usize) -> (f64, f64) {
    let th = (22.5 + 45.0 * k as f64).to_radians();
    (R * th.cos(), R * th.sin())
}

/// A Lamb-Oseen vortex (Saffman 1992, *Vortex Dynamics* §1.3) at `centre(k)`.
fn circling(x: f64, y: f64, k: usize) -> (f64, f64) {
    let (xc, yc) = centre(k);
    let (dx, dy) = (x - xc, y - yc);
    let r2 = dx * dx + dy * dy;
    let g = if r2 == 0.0 {
        1.0 / (RC * RC)
    } else {
        -(-r2 / (RC * RC)).exp_m1() / r2
    };
    let k = GAMMA / (2.0 * std::f64::consts::PI) * g;
    (-k * dy, k * dx)
}

fn campaign(w: &Work, n: usize) {
    write_frames(&w.path("frames"), G2, n, Units::MmMs, circling);
    let mut ft = String::from("frame,time_s,phase_deg\n");
    for k in 0..n {
        ft.push_str(&format!(
            "f{:04},{},{}\n",
            k + 1,
            k as f64 * 0.0625,
            22.5 + 45.0 * k as f64
        ));
    }
    w.write("frames.csv", &ft);
    // Exact analytic data: the normalized median test is off. Its default
    // eps without a calibration is the frame's estimated noise, about zero
    // here, and with eps -> 0 the test rejects exact vectors wherever the
    // flow curves (Westerweel & Scarano 2005 add eps for that reason).
    let p = pipeline(
        Units::MmMs,
        "[validation]\nmedian = { enabled = false }\n\n[phase]\nbins = 8\n\n[budget]\n",
    )
    .replace(
        "frames = \"frames/*.csv\"\n",
        &format!("frames = \"frames/*.csv\"\nframe_table = \"frames.csv\"\n\n[run.conditions]\nviscosity = 1e-6\nfrequency = {F}\n"),
    );
    w.write("p.toml", &p);
}

#[test]
fn phase_locked_budget_is_written_and_its_unsteady_term_follows_the_bins() {
    let w = Work::new();
    campaign(&w, 24);
    let check = w.ok(&["check", "p.toml"]);
    assert!(check.contains("budget: central differences"), "{check}");
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    let b = Csv::read(&w.path("out/a/budget.csv"));
    assert_eq!(b.rows.len(), 8 * G2.nx * G2.ny);
    assert_eq!(
        &b.header[..9],
        &[
            "slice",
            "phase_deg",
            "time_s",
            "x",
            "y",
            "n",
            "u",
            "v",
            "omega"
        ]
    );
    assert_eq!(b.header.last().unwrap(), "significant");
    assert!(w.path("out/a/budget.parquet").exists());
    // Kinematic truth, end to end (binning, 2 pi f, the periodic central
    // difference): the same difference of the exact Lamb-Oseen vorticity
    // (Saffman 1992) over bins 7 and 1, times K f / 2, at bin 0's nodes.
    // (Its truncation against d omega/dt is checked in budget::tests.)
    let (x, y, s, un) = (b.col("x"), b.col("y"), b.col("slice"), b.col("unsteady"));
    let omega = |k: usize, x: f64, y: f64| {
        let (xc, yc) = centre(k);
        let r2 = (x - xc).powi(2) + (y - yc).powi(2);
        GAMMA / (std::f64::consts::PI * RC * RC) * (-r2 / (RC * RC)).exp()
    };
    let (mut err, mut peak, mut nodes) = (0.0f64, 0.0f64, 0);
    for r in 0..b.rows.len() {
        if s[r] != 0.0 || !un[r].is_finite() {
            continue;
        }
        let want = (omega(1, x[r], y[r]) - omega(7, x[r], y[r])) * 8.0 * F / 2.0;
        peak = peak.max(want.abs());
        err = err.max((un[r] - want).abs());
        nodes += 1;
    }
    assert_eq!(nodes, 21 * 21, "interior nodes with an unsteady term");
    // the only difference left: omega from central differences (2.1 % here)
    assert!(err < 0.03 * peak, "largest error {err} of peak {peak}");
}

#[test]
fn budget_of_merged_shards_equals_one_run() {
    let w = Work::new();
    campaign(&w, 40);
    w.ok(&["run", "p.toml", "--out", "whole", "--quiet"]);
    for s in ["1/2", "2/2"] {
        let out = format!("part{}", &s[..1]);
        w.ok(&["run", "p.toml", "--shard", s, "--out", &out, "--quiet"]);
    }
    assert!(w.path("part1/a/budget.bin").exists());
    w.ok(&["merge", "part2", "part1", "--out", "merged", "--quiet"]);
    let a = Csv::read(&w.path("whole/a/budget.csv"));
    let b = Csv::read(&w.path("merged/a/budget.csv"));
    assert_eq!(a.header, b.header);
    for name in &a.header {
        assert_all_close(&b.col(name), &a.col(name), 1e-12, 1e-9, name);
    }
}

#[test]
fn check_says_what_the_budget_misses() {
    let w = Work::new();
    campaign(&w, 8);
    let p = std::fs::read_to_string(w.path("p.toml")).unwrap();
    w.write(
        "q.toml",
        &p.replace("viscosity = 1e-6\n", "")
            .replace("frequency = 2\n", ""),
    );
    let out = w.ok(&["check", "q.toml"]);
    assert!(out.contains("no [run.conditions] viscosity"), "{out}");
    assert!(out.contains("no [run.conditions] frequency"), "{out}");
    let bad = p.replace("[budget]\n", "[budget]\nscheme = \"spectral\"\n");
    w.write("r.toml", &bad);
    let err = w.fails(&["check", "r.toml"], 2);
    assert!(err.contains("[budget] scheme = 'spectral'"), "{err}");
}
