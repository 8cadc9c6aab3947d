//! The report's plain words on the POD, the spectra and the length scales
//! say the numbers of the tables they come from (pod.csv,
//! spectral-peaks.csv, scales.csv), at the precision printed; and
//! `curlew check` says which of these analyses will run, with the same
//! Welch segmentation the run then uses.
//!
//! The campaign is `synth wake` (invented data, time-resolved at 15 frames
//! per second) with two probes and the POD on.

use crate::util::*;

/// A number read from the words and half a unit of its last printed digit.
fn token(s: &str) -> (f64, f64) {
    if s.starts_with("n/a") {
        return (f64::NAN, 0.0);
    }
    let t: String = s
        .chars()
        .take_while(|c| c.is_ascii_digit() || matches!(c, '.' | '-' | 'e' | '+' | 'N' | 'a'))
        .collect();
    let t = t.trim_end_matches('.');
    let v: f64 = t
        .parse()
        .unwrap_or_else(|_| panic!("no number at {:?}", &s[..s.len().min(40)]));
    let (mant, exp) = match t.split_once('e') {
        Some((m, e)) => (m, e.parse::<i32>().unwrap()),
        None => (t, 0),
    };
    let dec = mant.split_once('.').map_or(0, |(_, d)| d.len()) as i32;
    (v, 0.5 * 10f64.powi(exp - dec) * (1.0 + 1e-9))
}

/// Reads the words in order: each `next` finds `marker` after the last
/// number read and parses the number right after it.
struct Cursor<'a> {
    text: &'a str,
    at: usize,
}

impl Cursor<'_> {
    fn next(&mut self, marker: &str) -> (f64, f64) {
        let k = self.text[self.at..]
            .find(marker)
            .unwrap_or_else(|| panic!("no {marker:?} after {:?}", &self.text[self.at..]))
            + self.at
            + marker.len();
        self.at = k;
        token(&self.text[k..])
    }
}

#[track_caller]
fn same(words: (f64, f64), table: f64, what: &str) {
    let (v, tol) = words;
    assert!(
        (v.is_nan() && table.is_nan()) || (v - table).abs() <= tol,
        "{what}: the report says {v} (± {tol:e} printed), the table {table}"
    );
}

/// The text of the paragraph after `<h3>{heading}</h3>`.
fn paragraph(html: &str, heading: &str) -> String {
    let h = format!("<h3>{heading}</h3>\n<p>");
    let k = html
        .find(&h)
        .unwrap_or_else(|| panic!("no {heading:?} section"))
        + h.len();
    let end = html[k..].find("</p>").unwrap() + k;
    html[k..end].replace("&#39;", "'")
}

/// The first column of a CSV (text).
fn first_column(p: &std::path::Path) -> Vec<String> {
    std::fs::read_to_string(p)
        .unwrap()
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().to_string())
        .collect()
}

fn campaign(w: &Work, extra: &str) {
    let text = std::fs::read_to_string(w.path("c/pipeline.toml")).unwrap();
    w.write("c/p.toml", &format!("{text}{extra}"));
}

// include_filled: synth's 3 % outliers and 2 % gaps leave more than 10 %
// of a probe's 64 samples without a valid vector (7 and 8 of 64 measured),
// and such a series gets no spectrum; counting replaced and filled vectors
// keeps all four probe series.
const EXTRA: &str = "[run.conditions]\nvelocity = 0.15\nlength = 0.01\n\n[statistics]\nprobes = [[50.0, 6.0], [80.0, -6.0]]\ninclude_filled = true\n\n[modes]\npod = true\nmodes = 6\n";

