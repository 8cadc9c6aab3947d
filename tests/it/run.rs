//! `curlew run` end to end on analytic campaigns.

use crate::util::*;

const G1: G = G {
    nx: 24,
    ny: 18,
    h: 1.0e-3,
    x0: 0.0,
    y0: 0.0,
};

/// A solid-body rotation of rate OMEGA about (12 mm, 9 mm) (common practice:
/// its vorticity is exactly 2 OMEGA), plus a frame-dependent uniform drift.
const OMEGA: f64 = 3.0;
fn solid(x: f64, y: f64, k: usize) -> (f64, f64) {
    let d = 0.01 * (k as f64 * 0.7).sin();
    (-OMEGA * (y - 9e-3) + 0.1 + d, OMEGA * (x - 12e-3) - 0.5 * d)
}

/// Calibration so the median test's eps is in px in both unit systems.
fn calib() -> String {
    format!("pixel_size = {PX:e}\npulse_separation = {DT:e}\n")
}

fn mm_pipeline(extra: &str) -> String {
    pipeline(Units::MmMs, extra).replace(
        "velocity_unit = \"m/s\"\n",
        &format!("velocity_unit = \"m/s\"\n{}", calib()),
    )
}

const CONTRACT_ENSEMBLE: [&str; 14] = [
    "x",
    "y",
    "n_valid",
    "u_mean",
    "v_mean",
    "u_std",
    "v_std",
    "uv_cov",
    "omega_mean",
    "omega_std",
    "u_mean_unc",
    "v_mean_unc",
    "omega_mean_unc",
    "omega_inst_unc",
];

#[test]
fn every_contract_output_is_written_and_solid_body_vorticity_is_two_omega() {
    let w = Work::new();
    write_frames(&w.path("frames"), G1, 20, Units::MmMs, solid);
    w.write("p.toml", &mm_pipeline(""));
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    for f in [
        "campaign.csv",
        "index.html",
        "manifest.json",
        "a/ensemble.csv",
        "a/ensemble.parquet",
        "a/frames.csv",
    ] {
        let p = w.path(&format!("out/{f}"));
        assert!(
            p.metadata().map(|m| m.len() > 0).unwrap_or(false),
            "missing or empty {f}"
        );
    }
    let e = Csv::read(&w.path("out/a/ensemble.csv"));
    assert_eq!(
        &e.header[..14],
        &CONTRACT_ENSEMBLE,
        "the interface's ensemble columns first, in order (docs/interface.md)"
    );
    assert_eq!(e.rows.len(), G1.nx * G1.ny);
    // Every node valid in every frame of a clean analytic field.
    assert!(e.col("n_valid").iter().all(|&n| n == 20.0));
    // The linear field's vorticity is exact for every stencil (common practice).
    let om = e.col("omega_mean");
    let interior: Vec<f64> = om.iter().copied().filter(|v| v.is_finite()).collect();
    assert!(interior.len() >= (G1.nx - 4) * (G1.ny - 4));
    for v in interior {
        assert!((v - 2.0 * OMEGA).abs() < 1e-9, "omega_mean {v}");
    }
    let frames = Csv::read(&w.path("out/a/frames.csv"));
    assert_eq!(
        &frames.header[..5],
        &[
            "frame",
            "n_vectors",
            "n_invalid_input",
            "n_outliers",
            "n_replaced"
        ]
    );
    assert_eq!(frames.rows.len(), 20);
    assert!(frames
        .col("n_vectors")
        .iter()
        .all(|&n| n == (G1.nx * G1.ny) as f64));
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("out/manifest.json")).unwrap())
            .unwrap();
    assert_eq!(m["version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(
        m["inputs"].as_array().unwrap().len(),
        20,
        "every input file with size and hash"
    );
    assert_eq!(m["inputs"][0]["sha256"].as_str().unwrap().len(), 64);
}

