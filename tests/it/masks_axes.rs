//! Image-oriented axes (`[input] y_axis`, `v_axis`) and geometry masks
//! (`[mask]`, the frames' mask column), end to end through `synth` and
//! `run`.

use crate::util::{Csv, Work};

fn pipeline_text(w: &Work, dir: &str) -> String {
    std::fs::read_to_string(w.path(&format!("{dir}/pipeline.toml"))).unwrap()
}

/// The same vortex written with y and v pointing up and (as image
/// coordinates) down: with `y_axis = "down"` both reduce to byte-identical
/// ensembles. Read as if y pointed up, the image-oriented files give the
/// opposite vorticity (the silent error the key prevents).
#[test]
fn the_same_flow_written_both_ways_reduces_to_identical_outputs() {
    let w = Work::new();
    let common = ["--frames", "6", "--speeds", "0.2", "--seed", "3"];
    let mut up = vec!["synth", "vortex", "--out", "up"];
    up.extend(common);
    w.ok(&up);
    let mut down = vec!["synth", "vortex", "--out", "down", "--y-axis", "down"];
    down.extend(common);
    w.ok(&down);
    let text = pipeline_text(&w, "down");
    assert!(text.contains("y_axis = \"down\""), "{text}");
    // the files really differ: y and v are negated
    let f_up = std::fs::read_to_string(w.path("up/u020/f00001.csv")).unwrap();
    let f_down = std::fs::read_to_string(w.path("down/u020/f00001.csv")).unwrap();
    assert_ne!(f_up, f_down);
    let check = w.ok(&["check", "down/pipeline.toml"]);
    assert!(
        check.contains("y axis down, v positive down (as stated"),
        "{check}"
    );

    w.ok(&["run", "up/pipeline.toml", "--out", "o_up", "--quiet"]);
    w.ok(&["run", "down/pipeline.toml", "--out", "o_down", "--quiet"]);
    for t in ["ensemble.csv", "frames.csv"] {
        let a = std::fs::read(w.path(&format!("o_up/u020/{t}"))).unwrap();
        let b = std::fs::read(w.path(&format!("o_down/u020/{t}"))).unwrap();
        assert!(a == b, "{t} differs between the two orientations");
    }
    let manifest = std::fs::read_to_string(w.path("o_down/manifest.json")).unwrap();
    assert!(
        manifest.contains("y axis down"),
        "the manifest states the orientation"
    );

    // Wrongly read as y up: the vorticity flips sign.
    w.write(
        "down/wrong.toml",
        &text.replace("y_axis = \"down\"", "y_axis = \"up\""),
    );
    w.ok(&["run", "down/wrong.toml", "--out", "o_wrong", "--quiet"]);
    let right = Csv::read(&w.path("o_up/u020/ensemble.csv"));
    let wrong = Csv::read(&w.path("o_wrong/u020/ensemble.csv"));
    let peak = |c: &Csv| {
        c.col("omega_mean")
            .into_iter()
            .filter(|x| x.is_finite())
            .fold(0.0f64, |m, x| if x.abs() > m.abs() { x } else { m })
    };
    let (r, s) = (peak(&right), peak(&wrong));
    assert!(r.abs() > 1.0, "peak vorticity {r}");
    assert!(
        (r + s).abs() < 1e-6 * r.abs(),
        "peak {r} read wrongly gives {s}"
    );
}

#[test]
fn pixel_positions_with_no_y_direction_warn_in_check_and_the_manifest() {
    let w = Work::new();
    w.ok(&[
        "synth",
        "vortex",
        "--out",
        "c",
        "--frames",
        "2",
        "--length-unit",
        "px",
        "--speeds",
        "0.2",
    ]);
    let text = pipeline_text(&w, "c");
    let unstated: String = text
        .lines()
        .filter(|l| !l.starts_with("y_axis"))
        .map(|l| format!("{l}\n"))
        .collect();
    w.write("c/unstated.toml", &unstated);
    let out = w.ok(&["check", "c/unstated.toml"]);
    assert!(
        out.contains("warning") && out.contains("y_axis is not given"),
        "{out}"
    );
    w.ok(&["run", "c/unstated.toml", "--out", "o", "--quiet"]);
    let m = std::fs::read_to_string(w.path("o/manifest.json")).unwrap();
    assert!(m.contains("positions are in pixels but [input] y_axis is not given"));
    // stated: no warning
    let out = w.ok(&["check", "c/pipeline.toml"]);
    assert!(!out.contains("warning"), "{out}");
}