#[test]
fn report_words_say_the_numbers_of_the_pod_spectra_and_scales_tables() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "c", "--frames", "64", "--speeds", "0.15", "--seed", "5",
    ]);
    campaign(&w, EXTRA);

    // check: POD on, correlations at 2 probes, and the Welch segmentation
    // of 64 frames: segments of 16 (the largest power of two up to a
    // quarter), overlap 8, (64 - 16) / 8 + 1 = 7 segments.
    let out = w.ok(&["check", "c/p.toml"]);
    assert!(out.contains("POD: on, 6 modes reported"), "{out}");
    assert!(
        out.contains("correlations: two-point correlations of u' and v' about 2 probe(s)"),
        "{out}"
    );
    assert!(
        out.contains("spectra: Welch PSD of u and v at 2 probe(s) and POD coefficients a1..a4 from 64 frames at 15 Hz: 7 segments of 16 samples overlapping by 8, resolution 0.9375 Hz"),
        "{out}"
    );

    w.ok(&["run", "c/p.toml", "--out", "o", "--quiet"]);
    let html = std::fs::read_to_string(w.path("o/index.html")).unwrap();
    let dir = w.path("o/u015");

    pod_words(&html, &dir);
    spectra_words(&html, &dir);
    scales_words(&html, &dir);
}

/// The POD paragraph says the numbers of `pod.csv` and
/// `pod-coefficients.csv`.
fn pod_words(html: &str, dir: &std::path::Path) {
    let para = paragraph(html, "Coherent structures (POD)");
    let pod = Csv::read(&dir.join("pod.csv"));
    let (frac, unc, cum) = (
        pod.col("energy_fraction"),
        pod.col("fraction_unc"),
        pod.col("cumulative_fraction"),
    );
    let mut c = Cursor { text: &para, at: 0 };
    let used = Csv::read(&dir.join("pod-coefficients.csv")).rows.len();
    assert_eq!(c.next("POD of ").0, used as f64, "{para}");
    same(c.next("mode 1 holds "), 100.0 * frac[0], "mode 1 %");
    same(c.next("(± "), 100.0 * unc[0], "mode 1 ± %");
    same(c.next("mode 2 "), 100.0 * frac[1], "mode 2 %");
    same(c.next("(± "), 100.0 * unc[1], "mode 2 ± %");
    same(c.next("together "), 100.0 * cum[1], "modes 1-2 %");
    let above: f64 = pod.col("above_noise").iter().sum();
    if above.is_finite() {
        assert_eq!(
            c.next(" %. ").0,
            above,
            "modes above the noise floor: {para}"
        );
    }
    let sep = pod.col("separated");
    let word = |s: f64| {
        if s == 1.0 {
            "is separated"
        } else {
            "is not separated"
        }
    };
    assert!(
        para.contains(&format!("mode 1 {} ", word(sep[0])))
            && para.contains(&format!("mode 2 {}", word(sep[1]))),
        "{para}"
    );
}

/// The spectra paragraph says the numbers of `spectral-peaks.csv`
/// (7 segments of 16, as check said).
fn spectra_words(html: &str, dir: &std::path::Path) {
    let para = paragraph(html, "Spectra");
    let peaks = Csv::read(&dir.join("spectral-peaks.csv"));
    let names = first_column(&dir.join("spectral-peaks.csv"));
    assert_eq!(names.len(), 8, "2 probes x (u, v) and a1..a4: {names:?}");
    let col = |n: &str| peaks.col(n);
    let mut c = Cursor { text: &para, at: 0 };
    assert_eq!(c.next("Welch spectra of ").0, 8.0);
    same(c.next("series: "), col("segments")[0], "segments");
    assert_eq!(col("segments")[0], 7.0, "as check said");
    same(c.next("segments of "), col("nperseg")[0], "nperseg");
    same(c.next("samples at "), col("fs_hz")[0], "fs");
    same(c.next("Hz, "), col("dof")[0], "dof");
    same(c.next("resolution "), col("df_hz")[0], "df");
    let reference = col("reference_hz")[0];
    assert!(
        reference.is_finite(),
        "the frame table gives phases and times"
    );
    same(
        c.next("The run's frequency is "),
        reference,
        "reference frequency",
    );
    for (i, name) in names.iter().enumerate() {
        let label = match name.strip_prefix("probe") {
            Some(r) => format!("probe {}", r.replace('_', " ")),
            None => format!("POD {name}"),
        };
        let peak = col("peak_hz")[i];
        if peak.is_nan() {
            assert!(
                para.contains(&format!("{label}: no peak inside the spectrum.")),
                "{label}: {para}"
            );
            continue;
        }
        let mut c = Cursor { text: &para, at: 0 };
        same(
            c.next(&format!("{label}: dominant frequency ")),
            peak,
            &format!("{label} peak"),
        );
        same(
            c.next("± "),
            col("peak_unc_hz")[i],
            &format!("{label} u(f)"),
        );
        same(c.next("St = "), col("strouhal")[i], &format!("{label} St"));
        same(
            c.next("± "),
            col("strouhal_unc")[i],
            &format!("{label} u(St)"),
        );
        same(
            c.next(", "),
            col("difference_over_unc")[i],
            &format!("{label} (f - f_run) / u(f)"),
        );
    }
}