/// A Lamb–Oseen vortex drifting across the field, with a frame-dependent
/// circulation (analytic; Saffman 1992 for the profile).
fn drifting_vortex(x: f64, y: f64, k: usize) -> (f64, f64) {
    let (xc, yc) = (10e-3 + 0.2e-3 * k as f64, 8e-3);
    let gamma = 4e-4 * (1.0 + 0.1 * (k as f64).cos());
    let rc = 3e-3;
    let (dx, dy) = (x - xc, y - yc);
    let r2 = dx * dx + dy * dy;
    let ut = if r2 == 0.0 {
        0.0
    } else {
        gamma / (2.0 * std::f64::consts::PI * r2) * (1.0 - (-r2 / (rc * rc)).exp())
    };
    (0.05 - ut * dy, ut * dx)
}

#[test]
fn the_same_campaign_in_px_and_in_mm_gives_the_same_ensemble() {
    let w = Work::new();
    write_frames(&w.path("mm/frames"), G1, 12, Units::MmMs, drifting_vortex);
    write_frames(&w.path("px/frames"), G1, 12, Units::Px, drifting_vortex);
    w.write("mm/p.toml", &mm_pipeline(""));
    w.write("px/p.toml", &pipeline(Units::Px, ""));
    w.ok(&["run", "mm/p.toml", "--out", "o_mm", "--quiet"]);
    w.ok(&["run", "px/p.toml", "--out", "o_px", "--quiet"]);
    let a = Csv::read(&w.path("o_mm/a/ensemble.csv"));
    let b = Csv::read(&w.path("o_px/a/ensemble.csv"));
    assert_eq!(a.header, b.header);
    for name in &a.header {
        let (ca, cb) = (a.col(name), b.col(name));
        let scale = cb
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |m, v| m.max(v.abs()));
        assert_all_close(&ca, &cb, 1e-9 * scale, 1e-9, name);
    }
}

#[test]
fn results_do_not_depend_on_the_number_of_threads() {
    let w = Work::new();
    write_frames(&w.path("frames"), G1, 40, Units::MmMs, drifting_vortex);
    w.write("p.toml", &mm_pipeline(""));
    w.ok(&["run", "p.toml", "--out", "j1", "--jobs", "1", "--quiet"]);
    w.ok(&["run", "p.toml", "--out", "j3", "--jobs", "3", "--quiet"]);
    // 40 frames are 3 chunks, merged by `RunState::merge` in frame order
    // whichever thread finishes first
    for f in ["a/ensemble.csv", "a/frames.csv", "campaign.csv"] {
        let a = std::fs::read(w.path(&format!("j1/{f}"))).unwrap();
        let b = std::fs::read(w.path(&format!("j3/{f}"))).unwrap();
        assert!(a == b, "{f} differs between --jobs 1 and --jobs 3");
    }
}