/// Reads a frame field CSV: (x, y, status, u, omega) per node.
fn field(p: &std::path::Path) -> Vec<[f64; 5]> {
    let c = Csv::read(p);
    let (x, y, s, u, om) = (
        c.col("x"),
        c.col("y"),
        c.col("status"),
        c.col("u"),
        c.col("omega"),
    );
    (0..x.len())
        .map(|k| [x[k], y[k], s[k], u[k], om[k]])
        .collect()
}

/// Potential flow past a cylinder (irrotational outside the body; the
/// analytic solution of any fluid-mechanics text) with the body masked by
/// the circle `synth` writes into the pipeline: no node inside the body is
/// filled, every one has status 3 and no value, and the mean vorticity
/// around the mask is what the scheme gives on the exact field, within its
/// propagated uncertainty.
///
/// The exact vorticity is zero, but the least-squares stencil
/// (2f2 + f1 - f-1 - 2f-2)/(10h) (docs/methods.md, derivative table) has a
/// real truncation error of up to 2 1/s here, where the flow curves round
/// the body (its leading term (17/30) h^2 f''' in the same table): 24
/// frames cannot detect it through the degree-5 truncation estimate, whose
/// own noise at the mean is about 1.3 1/s, so it is not in
/// `omega_mean_unc` (see docs/uncertainty.md, open limits). The test
/// therefore compares with the stencil applied to the analytic field: what
/// the mask may not spoil is everything else (no filled body values, no
/// stencil reaching into the body, the noise propagated honestly).
#[test]
fn a_masked_cylinder_gives_zero_vorticity_around_it_and_nothing_inside() {
    let w = Work::new();
    w.ok(&[
        "synth", "cylinder", "--out", "c", "--frames", "24", "--speeds", "0.2", "--seed", "2",
    ]);
    let text = pipeline_text(&w, "c");
    assert!(
        text.contains("[mask]") && text.contains("circles = [[0.0, 0.0, 5e0]]"),
        "{text}"
    );
    w.write(
        "c/p.toml",
        &text.replace("frame_fields = false", "frame_fields = true"),
    );
    let check = w.ok(&["check", "c/p.toml"]);
    assert!(check.contains("nodes masked"), "{check}");
    w.ok(&["run", "c/p.toml", "--out", "o", "--quiet"]);
    let r = 5e-3; // the body's radius (diameter 10 mm)
    let mut inside = 0;
    for e in std::fs::read_dir(w.path("o/u020/fields")).unwrap() {
        for [x, y, s, u, _] in field(&e.unwrap().path()) {
            if x.hypot(y) < r {
                inside += 1;
                assert_eq!(s, 3.0, "node ({x}, {y}) inside the body has status {s}");
                assert!(
                    u.is_nan(),
                    "node ({x}, {y}) inside the body has a value {u}"
                );
            }
        }
    }
    assert!(inside > 24 * 50, "{inside} node-frames inside the body");
    let ens = Csv::read(&w.path("o/u020/ensemble.csv"));
    let (x, y) = (ens.col("x"), ens.col("y"));
    let (om, unc) = (ens.col("omega_mean"), ens.col("omega_mean_unc"));
    let h = (x[1] - x[0]).abs();
    let scheme = |x: f64, y: f64| cylinder_scheme_omega(x, y, h, r, 0.2);
    let (mut ring, mut worst, mut worst_vs_zero, mut sum_z2) = (0, 0.0f64, 0.0f64, 0.0);
    for k in 0..x.len() {
        let d = x[k].hypot(y[k]);
        if d < r {
            assert!(
                om[k].is_nan(),
                "no vorticity inside the mask at ({}, {})",
                x[k],
                y[k]
            );
        } else if d >= r + 3.0 * h && d < r + 9.0 * h {
            // stencils clear of the mask and of the row next to it, where
            // the normalized median test rejects some exact vectors (the
            // flow turns round the body within a pitch, and the mask
            // leaves the test only the neighbours on one side)
            ring += 1;
            let z = (om[k] - scheme(x[k], y[k])) / unc[k];
            worst = worst.max(z.abs());
            sum_z2 += z * z;
            worst_vs_zero = worst_vs_zero.max(om[k].abs() / unc[k]);
        }
    }
    assert!(ring > 350, "{ring} nodes around the mask");
    // coverage factor 3.5 (a normal error passes it at all of 400 nodes
    // with probability 0.83; 3 would fail a fair estimate one time in two):
    // measured 2.7 at most here
    let rms = (sum_z2 / ring as f64).sqrt();
    // and the width: rms of the standardised error measured 0.69 (the
    // uncertainty somewhat wide, not 2x off either way)
    assert!(rms > 0.5 && rms < 1.3, "rms standardised error {rms}");
    assert!(
        worst <= 3.5,
        "|omega_mean - scheme(exact)| / u(omega_mean) reaches {worst} around the mask"
    );
    // the truncation the comparison allows for is real and larger
    assert!(
        worst_vs_zero > worst,
        "against zero {worst_vs_zero}, against the scheme {worst}"
    );

    unmasked_body_is_filled(&w, &text, r);
}