/// The length-scales paragraph says the numbers of `scales.csv`.
fn scales_words(html: &str, dir: &std::path::Path) {
    let para = paragraph(html, "Length scales");
    let sc = Csv::read(&dir.join("scales.csv"));
    assert_eq!(sc.rows.len(), 4, "2 probes x (u, v)");
    let chunks: Vec<&str> = para.split("Probe ").skip(1).collect();
    assert_eq!(chunks.len(), 4, "{para}");
    let s = |n: &str| sc.col(n);
    for (r, chunk) in chunks.iter().enumerate() {
        let comp = ["u′", "v′"][r % 2];
        assert!(chunk.contains(&format!("), {comp}: ")), "{chunk}");
        let mut c = Cursor { text: chunk, at: 0 };
        same(c.next(""), s("probe")[r], "probe");
        same(c.next(" at ("), 1e3 * s("probe_x")[r], "probe x mm");
        same(c.next("mm, "), 1e3 * s("probe_y")[r], "probe y mm");
        same(
            c.next("integral length scale "),
            1e3 * s("length_x")[r],
            "L_x mm",
        );
        same(c.next(" ± "), 1e3 * s("length_x_unc")[r], "u(L_x) mm");
        same(c.next("along x and "), 1e3 * s("length_y")[r], "L_y mm");
        same(c.next(" ± "), 1e3 * s("length_y_unc")[r], "u(L_y) mm");
        same(
            c.next("along y ("),
            1e3 * s("length_x_noise_removed")[r],
            "L_x noise removed",
        );
        same(
            c.next(" and "),
            1e3 * s("length_y_noise_removed")[r],
            "L_y noise removed",
        );
        let var = s("variance")[r];
        same(
            c.next("spike holds "),
            100.0 * s("noise_var_spike")[r] / var,
            "spike % of variance",
        );
        same(
            c.next("propagated noise "),
            100.0 * s("noise_var_propagated")[r] / var,
            "propagated % of variance",
        );
        for (ax, col) in [("x", "reached_zero_x"), ("y", "reached_zero_y")] {
            assert_eq!(
                chunk.contains(&format!("Along {ax} the correlation stays above zero")),
                s(col)[r] == 0.0,
                "{chunk}"
            );
        }
    }
}

#[test]
fn check_says_why_spectra_and_correlations_will_not_run() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "c", "--frames", "24", "--speeds", "0.15", "--seed", "5",
    ]);
    // No probes, no POD: nothing to take a spectrum of.
    campaign(&w, "");
    let out = w.ok(&["check", "c/p.toml"]);
    assert!(out.contains("POD: off ([modes] pod = true"), "{out}");
    assert!(
        out.contains("correlations: off (needs [statistics] probes)"),
        "{out}"
    );
    assert!(
        out.contains("spectra: off (needs [statistics] probes or [modes] pod = true"),
        "{out}"
    );
    // Probes, but the frame table withheld: not time-resolved.
    let text = std::fs::read_to_string(w.path("c/pipeline.toml")).unwrap();
    let blind = without_frame_table(&text);
    w.write(
        "c/p.toml",
        &format!("{blind}[statistics]\nprobes = [[50.0, 6.0]]\n"),
    );
    let out = w.ok(&["check", "c/p.toml"]);
    assert!(
        out.contains("spectra: off: the run is not time-resolved (not every frame has a time"),
        "{out}"
    );
    assert!(out.contains("about 1 probe(s)"), "{out}");
}
