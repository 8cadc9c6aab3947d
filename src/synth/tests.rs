//! Tests of whole synthetic campaigns: determinism, bookkeeping against the
//! written files, units, truth statistics, the pipeline, atomic output.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use super::scenario::setup_run;
use super::*;
use crate::plan::Plan;

pub(super) fn small(scenario: Scenario) -> SynthOptions {
    SynthOptions {
        scenario,
        frames: 70, // more than one parallel chunk
        seed: 11,
        nx: Some(14),
        ny: Some(9),
        speeds: if scenario == Scenario::Wake {
            vec![0.15, 0.3]
        } else {
            vec![0.2]
        },
        outlier_fraction: 0.05,
        gap_fraction: 0.04,
        campaign: "t".into(),
        ..Default::default()
    }
}

/// Rows of a CSV file as strings (header first).
pub(super) fn rows(path: &Path) -> Vec<Vec<String>> {
    std::fs::read_to_string(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

fn all_files(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(
                    p.strip_prefix(dir).unwrap().to_path_buf(),
                    std::fs::read(&p).unwrap(),
                );
            }
        }
    }
    out
}

fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(f)
}

#[test]
fn same_seed_gives_identical_bytes_whatever_the_thread_count() {
    let tmp = tempfile::tempdir().unwrap();
    let opts = small(Scenario::Wake);
    let a = tmp.path().join("a");
    let b = tmp.path().join("b");
    in_pool(1, || generate(&opts, &a)).unwrap();
    in_pool(2, || generate(&opts, &b)).unwrap();
    let (fa, fb) = (all_files(&a), all_files(&b));
    assert_eq!(fa.len(), fb.len());
    // 2 runs x (70 frames + frames.csv + 4 truth files) + pipeline + README
    assert_eq!(fa.len(), 2 * (70 + 1 + 4) + 2);
    for (p, bytes) in &fa {
        assert!(
            fb[p] == *bytes,
            "{} differs between 1 and 2 threads",
            p.display()
        );
    }
    let mut other = opts.clone();
    other.seed = 12;
    let c = tmp.path().join("c");
    generate(&other, &c).unwrap();
    let fc = all_files(&c);
    let name = Path::new("u015/f00001.csv");
    assert_ne!(fa[name], fc[name], "another seed must give other noise");
    assert_eq!(
        fa[Path::new("u015/frames.csv")],
        fc[Path::new("u015/frames.csv")]
    );
}

#[test]
fn written_pipeline_parses_and_names_every_frame() {
    let tmp = tempfile::tempdir().unwrap();
    let mut opts = small(Scenario::Wake);
    opts.pipeline_copy = Some(tmp.path().join("pipelines/p.toml"));
    opts.noise_correlation = 0.3;
    let out = tmp.path().join("data/camp");
    generate(&opts, &out).unwrap();
    for path in [
        out.join("pipeline.toml"),
        tmp.path().join("pipelines/p.toml"),
    ] {
        let plan = Plan::load(&path).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(plan.campaign, "t");
        assert_eq!(plan.raw.uncertainty.neighbour_correlation, Some(0.3));
        assert_eq!(plan.runs.len(), 2);
        let r = &plan.runs[1];
        assert_eq!(r.id, "u030");
        assert_eq!(r.input.length_scale, 1e-3);
        assert_eq!(r.input.velocity_scale, 1.0);
        // 8 px at 0.30 m/s with 40 µm pixels: 1.07 ms, set as 1.1 ms
        assert_eq!(r.px_velocity, Some(4e-5 / 1.1e-3));
        let files: Vec<_> = glob::glob(&r.frames).unwrap().map(|p| p.unwrap()).collect();
        assert_eq!(files.len(), 70, "{}", r.frames);
        assert!(files[0].ends_with("u030/f00001.csv"));
        assert!(r.frame_table.as_ref().unwrap().exists());
    }
}