#[test]
fn shards_merged_equal_one_run() {
    let w = Work::new();
    write_frames(&w.path("frames"), G1, 37, Units::MmMs, drifting_vortex);
    w.write("p.toml", &mm_pipeline(""));
    w.ok(&["run", "p.toml", "--out", "whole", "--quiet"]);
    for s in ["1/3", "2/3", "3/3"] {
        let out = format!("part{}", &s[..1]);
        w.ok(&["run", "p.toml", "--shard", s, "--out", &out, "--quiet"]);
    }
    // Any order of the partial folders.
    w.ok(&[
        "merge", "part3", "part1", "part2", "--out", "merged", "--quiet",
    ]);
    let a = Csv::read(&w.path("whole/a/ensemble.csv"));
    let b = Csv::read(&w.path("merged/a/ensemble.csv"));
    assert_eq!(a.header, b.header);
    for name in &a.header {
        // A debiased truncation estimate, sqrt(b^2 - u(b)^2), and the
        // uncertainties that include it cancel where
        // b is near its own noise and so amplifies the merged sums' last-bit
        // rounding (seen: 5.7e-12 relative at an edge node); .ci/slurm.sh
        // gives these columns the same allowance relative to their value.
        let rel = if name.ends_with("_bias") || name.contains("_unc") {
            1e-9
        } else {
            1e-12
        };
        assert_all_close(&b.col(name), &a.col(name), 1e-15, rel, name);
    }
    let fa = std::fs::read(w.path("whole/a/frames.csv")).unwrap();
    let fb = std::fs::read(w.path("merged/a/frames.csv")).unwrap();
    assert!(
        fa == fb,
        "frames.csv of the merge differs from the single run:\n{}\n{}",
        String::from_utf8_lossy(&fa),
        String::from_utf8_lossy(&fb)
    );
    // The peak-locking diagnostic (integer histograms) merges exactly.
    let peak = |dir: &str| {
        let m: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(w.path(&format!("{dir}/manifest.json"))).unwrap(),
        )
        .unwrap();
        m["runs"][0]["peak_locking"].clone()
    };
    let (pa, pb) = (peak("whole"), peak("merged"));
    assert!(pa["n"].as_u64().unwrap() > 0, "{pa}");
    assert_eq!(
        pa, pb,
        "peak locking of the merge differs from the single run"
    );
    // A missing shard is an error that says which shards it got.
    let err = w.fails(&["merge", "part1", "part3", "--out", "bad"], 1);
    assert!(err.contains("exactly once"), "{err}");
    assert!(!w.path("bad").exists());
}

#[test]
fn phases_from_the_frame_table_give_phase_tables() {
    let w = Work::new();
    write_frames(&w.path("frames"), G1, 24, Units::MmMs, solid);
    let mut ft = String::from("frame,time_s,phase_deg\n");
    for k in 0..24 {
        ft.push_str(&format!(
            "f{:04},{},{}\n",
            k + 1,
            k as f64 * 0.01,
            (k * 45) as f64 + 720.0
        ));
    }
    w.write("frames.csv", &ft);
    let p = mm_pipeline("[phase]\nbins = 8\n").replace(
        "frames = \"frames/*.csv\"\n",
        "frames = \"frames/*.csv\"\nframe_table = \"frames.csv\"\n",
    );
    w.write("p.toml", &p);
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    let ph = Csv::read(&w.path("out/a/phase.csv"));
    assert_eq!(&ph.header[..3], &["phase_bin", "phase_deg", "n_frames"]);
    assert_eq!(&ph.header[3..17], &CONTRACT_ENSEMBLE);
    assert_eq!(ph.rows.len(), 8 * G1.nx * G1.ny);
    // Phases 720 + 45 k fall three to a bin (24 frames, 8 bins of 45°).
    assert!(ph.col("n_frames").iter().all(|&n| n == 3.0));
    let centres: Vec<f64> = ph
        .col("phase_deg")
        .iter()
        .step_by(G1.nx * G1.ny)
        .copied()
        .collect();
    assert_all_close(
        &centres,
        &[22.5, 67.5, 112.5, 157.5, 202.5, 247.5, 292.5, 337.5],
        1e-12,
        0.0,
        "bin centres",
    );
}

#[test]
fn frame_fields_are_written_on_request() {
    let w = Work::new();
    write_frames(&w.path("frames"), G1, 3, Units::MmMs, solid);
    w.write("p.toml", &mm_pipeline("[output]\nframe_fields = true\n"));
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    let f = Csv::read(&w.path("out/a/fields/f0002.csv"));
    assert_eq!(
        f.header,
        ["x", "y", "u", "v", "status", "omega", "omega_unc"]
    );
    assert_eq!(f.rows.len(), G1.nx * G1.ny);
    assert!(f.col("status").iter().all(|&s| s == 0.0));
    let (u, v) = solid(f.col("x")[30], f.col("y")[30], 1);
    assert!((f.col("u")[30] - u).abs() < 1e-12 && (f.col("v")[30] - v).abs() < 1e-12);
}
