use super::fixtures::{grid, run, VORTEX};
use super::*;

/// Width and height from a PNG's IHDR chunk (PNG spec, ISO/IEC 15948 §11.2.2).
pub(crate) fn png_size(path: &Path) -> (u32, u32) {
    let b = std::fs::read(path).unwrap();
    assert_eq!(
        &b[..8],
        b"\x89PNG\r\n\x1a\n",
        "{} is not a PNG",
        path.display()
    );
    assert_eq!(&b[12..16], b"IHDR");
    let be = |s: &[u8]| u32::from_be_bytes([s[0], s[1], s[2], s[3]]);
    (be(&b[16..20]), be(&b[20..24]))
}

#[test]
fn run_figures_write_every_figure_as_png_and_svg() {
    let dir = tempfile::tempdir().unwrap();
    let r = run("r1", &VORTEX, grid(64, 48));
    let t0 = std::time::Instant::now();
    let figs = run_figures(&Params::default(), &r, dir.path()).unwrap();
    // A record, not a timed assertion (shared machines are noisy).
    eprintln!(
        "{} figures for a 64 x 48 grid in {:.2} s",
        figs.len(),
        t0.elapsed().as_secs_f64()
    );
    // Set CURLEW_FIGURE_PREVIEW=DIR to keep a copy for looking at.
    if let Ok(keep) = std::env::var("CURLEW_FIGURE_PREVIEW") {
        run_figures(&Params::default(), &r, Path::new(&keep)).unwrap();
    }
    let stems: Vec<String> = figs
        .iter()
        .map(|f| f.png.file_stem().unwrap().to_string_lossy().into_owned())
        .collect();
    for want in [
        "vorticity",
        "vorticity-uncertainty",
        "speed",
        "fluctuations",
        "reynolds-stress",
        "validation-map",
        "rejected-per-frame",
        "convergence",
        "phase-sequence",
    ] {
        assert!(stems.iter().any(|s| s == want), "missing {want}: {stems:?}");
    }
    for f in &figs {
        assert!(f.png.starts_with("r1/figures"), "{}", f.png.display());
        let (w, h) = png_size(&dir.path().join(&f.png));
        assert!(
            (900..=2400).contains(&w) && (300..=2000).contains(&h),
            "{}: {w} x {h}",
            f.png.display()
        );
        let svg = std::fs::read_to_string(dir.path().join(&f.svg)).unwrap();
        assert!(
            svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"),
            "{}",
            f.svg.display()
        );
        assert!(svg.contains("<text"), "{} has no text", f.svg.display());
    }
    // No partial files are left behind.
    let left: Vec<_> = std::fs::read_dir(dir.path().join("r1/figures"))
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().contains("partial"))
        .collect();
    assert!(left.is_empty());
}

#[test]
fn missing_columns_skip_figures_without_error() {
    let dir = tempfile::tempdir().unwrap();
    let mut r = run("r2", &VORTEX, grid(20, 10));
    r.stats
        .ensemble
        .columns
        .retain(|(n, _)| n == "x" || n == "y" || n == "omega_mean");
    r.stats.phase.clear();
    r.stats.convergence = None;
    r.frames.clear();
    let figs = run_figures(&Params::default(), &r, dir.path()).unwrap();
    assert_eq!(
        figs.len(),
        1,
        "{:?}",
        figs.iter().map(|f| &f.title).collect::<Vec<_>>()
    );
    assert_eq!(figs[0].title, "Mean vorticity");
}

#[test]
fn map_layout_keeps_equal_aspect() {
    let g = grid(64, 48);
    let l = draw::MapLayout::new(&g, 1, 1, 1000);
    // Extent 64 mm x 48 mm: pixel aspect must match within rounding.
    let ratio = l.panel_w as f64 / l.panel_h as f64;
    crate::testutil::assert_close(ratio, 64.0 / 48.0, 0.01, 0.0, "aspect");
}

#[test]
fn quantile_follows_numpy() {
    // numpy.quantile(np.arange(1, 11), [0.5, 0.99]) = 5.5, 9.91 (numpy's
    // default "linear" method; the convention of crate::robust).
    let v: Vec<f64> = (1..=10).map(f64::from).collect();
    assert_eq!(quantile(v.iter().copied(), 0.5), Some(5.5));
    crate::testutil::assert_close(
        quantile(v.iter().copied(), 0.99).unwrap(),
        9.91,
        1e-12,
        0.0,
        "q 0.99",
    );
    assert_eq!(quantile([f64::NAN].into_iter(), 0.5), None);
}

#[test]
fn nondimensional_units_against_hand_computed_factors() {
    // Fixture: U = 0.3 m/s, L = 0.01 m. x/L: 30 mm -> 3; ωL/U: factor
    // 0.01/0.3 = 1/30; u/U: 1/0.3; u'v'/U²: 1/0.09 (hand-computed).
    let r = run("nd", &VORTEX, grid(16, 12));
    let p = Params {
        nondimensional: true,
        ..Params::default()
    };
    let u = Units::new(&p, &r);
    let ax = u.axes();
    assert_eq!(ax.x_label, "x / L");
    crate::testutil::assert_close(0.030 / ax.scale, 3.0, 1e-12, 0.0, "x/L");
    crate::testutil::assert_close(u.vorticity().0, 1.0 / 30.0, 1e-15, 0.0, "ωL/U");
    crate::testutil::assert_close(u.velocity().0, 1.0 / 0.3, 1e-12, 0.0, "u/U");
    crate::testutil::assert_close(u.stress().0, 1.0 / 0.09, 1e-9, 0.0, "u'v'/U²");
    // Without the switch, or without U and L: SI (mm axes).
    assert_eq!(Units::new(&Params::default(), &r).axes().x_label, "x (mm)");
    let mut bare = r.clone();
    bare.conditions.velocity = None;
    assert_eq!(Units::new(&p, &bare).axes().x_label, "x (mm)");
    let dir = tempfile::tempdir().unwrap();
    let figs = run_figures(&p, &bare, dir.path()).unwrap();
    assert!(
        figs[0].caption.contains("shown in SI"),
        "{}",
        figs[0].caption
    );
    let figs = run_figures(&p, &r, dir.path()).unwrap();
    let svg = std::fs::read_to_string(dir.path().join(&figs[0].svg)).unwrap();
    assert!(
        svg.contains("x / L") && svg.contains("ω L / U"),
        "nondimensional labels missing"
    );
}

#[test]
fn the_vector_caption_counts_in_english_ordinals() {
    use super::figs::every_words;
    let words: Vec<String> = [1, 2, 3, 4, 11, 12, 13, 21, 22, 102, 111]
        .iter()
        .map(|&n| every_words(n))
        .collect();
    assert_eq!(
        words,
        [
            "every ",
            "every 2nd ",
            "every 3rd ",
            "every 4th ",
            "every 11th ",
            "every 12th ",
            "every 13th ",
            "every 21st ",
            "every 22nd ",
            "every 102nd ",
            "every 111th "
        ]
    );
}
