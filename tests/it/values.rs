//! The numbers a reader sees equal the tables they come from, end to end
//! through `curlew run` on `synth` campaigns:
//!
//! - the report's summary table and `campaign.csv` against `frames.csv`
//!   and `ensemble.csv` (recomputed here from their definitions in
//!   docs/interface.md);
//! - every parquet table against its CSV twin, value for value;
//! - a rejected frame (a bad laser shot) is listed in `frames.csv`, in
//!   `campaign.csv` and in the manifest, and is absent from the statistics:
//!   they equal the run made without that frame;
//! - the ensemble test and smoothing, run through `run`, against `synth`'s
//!   analytic truth (`<run>/truth/mean.csv`).

use crate::util::*;
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// The one run folder of a campaign output folder.
fn run_dir(out: &Path) -> PathBuf {
    std::fs::read_dir(out)
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.join("ensemble.csv").is_file())
        .expect("a run folder")
}

/// A CSV table as text cells by column name (for string columns).
fn text_col(p: &Path, name: &str) -> Vec<String> {
    let text = std::fs::read_to_string(p).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let k = head.iter().position(|h| *h == name).unwrap();
    lines
        .map(|l| l.split(',').nth(k).unwrap().to_string())
        .collect()
}

/// The cells (tags stripped) of every row of the first `<table>` after
/// `marker` in an HTML page.
fn html_rows(page: &str, marker: &str) -> Vec<Vec<String>> {
    let from = page.find(marker).expect("marker in the report");
    let t0 = from + page[from..].find("<tbody>").unwrap();
    let t1 = t0 + page[t0..].find("</tbody>").unwrap();
    page[t0..t1]
        .split("<tr>")
        .skip(1)
        .map(|row| {
            row.split("<td")
                .skip(1)
                .map(|c| {
                    let inner = &c[c.find('>').unwrap() + 1..c.find("</td>").unwrap()];
                    let mut s = String::new();
                    let mut tag = false;
                    for ch in inner.chars() {
                        match ch {
                            '<' => tag = true,
                            '>' => tag = false,
                            _ if !tag => s.push(ch),
                            _ => {}
                        }
                    }
                    s
                })
                .collect()
        })
        .collect()
}

/// The median of the finite values (numpy.median's convention for even
/// counts: the mean of the two middle values).
fn median(v: &[f64]) -> f64 {
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    s.sort_by(f64::total_cmp);
    let n = s.len();
    if n % 2 == 1 {
        s[n / 2]
    } else {
        (s[n / 2 - 1] + s[n / 2]) / 2.0
    }
}