#[test]
fn px_units_write_the_same_campaign_scaled() {
    let tmp = tempfile::tempdir().unwrap();
    let mut mm = small(Scenario::Vortex);
    mm.digits = 17;
    let mut px = mm.clone();
    px.length_unit = LengthUnit::Px;
    px.velocity_unit = VelocityUnit::Px;
    let s = generate(&mm, &tmp.path().join("mm")).unwrap();
    generate(&px, &tmp.path().join("px")).unwrap();
    let pv = mm.pixel_size / s.runs[0].pulse_separation;
    let a = rows(&tmp.path().join("mm/u020/f00003.csv"));
    let b = rows(&tmp.path().join("px/u020/f00003.csv"));
    assert_eq!(a.len(), b.len());
    for (ra, rb) in a[1..].iter().zip(&b[1..]) {
        for c in 0..4 {
            if ra[c].is_empty() {
                assert!(rb[c].is_empty());
                continue;
            }
            let (sa, sb) = if c < 2 {
                (1e-3, mm.pixel_size)
            } else {
                (1.0, pv)
            };
            let (va, vb) = (
                ra[c].parse::<f64>().unwrap() * sa,
                rb[c].parse::<f64>().unwrap() * sb,
            );
            assert!(
                (va - vb).abs() <= 1e-12 * va.abs().max(1e-6),
                "{ra:?} vs {rb:?}"
            );
        }
    }
    let plan = Plan::load(&tmp.path().join("px/pipeline.toml")).unwrap();
    assert_eq!(plan.runs[0].input.velocity_scale, pv);
    assert_eq!(plan.runs[0].input.length_scale, mm.pixel_size);
}

#[test]
fn truth_mean_and_phase_bins_are_the_means_of_the_noise_free_frames() {
    let tmp = tempfile::tempdir().unwrap();
    let mut opts = small(Scenario::Wake);
    opts.truth_frames = true;
    opts.speeds = vec![0.15];
    let out = tmp.path().join("c");
    generate(&opts, &out).unwrap();
    let frames = rows(&out.join("u015/frames.csv"));
    assert_eq!(frames[0], ["frame", "time_s", "phase_deg"]);
    assert_eq!(
        frames[1][0], "f00001",
        "keys are frame names without extension"
    );
    let nodes = 14 * 9;
    let mut sum = vec![[0.0f64; 3]; nodes];
    let mut bins = vec![vec![[0.0f64; 3]; nodes]; 12];
    let mut bin_n = [0usize; 12];
    for (k, fr) in frames[1..].iter().enumerate() {
        let t: f64 = fr[1].parse().unwrap();
        assert!((t - k as f64 / 15.0).abs() < 1e-6);
        let ph: f64 = fr[2].parse().unwrap();
        // phase = 360 f t mod 360 with f = St U / D = 3.15 Hz
        let expect = (360.0 * 3.15 * k as f64 / 15.0).rem_euclid(360.0);
        assert!(
            (ph - expect).abs() < 1e-3 || (ph - expect).abs() > 359.99,
            "{ph} {expect}"
        );
        let b = truth::phase_bin(ph, 12);
        bin_n[b] += 1;
        let f = rows(&out.join(format!("u015/truth/fields/f{:05}.csv", k + 1)));
        for (n, r) in f[1..].iter().enumerate() {
            for c in 0..3 {
                let v: f64 = r[[2, 3, 4][c]].parse().unwrap();
                sum[n][c] += v;
                bins[b][n][c] += v;
            }
        }
    }
    let mean = rows(&out.join("u015/truth/mean.csv"));
    assert_eq!(mean[0][3], "u_mean");
    for (n, r) in mean[1..].iter().enumerate() {
        for (c, col) in [(0, 3), (1, 4), (2, 8)] {
            let v: f64 = r[col].parse().unwrap();
            let want = sum[n][c] / 70.0;
            let tol = if c < 2 { 1e-8 } else { 1e-4 }; // 8 digits of 0.15 m/s, of 75 1/s
            assert!((v - want).abs() < tol, "node {n} col {col}: {v} vs {want}");
        }
    }
    let phase = rows(&out.join("u015/truth/phase.csv"));
    assert_eq!(phase.len(), 1 + 12 * nodes);
    for r in &phase[1..] {
        let b: usize = r[0].parse().unwrap();
        let n_frames: usize = r[2].parse().unwrap();
        assert_eq!(n_frames, bin_n[b]);
        let x: f64 = r[3].parse().unwrap();
        let y: f64 = r[4].parse().unwrap();
        let n = (((y + 8e-3) / 2e-3).round() as usize) * 14 + ((x - 0.02) / 2e-3).round() as usize;
        let u: f64 = r[5].parse().unwrap();
        assert!((u - bins[b][n][0] / n_frames as f64).abs() < 1e-8);
    }
}

