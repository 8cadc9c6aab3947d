//! Vortex cores end to end: `[vortices]` with `[budget]` on synth's wake,
//! `vortices.csv`, `tracks.csv`, `circulation-budget.csv`, `curlew check`.

use crate::util::*;

/// synth's street at 0.15 m/s behind a 10 mm cylinder: vortices convect at
/// Uc = 0.85 U exactly (src/synth/flows.rs), shed at f = St U / D.
const U: f64 = 0.15;
const UC: f64 = 0.85 * U;
const F: f64 = 0.21 * U / 0.01;

#[test]
fn wake_cores_are_tracked_at_the_street_speed_and_their_budget_is_written() {
    let w = Work::new();
    w.ok(&[
        "synth",
        "wake",
        "--out",
        "c",
        "--frames",
        "240",
        "--seed",
        "3",
        "--speeds",
        "0.15",
        "--nx",
        "81",
        "--ny",
        "41",
        "--pitch-mm",
        "1",
        "--outliers",
        "0",
        "--gaps",
        "0",
    ]);
    let p = w.path("c/pipeline.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    let text = format!(
        "[vortices]\n\n[budget]\n\n{text}\n[run.conditions]\nviscosity = 1e-6\nfrequency = {F}\n"
    );
    std::fs::write(&p, text).unwrap();
    let check = w.ok(&["check", "c/pipeline.toml"]);
    assert!(
        check.contains("vortices: vortex cores: connected regions (4-connectivity)"),
        "{check}"
    );
    assert!(
        check.contains("circulation budget of every core"),
        "{check}"
    );
    w.ok(&["run", "c/pipeline.toml", "--out", "out", "--quiet"]);
    let v = Csv::read(&w.path("out/u015/vortices.csv"));
    assert_eq!(
        &v.header[..6],
        &[
            "slice_kind",
            "slice",
            "phase_deg",
            "time_s",
            "core",
            "track"
        ]
    );
    // slice -1 is the mean field; bins are 0..11
    let bins = v.col("slice").iter().filter(|s| **s >= 0.0).count();
    assert!(bins >= 24, "{bins} bin cores");
    // Every core off the edge has a finite, positive circulation
    // uncertainty smaller than its circulation; cut cores may have none
    // (NaN, never 0: a regression of NaN turned into 0 by f64::max).
    let (g, u, e) = (
        v.col("circulation"),
        v.col("circulation_unc"),
        v.col("edge"),
    );
    for k in 0..g.len() {
        assert!(u[k] != 0.0, "circulation {} ± 0", g[k]);
        if e[k] == 0.0 {
            assert!(
                u[k] > 0.0 && u[k] < g[k].abs(),
                "circulation {} ± {}",
                g[k],
                u[k]
            );
        }
    }
    let t = Csv::read(&w.path("out/u015/tracks.csv"));
    let (n, uc, ucu) = (t.col("n_points"), t.col("u_conv"), t.col("u_conv_unc"));
    let mut seen = 0;
    for k in 0..n.len() {
        if n[k] >= 12.0 && t.col("point")[k] == 0.0 {
            seen += 1;
            eprintln!(
                "track of {} points: u_conv {} ± {} (Uc {UC})",
                n[k], uc[k], ucu[k]
            );
            assert!((uc[k] / UC - 1.0).abs() < 0.02, "u_conv {} vs {UC}", uc[k]);
        }
    }
    assert!(seen >= 2, "long tracks: {seen}");
    let b = Csv::read(&w.path("out/u015/circulation-budget.csv"));
    assert!(!b.rows.is_empty());
    assert_eq!(b.header.last().unwrap(), "residual_unc");
    // an uncertainty is NaN where it cannot be made, never 0 (f64::max once
    // turned the kernel's NaN at edge cores into 0)
    for name in b.header.iter().filter(|h| h.ends_with("_unc")) {
        assert!(
            b.col(name).iter().all(|&u| u != 0.0),
            "{name}: a zero uncertainty"
        );
    }
    assert!(w.path("out/u015/figures/vortex-tracks.png").exists());
    assert!(w.path("out/u015/figures/vortex-circulation.svg").exists());
    // the budget along the longest track of each sign: drawn only when the
    // track's points meet budget rows of the same bins (within 2 pitches)
    assert!(w.path("out/u015/figures/vortex-budget.svg").exists());
}
