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

/// `circling` with a deterministic scatter of about 1 % of the peak swirl
/// (a hash of node and frame; invented, for the significance test).
fn noisy(x: f64, y: f64, k: usize) -> (f64, f64) {
    let (u, v) = circling(x, y, k);
    let h = |a: f64| (a.sin() * 43758.5453).fract() - 0.5;
    let s = 1.5e-4;
    let z = x * 1.7e4 + y * 3.1e4 + k as f64 * 7.3;
    (u + s * h(z), v + s * h(z + 11.0))
}

fn campaign(w: &Work, n: usize) {
    campaign_of(w, n, circling);
}

fn campaign_of(w: &Work, n: usize, flow: fn(f64, f64, usize) -> (f64, f64)) {
    write_frames(&w.path("frames"), G2, n, Units::MmMs, flow);
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
    // 45° per 0.0625 s: 2 Hz from the phases and times.
    assert!(
        out.contains("budget: frequency 2 Hz, fitted to the phases and times of 8 frames"),
        "{out}"
    );
    // A frame table without times, but with a period column.
    let mut ft = String::from("frame,phase_deg,period_s\n");
    for k in 0..8 {
        ft.push_str(&format!("f{:04},{},0.4\n", k + 1, 22.5 + 45.0 * k as f64));
    }
    w.write("frames.csv", &ft);
    let out = w.ok(&["check", "q.toml"]);
    assert!(
        out.contains(
            "budget: frequency 2.5 Hz, the mean of the frame table's period_s column over 8 rows"
        ),
        "{out}"
    );
    // Neither times nor a column: nothing gives a frequency.
    w.write(
        "frames.csv",
        &ft.replace(",period_s", "").replace(",0.4", ""),
    );
    let out = w.ok(&["check", "q.toml"]);
    assert!(
        out.contains("budget: no frequency (none in [run.conditions]"),
        "{out}"
    );
    // Given, but the phases and times say otherwise.
    campaign(&w, 8);
    w.write("s.toml", &p.replace("frequency = 2\n", "frequency = 3\n"));
    let out = w.ok(&["check", "s.toml"]);
    assert!(out.contains("give 2 Hz, not 3 Hz"), "{out}");
    let bad = p.replace("[budget]\n", "[budget]\nscheme = \"spectral\"\n");
    w.write("r.toml", &bad);
    let err = w.fails(&["check", "r.toml"], 2);
    assert!(err.contains("[budget] scheme = 'spectral'"), "{err}");
}

/// The report's words without tags, entities undone.
fn report_text(w: &Work) -> String {
    let html = std::fs::read_to_string(w.path("out/index.html")).unwrap();
    let mut t = String::new();
    let mut inside = false;
    for c in html.chars() {
        match c {
            '<' => inside = true,
            '>' if inside => inside = false,
            _ if !inside => t.push(c),
            _ => {}
        }
    }
    t.replace("&gt;", ">")
        .replace("&lt;", "<")
        .replace("&amp;", "&")
}

/// The number after `before` in `text` (up to the next space).
fn number_after(text: &str, before: &str) -> f64 {
    let i = text
        .find(before)
        .unwrap_or_else(|| panic!("no '{before}' in {text}"));
    let rest = &text[i + before.len()..];
    let end = rest.find([' ', ')', ',']).unwrap_or(rest.len());
    rest[..end]
        .parse()
        .unwrap_or_else(|_| panic!("'{}' is not a number", &rest[..end]))
}