#[test]
fn cylinder_nodes_inside_the_body_are_absent_and_marked() {
    let tmp = tempfile::tempdir().unwrap();
    let mut opts = small(Scenario::Cylinder);
    opts.nx = Some(21);
    opts.ny = Some(21);
    opts.frames = 3;
    opts.gap_fraction = 0.0;
    let out = tmp.path().join("c");
    let s = generate(&opts, &out).unwrap();
    // nodes at (i-10, j-10) mm strictly inside r < 5 mm
    let mut inside = 0;
    for j in -10i32..=10 {
        for i in -10i32..=10 {
            if i * i + j * j < 25 {
                inside += 1;
            }
        }
    }
    assert_eq!(s.runs[0].n_body, inside);
    let f = rows(&out.join("u020/f00002.csv"));
    assert_eq!(f.len() - 1, 21 * 21 - inside);
    let mean = rows(&out.join("u020/truth/mean.csv"));
    let marked = mean[1..].iter().filter(|r| r[2] == "1").count();
    assert_eq!(marked, inside);
    assert!(mean[1..]
        .iter()
        .filter(|r| r[2] == "1")
        .all(|r| r[3].is_empty()));
    assert!(!out.join("u020/truth/phase.csv").exists());
    assert_eq!(rows(&out.join("u020/frames.csv"))[0], ["frame", "time_s"]);
}

#[test]
fn parquet_long_table_holds_the_same_vectors_as_the_csv_files() {
    use polars::prelude::*;
    let tmp = tempfile::tempdir().unwrap();
    let mut csv = small(Scenario::Wake);
    csv.speeds = vec![0.15];
    csv.digits = 17;
    let mut pq = csv.clone();
    pq.format = OutFormat::Parquet;
    generate(&csv, &tmp.path().join("csv")).unwrap();
    generate(&pq, &tmp.path().join("pq")).unwrap();
    let file = std::fs::File::open(tmp.path().join("pq/u015/vectors.parquet")).unwrap();
    let df = ParquetReader::new(file).finish().unwrap();
    let frame = df.column("frame").unwrap().i64().unwrap().clone();
    let u = df.column("u").unwrap().f64().unwrap().clone();
    let x = df.column("x").unwrap().f64().unwrap().clone();
    let mut row = 0;
    for k in 1..=70i64 {
        let f = rows(&tmp.path().join(format!("csv/u015/f{k:05}.csv")));
        for r in &f[1..] {
            assert_eq!(frame.get(row), Some(k));
            assert_eq!(x.get(row), Some(r[0].parse().unwrap()));
            match u.get(row) {
                None => assert!(r[2].is_empty()),
                Some(v) => assert_eq!(v, r[2].parse::<f64>().unwrap()),
            }
            row += 1;
        }
    }
    assert_eq!(row, df.height());
    let table = rows(&tmp.path().join("pq/u015/frames.csv"));
    assert_eq!(table[1][0], "1");
    assert!(Plan::load(&tmp.path().join("pq/pipeline.toml"))
        .unwrap()
        .runs[0]
        .frames
        .ends_with("u015/vectors.parquet"));
}