#[test]
fn report_and_campaign_numbers_equal_the_tables_they_come_from() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "c", "--frames", "24", "--seed", "11", "--speeds", "0.2",
    ]);
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let run = run_dir(&w.path("o"));
    let frames = Csv::read(&run.join("frames.csv"));
    let ens = Csv::read(&run.join("ensemble.csv"));
    let camp = Csv::read(&w.path("o/campaign.csv"));
    let c = |name: &str| camp.col(name)[0];

    // Frame counts and vector fractions: sums over frames.csv.
    let rejected = frames.col("frame_rejected");
    let used = rejected.iter().filter(|&&r| r == 0.0).count();
    assert_eq!(c("frames"), frames.rows.len() as f64);
    assert_eq!(c("frames_used"), used as f64);
    let total: f64 = frames.col("n_vectors").iter().sum();
    for (fraction, count) in [
        ("outlier_fraction", "n_outliers"),
        ("invalid_input_fraction", "n_invalid_input"),
        ("replaced_fraction", "n_replaced"),
        ("filled_fraction", "n_filled"),
    ] {
        let k: f64 = frames.col(count).iter().sum();
        assert_all_close(&[c(fraction)], &[k / total], 1e-15, 0.0, fraction);
    }
    assert!(c("outlier_fraction") > 0.01, "synth plants 3 % outliers");
    let mean_noise = mean_used_noise(&frames);
    assert_all_close(&[c("noise_estimate")], &[mean_noise], 0.0, 1e-12, "noise");

    let (om, omu) = (ens.col("omega_mean"), ens.col("omega_mean_unc"));
    let k = expected_peak(&ens);
    assert_eq!(c("omega_mean_peak"), om[k]);
    assert_eq!(c("omega_mean_peak_unc"), omu[k]);
    assert_all_close(
        &[c("omega_mean_peak_x")],
        &[ens.col("x")[k]],
        1e-12,
        0.0,
        "x",
    );
    assert_all_close(
        &[c("omega_mean_peak_y")],
        &[ens.col("y")[k]],
        1e-12,
        0.0,
        "y",
    );

    // The report's summary row says the same, at its printed precision.
    let page = std::fs::read_to_string(w.path("o/index.html")).unwrap();
    let rows = html_rows(&page, "id=\"summary\"");
    assert_eq!(rows.len(), 1, "{rows:?}");
    let r = &rows[0];
    assert_eq!(r[0], text_col(&w.path("o/campaign.csv"), "id")[0]);
    assert_eq!(r[1], format!("{used} / {}", frames.rows.len()));
    assert_eq!(r[5], format!("{:.2} %", 100.0 * c("outlier_fraction")));
    assert_eq!(
        r[6],
        format!("{:.2} %", 100.0 * c("invalid_input_fraction"))
    );
    let printed = |s: &str| s.replace('−', "-").parse::<f64>().unwrap();
    // 3 and 4 significant digits: within half a unit of the last digit.
    let noise_printed = printed(&r[7]);
    assert!((noise_printed - c("noise_estimate")).abs() <= 0.5e-2 * c("noise_estimate"));
    let peak_printed = printed(&r[8]);
    assert!(
        (peak_printed - c("omega_mean_peak")).abs() <= 0.5e-3 * c("omega_mean_peak").abs(),
        "report peak {peak_printed} vs campaign.csv {}",
        c("omega_mean_peak")
    );
}

/// Every column of a parquet table, numbers as f64 (nulls as NaN), text as
/// strings.
fn parquet_columns(p: &Path) -> HashMap<String, Result<Vec<f64>, Vec<String>>> {
    use polars::prelude::*;
    let df = ParquetReader::new(std::fs::File::open(p).unwrap())
        .finish()
        .unwrap();
    df.columns()
        .iter()
        .map(|c| {
            let name = c.name().to_string();
            let v = if c.dtype().is_primitive_numeric() {
                let s = c.cast(&DataType::Float64).unwrap();
                Ok(s.f64()
                    .unwrap()
                    .iter()
                    .map(|x| x.unwrap_or(f64::NAN))
                    .collect())
            } else {
                let s = c.cast(&DataType::String).unwrap();
                Err(s
                    .str()
                    .unwrap()
                    .iter()
                    .map(|x| x.unwrap_or("").to_string())
                    .collect())
            };
            (name, v)
        })
        .collect()
}

#[test]
fn parquet_tables_equal_their_csv_twins_value_for_value() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "c", "--frames", "24", "--seed", "5", "--speeds", "0.2",
    ]);
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let run = run_dir(&w.path("o"));
    for table in ["ensemble", "phase"] {
        let csv = Csv::read(&run.join(format!("{table}.csv")));
        let pq = parquet_columns(&run.join(format!("{table}.parquet")));
        assert_eq!(pq.len(), csv.header.len(), "{table}: column count");
        for name in &csv.header {
            match pq
                .get(name)
                .unwrap_or_else(|| panic!("{table}.parquet lacks {name}"))
            {
                // CSV writes the shortest text that reads back to the same
                // f64, so the two must agree bit for bit.
                Ok(v) => {
                    let c = csv.col(name);
                    assert_eq!(v.len(), c.len(), "{table}.{name}");
                    for (k, (a, b)) in v.iter().zip(&c).enumerate() {
                        assert!(
                            a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
                            "{table}.{name}[{k}]: parquet {a:e} vs csv {b:e}"
                        );
                    }
                }
                Err(s) => assert_eq!(s, &text_col(&run.join(format!("{table}.csv")), name)),
            }
        }
    }
}