#[test]
fn budget_figure_and_report_numbers_are_those_of_budget_csv() {
    let w = Work::new();
    campaign_of(&w, 48, noisy);
    w.ok(&["run", "p.toml", "--out", "out", "--quiet"]);
    let b = Csv::read(&w.path("out/a/budget.csv"));
    let (s, sig) = (b.col("slice"), b.col("significant"));
    let terms = [
        "unsteady",
        "advection",
        "stretching",
        "diffusion",
        "turbulent",
        "residual",
    ];
    let cols: Vec<Vec<f64>> = terms.iter().map(|t| b.col(t)).collect();
    // The figure's slice: the largest |unsteady| (no figure_bin given).
    let max_abs = |v: &[f64], rows: &mut dyn Iterator<Item = usize>| {
        rows.map(|r| v[r])
            .filter(|x| x.is_finite())
            .fold(0.0f64, |m, x| m.max(x.abs()))
    };
    let n = G2.nx * G2.ny;
    let slice = (0..8)
        .max_by(|&a, &c| {
            let ma = max_abs(&cols[0], &mut (a * n..(a + 1) * n));
            let mc = max_abs(&cols[0], &mut (c * n..(c + 1) * n));
            ma.total_cmp(&mc)
        })
        .unwrap();
    let sl = &s;
    let rows = || (0..sl.len()).filter(move |&r| sl[r] == slice as f64);
    let limit = cols
        .iter()
        .map(|c| max_abs(c, &mut rows()))
        .fold(0.0, f64::max);
    let marks = rows().filter(|&r| sig[r] == 1.0).count();
    let with_res = rows().filter(|&r| sig[r].is_finite()).count();
    assert!(marks > 0 && marks < with_res, "{marks} of {with_res}");
    let text = report_text(&w);
    let fig = &text[text
        .find("Vorticity budget.")
        .expect("the figure's caption")..];
    assert!(
        fig.contains(&format!("(bin {slice},")),
        "slice {slice}: {}",
        &fig[..300]
    );
    let shown = number_after(fig, "one symmetric colour scale ±");
    assert!((shown - limit).abs() <= 5e-3 * limit, "{shown} vs {limit}");
    assert_eq!(number_after(fig, "Rings mark the ") as usize, marks);
    assert_eq!(
        number_after(fig, &format!("Rings mark the {marks} of ")) as usize,
        with_res
    );
    // The reading, recomputed over every slice-node of budget.csv.
    let all: Vec<usize> = (0..s.len()).filter(|&r| sig[r].is_finite()).collect();
    let n_sig = all.iter().filter(|&&r| sig[r] == 1.0).count();
    let pct = |a: usize, b: usize| format!("{:.1} %", 100.0 * a as f64 / b as f64);
    let want = format!(
        "closes within k = 2 standard uncertainties at {} of the {} slice-nodes with a residual; the residual is significant at {} ({n_sig})",
        pct(all.len() - n_sig, all.len()),
        all.len(),
        pct(n_sig, all.len())
    );
    assert!(text.contains(&want), "want: {want}\n{text}");
    let (core_n, core_sig, near) = core_counts(&b, &sig);
    assert!(core_n > 0);
    let want = format!(
        "In the vortex cores (Γ2 > 2/π, {core_n} slice-nodes) it closes at {}.",
        pct(core_n - core_sig, core_n)
    );
    assert!(text.contains(&want), "want: {want}\n{text}");
    let want = format!(
        "Of the significant nodes, {} lie in vortex cores and {} within two nodes",
        pct(core_sig, n_sig),
        pct(near, n_sig)
    );
    assert!(text.contains(&want), "want: {want}\n{text}");
}

/// Over the 8 slices of `budget.csv`: the slice-nodes in vortex cores
/// (Γ2 > 2/π of each slice's mean velocity, Graftieaux et al. 2001, disc of
/// 2 nodes, the default, from budget.csv's u and v), those of them whose
/// residual is significant, and the significant nodes within two nodes of
/// the border or of a node without a residual.
fn core_counts(b: &Csv, sig: &[f64]) -> (usize, usize, usize) {
    let n = G2.nx * G2.ny;
    let (u, v) = (b.col("u"), b.col("v"));
    let (mut core_n, mut core_sig, mut near) = (0, 0, 0);
    for k in 0..8 {
        let a = |c: &[f64]| {
            ndarray::Array2::from_shape_vec((G2.ny, G2.nx), c[k * n..(k + 1) * n].to_vec()).unwrap()
        };
        let (ua, va) = (a(&u), a(&v));
        let ok = ua.mapv(f64::is_finite);
        let (_, g2) = curlew::derive::quantities::gamma(&ua, &va, &ok, 2, G2.h, G2.h);
        for node in 0..n {
            let r = k * n + node;
            if !sig[r].is_finite() {
                continue;
            }
            if g2.as_slice().unwrap()[node] > 2.0 / std::f64::consts::PI {
                core_n += 1;
                core_sig += usize::from(sig[r] == 1.0);
            }
            // within two nodes of the border or of a node without a residual
            let (j, i) = ((node / G2.nx) as i64, (node % G2.nx) as i64);
            let edge = (-2..=2).any(|dj| {
                (-2..=2).any(|di| {
                    let (jj, ii) = (j + dj, i + di);
                    jj < 0
                        || ii < 0
                        || jj >= G2.ny as i64
                        || ii >= G2.nx as i64
                        || !sig[k * n + jj as usize * G2.nx + ii as usize].is_finite()
                })
            });
            near += usize::from(sig[r] == 1.0 && edge);
        }
    }
    (core_n, core_sig, near)
}