#[test]
fn an_existing_output_is_kept_unless_forced_and_failures_leave_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let out = tmp.path().join("c");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join("keep.txt"), "old").unwrap();
    let mut opts = small(Scenario::SolidBody);
    opts.frames = 2;
    let e = generate(&opts, &out).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.message.contains("--force"), "{e}");
    assert!(out.join("keep.txt").exists());
    opts.outlier_fraction = 1.5;
    opts.force = true;
    let e = generate(&opts, &out).unwrap_err();
    assert!(e.message.contains("outlier fraction"), "{e}");
    assert!(out.join("keep.txt").exists());
    opts.outlier_fraction = 0.0;
    // Even forced, a folder that is not a curlew output is never replaced.
    let e = generate(&opts, &out).unwrap_err();
    assert!(e.message.contains("not a curlew output"), "{e}");
    assert!(out.join("keep.txt").exists());
    // An empty folder is written, and a previous synthetic campaign replaced.
    std::fs::remove_file(out.join("keep.txt")).unwrap();
    generate(&opts, &out).unwrap();
    generate(&opts, &out).unwrap();
    assert!(out.join("pipeline.toml").exists());
    let left: Vec<_> = std::fs::read_dir(tmp.path()).unwrap().collect();
    assert_eq!(left.len(), 1, "no temporary folder may remain");
    // a forced regeneration writes the same bytes as a fresh one
    let fresh = tmp.path().join("fresh");
    opts.force = false;
    generate(&opts, &fresh).unwrap();
    assert_eq!(all_files(&out), all_files(&fresh));
}

#[test]
fn solid_body_and_taylor_green_truth_follow_their_formulas() {
    let mut opts = small(Scenario::SolidBody);
    let f = frame_field(&opts, 0, 0).unwrap();
    // omega = 2 Omega with Omega = speed / half height (fact of the trade)
    let half_h = 4.0 * 1e-3;
    assert!(f
        .omega
        .iter()
        .all(|&w| (w - 2.0 * 0.2 / half_h).abs() < 1e-12));
    opts.scenario = Scenario::TaylorGreen;
    let f0 = frame_field(&opts, 0, 0).unwrap();
    let f9 = frame_field(&opts, 0, 9).unwrap();
    // decay exp(-2 nu k^2 t), k = 2 pi / (9 mm), t = 9/15 s (Taylor & Green 1937)
    let k = std::f64::consts::TAU / 9e-3;
    let decay = (-2.0 * 1e-6 * k * k * 9.0 / 15.0).exp();
    let (j, i) = (2, 3);
    assert!((f9.truth.u[[j, i]] / f0.truth.u[[j, i]] - decay).abs() < 1e-12);
    assert_eq!(f9.meta.phase_deg, None);
    assert_eq!(f9.meta.name, "f00010");
}

#[test]
fn flag_and_sigma_columns_follow_the_bookkeeping_and_the_pipeline_maps_them() {
    let tmp = tempfile::tempdir().unwrap();
    let mut opts = small(Scenario::Vortex);
    opts.frames = 20;
    opts.gap_fraction = 0.15;
    opts.flag_column = true;
    opts.sigma_columns = true;
    opts.velocity_unit = VelocityUnit::MmPerS;
    let out = tmp.path().join("c");
    let s = generate(&opts, &out).unwrap();
    let sigma_mm_s = s.runs[0].noise_sigma * 1e3;
    let ev = rows(&out.join("u020/truth/events.csv"));
    let flagged: BTreeSet<(String, String, String)> = ev[1..]
        .iter()
        .filter(|r| r[3] == "flagged")
        .map(|r| (r[0].clone(), r[1].clone(), r[2].clone()))
        .collect();
    assert_eq!(flagged.len(), s.runs[0].n_flagged);
    assert!(s.runs[0].n_flagged > 0 && s.runs[0].n_missing > 0);
    let g = s.runs[0].grid;
    let mut seen = BTreeSet::new();
    for k in 0..20 {
        let name = frame_name(k, 20);
        let f = rows(&out.join(format!("u020/{name}.csv")));
        assert_eq!(f[0], ["x", "y", "u", "v", "sigma_u", "sigma_v", "flag"]);
        for r in &f[1..] {
            let i = ((r[0].parse::<f64>().unwrap() * 1e-3 - g.x0) / g.dx).round() as usize;
            let j = ((r[1].parse::<f64>().unwrap() * 1e-3 - g.y0) / g.dy).round() as usize;
            if r[6] == "1" {
                assert!(!r[2].is_empty(), "a flagged row keeps its value");
                seen.insert((name.clone(), i.to_string(), j.to_string()));
            } else {
                assert_eq!(r[6], "0");
            }
            if !r[2].is_empty() {
                let sg: f64 = r[4].parse().unwrap();
                assert!(
                    (sg - sigma_mm_s).abs() < 1e-4 * sigma_mm_s,
                    "{sg} vs {sigma_mm_s}"
                );
            }
        }
    }
    assert_eq!(seen, flagged);
    let plan = Plan::load(&out.join("pipeline.toml")).unwrap();
    let c = &plan.runs[0].input.columns;
    assert_eq!(c.flag.as_deref(), Some("flag"));
    assert_eq!(c.sigma_u.as_deref(), Some("sigma_u"));
    assert_eq!(plan.runs[0].input.velocity_scale, 1e-3);
    let f = frame_field(&opts, 0, 3).unwrap();
    assert!(f
        .kind
        .iter()
        .zip(f.measured.u.iter())
        .all(|(&k, u)| Kind::from_code(k).is_gap() == u.is_nan()));
}