/// Rewrites a frame file as a bad shot: every vector replaced by a large
/// pseudo-random one (a fixed, deterministic pattern).
fn spoil_frame(file: &Path) {
    let text = std::fs::read_to_string(file).unwrap();
    let mut lines = text.lines();
    let head = lines.next().unwrap();
    let cols: Vec<&str> = head.split(',').collect();
    let (iu, iv) = (
        cols.iter().position(|c| *c == "u").unwrap(),
        cols.iter().position(|c| *c == "v").unwrap(),
    );
    let mut out = format!("{head}\n");
    for (k, l) in lines.enumerate() {
        let mut cells: Vec<String> = l.split(',').map(|s| s.to_string()).collect();
        if !cells[iu].is_empty() {
            // A Weyl sequence: uniform-looking values in (-1, 1) m/s.
            let a = ((k as f64 * 0.618_033_988_75).fract() - 0.5) * 2.0;
            let b = ((k as f64 * 0.414_213_562_37).fract() - 0.5) * 2.0;
            cells[iu] = format!("{a}");
            cells[iv] = format!("{b}");
        }
        out.push_str(&cells.join(","));
        out.push('\n');
    }
    std::fs::write(file, out).unwrap();
}

#[test]
fn a_rejected_frame_is_listed_and_absent_from_the_statistics() {
    let w = Work::new();
    w.ok(&[
        "synth", "vortex", "--out", "c", "--frames", "20", "--seed", "9",
    ]);
    let id = "u020";
    // Without the frame table the frames are independent samples. (With
    // times, the run without the frame would see a gap in its clock, which
    // the lag sums bridge by frame index, docs/methods.md: N_eff would then
    // differ by design, not because the bad shot leaked in.)
    let p = w.path("c/pipeline.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    let line = text
        .lines()
        .find(|l| l.starts_with("frame_table"))
        .unwrap()
        .to_string();
    std::fs::write(&p, text.replace(&format!("{line}\n"), "")).unwrap();
    spoil_frame(&w.path(&format!("c/{id}/f00007.csv")));
    w.ok(&["run", "c/pipeline.toml", "--out", "a", "--quiet"]);

    // The same campaign without that frame.
    std::fs::remove_file(w.path(&format!("c/{id}/f00007.csv"))).unwrap();
    w.ok(&["run", "c/pipeline.toml", "--out", "b", "--quiet"]);

    // Listed: frames.csv, campaign.csv and the manifest.
    let fa = Csv::read(&w.path(&format!("a/{id}/frames.csv")));
    let names = text_col(&w.path(&format!("a/{id}/frames.csv")), "frame");
    let flagged: Vec<&String> = names
        .iter()
        .zip(fa.col("frame_rejected"))
        .filter(|(_, r)| *r == 1.0)
        .map(|(n, _)| n)
        .collect();
    assert_eq!(flagged, vec!["f00007"]);
    let camp = Csv::read(&w.path("a/campaign.csv"));
    assert_eq!(camp.col("frames"), vec![20.0]);
    assert_eq!(camp.col("frames_used"), vec![19.0]);
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("a/manifest.json")).unwrap()).unwrap();
    assert_eq!(
        m["runs"][0]["frames_rejected"],
        serde_json::json!(["f00007"])
    );

    // Absent: every statistic equals the run without the frame, to the
    // rounding of a different merge order (the frames fall into other
    // chunks): 1e-9 of the column's scale. Including the bad shot would move
    // the means by about 0.5 m/s, a hundred times the flow's noise.
    let ea = Csv::read(&w.path(&format!("a/{id}/ensemble.csv")));
    let eb = Csv::read(&w.path(&format!("b/{id}/ensemble.csv")));
    assert_eq!(ea.header, eb.header);
    for name in &ea.header {
        let b = eb.col(name);
        let scale = b
            .iter()
            .filter(|x| x.is_finite())
            .fold(0.0_f64, |m, x| m.max(x.abs()));
        assert_all_close(&ea.col(name), &b, 1e-9 * scale, 1e-9, name);
    }
    let nv = ea.col("n_valid");
    assert!(nv.iter().all(|&n| n <= 19.0) && nv.contains(&19.0));
}

/// Fraction of nodes where |got - want| <= k u, and the median of
/// |got - want| / u (finite values only).
fn coverage(got: &[f64], want: &[f64], unc: &[f64], k: f64) -> (f64, f64) {
    let mut z: Vec<f64> = (0..got.len())
        .filter(|&i| got[i].is_finite() && want[i].is_finite() && unc[i] > 0.0)
        .map(|i| (got[i] - want[i]).abs() / unc[i])
        .collect();
    let inside = z.iter().filter(|&&x| x <= k).count() as f64 / z.len() as f64;
    z.sort_by(f64::total_cmp);
    (inside, z[z.len() / 2])
}