/// Next to the mask (closer than 2.5 pitches) the stencils use the stencil
/// module's edge rule, whose truncation error is not yet part of the
/// propagated uncertainty: measured on this flow, |omega_mean| reaches 14
/// standard uncertainties within 1.5 pitches of the body (rms 4.4), and one
/// node has a vorticity without an uncertainty. Ignored until the
/// truncation term lands in the uncertainty (issue #11).
#[test]
#[ignore = "edge-rule truncation error is not yet in the uncertainty (issue #11)"]
fn vorticity_next_to_the_mask_is_zero_within_its_uncertainty() {
    let w = Work::new();
    w.ok(&[
        "synth", "cylinder", "--out", "c", "--frames", "24", "--speeds", "0.2", "--seed", "2",
    ]);
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let ens = Csv::read(&w.path("o/u020/ensemble.csv"));
    let (x, y) = (ens.col("x"), ens.col("y"));
    let (om, unc) = (ens.col("omega_mean"), ens.col("omega_mean_unc"));
    for k in 0..x.len() {
        let d = x[k].hypot(y[k]);
        if (5e-3..7.5e-3).contains(&d) && om[k].is_finite() {
            let z = om[k].abs() / unc[k];
            assert!(z <= 3.0, "({}, {}): |omega| / u = {z}", x[k], y[k]);
        }
    }
}

/// The frames' own mask column masks the same body.
#[test]
fn a_mask_column_masks_its_nodes() {
    let w = Work::new();
    w.ok(&[
        "synth",
        "cylinder",
        "--out",
        "c",
        "--frames",
        "4",
        "--speeds",
        "0.2",
        "--mask-column",
    ]);
    let text = pipeline_text(&w, "c");
    assert!(
        text.contains("mask = \"mask\"") && !text.contains("[mask]"),
        "{text}"
    );
    w.write(
        "c/p.toml",
        &text.replace("frame_fields = false", "frame_fields = true"),
    );
    w.ok(&["run", "c/p.toml", "--out", "o", "--quiet"]);
    let f = field(&w.path("o/u020/fields/f00001.csv"));
    let body: Vec<_> = f
        .iter()
        .filter(|n| n[0].hypot(n[1]) < 5e-3 * (1.0 - 1e-9))
        .collect();
    assert!(body.len() > 50);
    assert!(body.iter().all(|n| n[2] == 3.0 && n[3].is_nan()));
    // masked nodes are never counted as invalid input: the count is the
    // frame's gaps as generated (truth/events.csv), the body left out
    let events = std::fs::read_to_string(w.path("c/u020/truth/events.csv")).unwrap();
    let gaps = events
        .lines()
        .filter(|l| l.starts_with("f00001,") && !l.ends_with(",outlier"))
        .count();
    let frames = Csv::read(&w.path("o/u020/frames.csv"));
    assert_eq!(frames.col("n_invalid_input")[0], gaps as f64);
}