#[test]
fn pandas_reads_the_frames_as_the_bookkeeping_says() {
    // reference: pandas' C CSV parser (the reader of the NumPy baseline in
    // the benchmark) must see the same rows, empty cells and values
    let tmp = tempfile::tempdir().unwrap();
    let mut opts = small(Scenario::Wake);
    opts.frames = 3;
    opts.speeds = vec![0.3];
    opts.gap_fraction = 0.2;
    let out = tmp.path().join("c");
    generate(&opts, &out).unwrap();
    let f = frame_field(&opts, 0, 2).unwrap();
    let missing = f.kind.iter().filter(|&&k| k == Kind::Missing as u8).count();
    let empty = f.kind.iter().filter(|&&k| k == Kind::Empty as u8).count();
    let sum_u: f64 = f.measured.u.iter().filter(|u| u.is_finite()).sum();
    // pandas read the committed copy of this frame
    // (tests/reference/pandas_synth_frame.py); it must be this frame's bytes.
    // CURLEW_BLESS=1 rewrites the copy after a deliberate change of synth.
    let written = std::fs::read(out.join("u030/f00003.csv")).unwrap();
    let committed = crate::testutil::reference_path("synth_wake_f00003.csv");
    if std::env::var_os("CURLEW_BLESS").is_some() {
        std::fs::write(&committed, &written).unwrap();
    }
    assert!(
        std::fs::read(&committed).unwrap() == written,
        "synth no longer writes the frame pandas was checked on"
    );
    let r = crate::testutil::reference("pandas_synth_frame");
    let v: Vec<f64> = ["rows", "u_empty", "u_sum", "x_min", "y_max"]
        .iter()
        .map(|k| crate::testutil::float(&r[*k]))
        .collect();
    assert_eq!(v[0] as usize, 14 * 9 - missing);
    assert_eq!(v[1] as usize, empty);
    // five significant digits of 0.3 m/s: each value within 5e-6
    assert!((v[2] - sum_u).abs() < 5e-6 * 126.0, "{} vs {sum_u}", v[2]);
    assert_eq!(v[3], 20.0); // x0 = 2 D = 20 mm
    assert_eq!(v[4], 8.0); // (ny - 1)/2 pitches of 2 mm
}

#[test]
fn correlated_noise_reaches_the_measured_frames() {
    let mut opts = small(Scenario::SolidBody);
    opts.nx = Some(40);
    opts.ny = Some(30);
    opts.noise_correlation = 0.5;
    opts.outlier_fraction = 0.0;
    opts.gap_fraction = 0.0;
    let sigma = setup_run(&opts, 0.2).unwrap().noise_sigma;
    let (mut s0, mut s1, mut n0, mut n1) = (0.0, 0.0, 0.0, 0.0);
    for k in 0..30 {
        let f = frame_field(&opts, 0, k).unwrap();
        let e = (&f.measured.v - &f.truth.v) / sigma;
        for j in 0..30 {
            for i in 0..40 {
                s0 += e[[j, i]] * e[[j, i]];
                n0 += 1.0;
                if j + 1 < 30 {
                    s1 += e[[j, i]] * e[[j + 1, i]];
                    n1 += 1.0;
                }
            }
        }
    }
    // 36 000 samples: sampling sd of the correlation about 0.005
    let (var, r) = (s0 / n0, s1 / n1 / (s0 / n0));
    assert!((var - 1.0).abs() < 0.03, "noise variance {var} sigma^2");
    assert!((r - 0.5).abs() < 0.025, "neighbour correlation {r}");
}