#[test]
fn the_ensemble_test_and_smoothing_through_run_recover_the_synth_truth() {
    let w = Work::new();
    w.ok(&[
        "synth", "vortex", "--out", "c", "--frames", "40", "--seed", "21",
    ]);
    let p = w.path("c/pipeline.toml");
    let text = std::fs::read_to_string(&p).unwrap();
    // The ensemble test after the median test, and a light smoother
    // (Savitzky-Golay, 5 x 5 window, quadratic: common practice).
    let text = text
        .replace(
            "max_rejected_fraction = 0.3\n",
            "max_rejected_fraction = 0.3\nensemble = { k = 5.0 }\n",
        )
        .replace(
            "[fill]\n",
            "[smoothing]\nmethod = \"savitzky-golay\"\nhalf_width = 2\norder = 2\n\n[fill]\n",
        );
    assert!(text.contains("ensemble = { k = 5.0 }") && text.contains("savitzky-golay"));
    std::fs::write(&p, text).unwrap();
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let run = run_dir(&w.path("o"));
    let id = run.file_name().unwrap().to_str().unwrap().to_string();

    // The ensemble test ran and found some of the planted outliers.
    let frames = Csv::read(&run.join("frames.csv"));
    let by_ensemble: f64 = frames.col("rejected_ensemble").iter().sum();
    assert!(by_ensemble > 0.0, "the ensemble test rejected nothing");
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("o/manifest.json")).unwrap()).unwrap();
    let resolved = m["runs"][0]["resolved"].to_string();
    assert!(
        resolved.contains("savitzky"),
        "smoother not recorded: {resolved}"
    );

    let got = Csv::read(&run.join("ensemble.csv"));
    let truth = Csv::read(&w.path(&format!("c/{id}/truth/mean.csv")));
    assert_all_close(&got.col("x"), &truth.col("x"), 1e-9, 0.0, "x");
    for (q, min_inside) in [("u_mean", 0.92), ("v_mean", 0.92), ("omega_mean", 0.95)] {
        let (inside, med) = coverage(
            &got.col(q),
            &truth.col(q),
            &got.col(&format!("{q}_unc")),
            3.0,
        );
        eprintln!("{q}: {inside:.3} within 3 u, median |e|/u {med:.2}");
        assert!(inside >= min_inside, "{q}: {inside:.3} within 3 u");
        assert!(
            med > 0.2,
            "{q}: median |e|/u {med:.2}: error bars far too wide"
        );
    }
}

/// The noise estimate campaign.csv should give: the mean over the frames
/// the statistics used (not rejected, with an estimate).
fn mean_used_noise(frames: &Csv) -> f64 {
    let rejected = frames.col("frame_rejected");
    let noise: Vec<f64> = frames
        .col("noise_estimate")
        .iter()
        .zip(&rejected)
        .filter(|(n, r)| **r == 0.0 && n.is_finite())
        .map(|(n, _)| *n)
        .collect();
    noise.iter().sum::<f64>() / noise.len() as f64
}

/// The node campaign.csv's peak should be: the largest |omega_mean| among
/// nodes whose random part of u(omega_mean),
/// sqrt(omega_inst_unc^2 - omega_bias_inst^2) / sqrt(n_valid), is at most
/// 3 x its median.
fn expected_peak(ens: &Csv) -> usize {
    let om = ens.col("omega_mean");
    let (inst, bi, nv) = (
        ens.col("omega_inst_unc"),
        ens.col("omega_bias_inst"),
        ens.col("n_valid"),
    );
    let random: Vec<f64> = (0..inst.len())
        .map(|k| {
            let b = if bi[k].is_finite() { bi[k] } else { 0.0 };
            (inst[k] * inst[k] - b * b).max(0.0).sqrt() / nv[k].sqrt()
        })
        .collect();
    let lim = 3.0 * median(&random);
    (0..om.len())
        .filter(|&k| om[k].is_finite() && random[k].is_finite() && random[k] <= lim)
        .max_by(|&a, &b| om[a].abs().total_cmp(&om[b].abs()))
        .unwrap()
}