/// A mask column takes the figures' path of the geometry masks: the nodes
/// the run's figures draw grey (`RunResult::mask`) are the body's, the
/// same set a `[mask]` circle of the same body gives.
#[test]
fn a_mask_column_is_drawn_grey_like_a_geometry_mask() {
    let w = Work::new();
    let common = ["--frames", "3", "--speeds", "0.2", "--seed", "5"];
    let mut col = vec!["synth", "cylinder", "--out", "col", "--mask-column"];
    col.extend(common);
    w.ok(&col);
    let mut geo = vec!["synth", "cylinder", "--out", "geo"];
    geo.extend(common);
    w.ok(&geo);
    let drawn = |dir: &str| {
        let c = curlew::Campaign::load(w.path(&format!("{dir}/pipeline.toml"))).unwrap();
        let r = c
            .run(&curlew::RunOptions {
                out: Some(w.path(&format!("o_{dir}"))),
                ..Default::default()
            })
            .unwrap();
        let run = &r.runs[0];
        (run.mask.clone(), run.grid)
    };
    let (m_col, g) = drawn("col");
    let (m_geo, _) = drawn("geo");
    let m_col = m_col.expect("the mask column is drawn");
    assert_eq!(Some(&m_col), m_geo.as_ref(), "same grey nodes both ways");
    // the grey nodes are the body: within the radius (5 mm) of the origin
    let mut n = 0;
    for j in 0..g.ny {
        for i in 0..g.nx {
            let r = g.x(i).hypot(g.y(j));
            let k = j * g.nx + i;
            if r < 5e-3 * (1.0 - 1e-9) {
                assert!(m_col[k], "node ({i}, {j}) at r = {r} is in the body");
                n += 1;
            } else if r > 5e-3 * (1.0 + 1e-9) {
                assert!(!m_col[k], "node ({i}, {j}) at r = {r} is flow");
            }
        }
    }
    assert!(n > 50, "{n} body nodes");
}

/// Potential flow past a cylinder of radius `r` in a stream `speed` along
/// +x (complex velocity u - i v = U (1 - r^2 / z^2), any fluid-mechanics
/// text), and the least-squares vorticity stencil of pitch `h` applied to
/// it along each axis at `(x, y)`.
fn cylinder_scheme_omega(x: f64, y: f64, h: f64, r: f64, speed: f64) -> f64 {
    let exact = |x: f64, y: f64| {
        let (zr, zi) = (x * x - y * y, 2.0 * x * y); // z^2
        let m = zr * zr + zi * zi;
        let (ir, ii) = (zr / m, -zi / m); // 1 / z^2
        (speed * (1.0 - r * r * ir), speed * r * r * ii)
    };
    let mut om = 0.0;
    for (c, w) in [(-2.0, -2.0), (-1.0, -1.0), (1.0, 1.0), (2.0, 2.0)] {
        om += w * exact(x + c * h, y).1 / (10.0 * h);
        om -= w * exact(x, y + c * h).0 / (10.0 * h);
    }
    om
}

/// Without the mask the body's nodes (radius `r`) are holes that get filled
/// from the flow around them: the very error the mask prevents.
fn unmasked_body_is_filled(w: &Work, text: &str, r: f64) {
    let start = text.find("\n[mask]").unwrap();
    let end = start + 1 + text[start + 1..].find("\n[").unwrap();
    let no_mask = format!("{}{}", &text[..start], &text[end..])
        .replace("frame_fields = false", "frame_fields = true");
    w.write("c/nomask.toml", &no_mask);
    w.ok(&["run", "c/nomask.toml", "--out", "o2", "--quiet"]);
    let f = field(&w.path("o2/u020/fields/f00001.csv"));
    let filled = f
        .iter()
        .filter(|n| n[0].hypot(n[1]) < r && n[2] == 2.0)
        .count();
    assert!(filled > 20, "unmasked, {filled} body nodes are filled");
}
