//! Vortex cores end to end: `[vortices]` with `[budget]` on synth's wake,
//! `vortices.csv`, `tracks.csv`, `circulation-budget.csv`, `curlew check`.

use crate::util::*;

/// synth's street at 0.15 m/s behind a 10 mm cylinder: vortices convect at
/// Uc = 0.85 U exactly (src/synth/flows.rs), shed at f = St U / D.
const U: f64 = 0.15;
const UC: f64 = 0.85 * U;
const F: f64 = 0.21 * U / 0.01;

/// synth's street at U into `c/` on a 1 mm grid of 81 x 41 nodes (20 to
/// 100 mm downstream), seed 3, no outliers or gaps, with `frames` frames.
fn street(w: &Work, frames: &str, extra: &[&str]) {
    let mut args = vec![
        "synth",
        "wake",
        "--out",
        "c",
        "--frames",
        frames,
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
    ];
    args.extend_from_slice(extra);
    w.ok(&args);
}

#[test]
fn wake_cores_are_tracked_at_the_street_speed_and_their_budget_is_written() {
    let w = Work::new();
    street(&w, "240", &[]);
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
    circulations_are_finite_and_smaller_than_their_value(&v);
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

/// Cores in every frame of a time-resolved run (`[vortices] frames =
/// true`), tracked across frames, with either criterion; shards merge to
/// the single run's tables byte for byte.
///
/// synth's street (src/synth/flows.rs) convects at Uc = 0.85 U exactly,
/// and each core spreads as a Lamb-Oseen vortex, rc² = rc0² + 4 nu t
/// (Saffman 1992, Vortex Dynamics §1.3) with nu = 1e-6 m²/s (synth's
/// water, from memory). 80 frames at 255 Hz: 0.5 mm of convection per
/// frame on a 1 mm grid. Measured at the time of writing: the tracks that
/// span 50 frames or more convect at 0.12733-0.12759 m/s (Gamma2) and
/// 0.12749-0.12755 m/s (swirl) against 0.1275, and grow at 3.6-4.4e-6
/// m²/s against 4e-6.
#[test]
fn frame_cores_of_a_time_resolved_street_are_tracked_at_its_speed() {
    let w = Work::new();
    street(&w, "80", &["--frame-rate", "255"]);
    let text = std::fs::read_to_string(w.path("c/pipeline.toml")).unwrap();
    for criterion in ["gamma2", "swirl"] {
        frame_tracks_at_the_street_speed(&w, &text, criterion);
    }
    shards_merge_the_frame_cores(&w);
}

/// With `criterion`, every one of the 80 frames holds cores, and the frame
/// tracks of 50 points or more convect at `UC` within 2 % and grow at
/// `4 nu` within 15 %.
fn frame_tracks_at_the_street_speed(w: &Work, text: &str, criterion: &str) {
    w.write(
        &format!("c/{criterion}.toml"),
        &format!(
            "[vortices]\nframes = true\ncriterion = \"{criterion}\"\n\n{text}\n[run.conditions]\nfrequency = {F}\n"
        ),
    );
    let check = w.ok(&["check", &format!("c/{criterion}.toml")]);
    assert!(check.contains("cores in every used frame"), "{check}");
    let out = format!("out-{criterion}");
    w.ok(&[
        "run",
        &format!("c/{criterion}.toml"),
        "--out",
        &out,
        "--quiet",
    ]);
    let raw = std::fs::read_to_string(w.path(&format!("{out}/u015/vortices.csv"))).unwrap();
    let frames: std::collections::BTreeSet<&str> = raw
        .lines()
        .filter(|l| l.starts_with("frame,"))
        .map(|l| l.split(',').nth(1).unwrap())
        .collect();
    assert_eq!(frames.len(), 80, "{criterion}: every frame holds cores");
    let t = Csv::read(&w.path(&format!("{out}/u015/tracks.csv")));
    let traw = std::fs::read_to_string(w.path(&format!("{out}/u015/tracks.csv"))).unwrap();
    let is_frame: Vec<bool> = traw
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(2) == Some("frame"))
        .collect();
    let (n, uc, ucu) = (t.col("n_points"), t.col("u_conv"), t.col("u_conv_unc"));
    let (gr, p) = (t.col("growth"), t.col("point"));
    let mut long = 0;
    for k in (0..n.len()).filter(|&k| is_frame[k] && p[k] == 0.0 && n[k] >= 50.0) {
        long += 1;
        eprintln!(
            "{criterion}: frame track of {} points: u_conv {} ± {}, growth {}",
            n[k], uc[k], ucu[k], gr[k]
        );
        assert!(
            (uc[k] / UC - 1.0).abs() < 0.02,
            "{criterion}: u_conv {} vs {UC}",
            uc[k]
        );
        assert!(
            ucu[k] > 0.0 && ucu[k] < 0.01 * UC,
            "{criterion}: ± {}",
            ucu[k]
        );
        assert!(
            (gr[k] / 4e-6 - 1.0).abs() < 0.15,
            "{criterion}: growth {}",
            gr[k]
        );
    }
    assert!(
        long >= 3,
        "{criterion}: {long} frame tracks of 50 frames or more"
    );
}

/// Shards: the frames' cores travel in frame-cores.bin and merge in frame
/// order, so the frame rows equal the single run's byte for byte; the mean
/// and bin rows come from merged sums (equal to rounding, as the shard test
/// of tests/it/run.rs allows for ensemble.csv).
fn shards_merge_the_frame_cores(w: &Work) {
    for s in ["1/2", "2/2"] {
        let out = format!("part{}", &s[..1]);
        w.ok(&[
            "run",
            "c/swirl.toml",
            "--shard",
            s,
            "--out",
            &out,
            "--quiet",
        ]);
    }
    assert!(w.path("part1/u015/frame-cores.bin").exists());
    w.ok(&["merge", "part2", "part1", "--out", "merged", "--quiet"]);
    let frame_rows = |dir: &str| -> Vec<String> {
        std::fs::read_to_string(w.path(&format!("{dir}/u015/vortices.csv")))
            .unwrap()
            .lines()
            .filter(|l| l.starts_with("frame,"))
            .map(String::from)
            .collect()
    };
    let single = frame_rows("out-swirl");
    assert!(single.len() >= 160, "{}", single.len());
    assert!(
        single == frame_rows("merged"),
        "frame rows of the merge differ"
    );
    for f in ["vortices.csv", "tracks.csv"] {
        let a = Csv::read(&w.path(&format!("out-swirl/u015/{f}")));
        let b = Csv::read(&w.path(&format!("merged/u015/{f}")));
        assert_eq!(a.header, b.header);
        for name in &a.header {
            assert_all_close(&b.col(name), &a.col(name), 1e-15, 1e-9, name);
        }
    }
}

/// Every core off the edge has a finite, positive circulation
/// uncertainty smaller than its circulation; cut cores may have none
/// (NaN, never 0: a regression of NaN turned into 0 by f64::max).
fn circulations_are_finite_and_smaller_than_their_value(v: &Csv) {
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
}
