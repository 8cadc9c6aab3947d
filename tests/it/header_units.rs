//! Units stated in the frame files' header, end to end: a campaign written
//! in mm and mm/s with a header that says so, and a pipeline that states no
//! unit, reduces to the ensemble of the same campaign in m and m/s.

use crate::util::{assert_all_close, Csv, Work};

/// `s` (a plain decimal, `-12.345`) times 1000, exactly, as a decimal.
fn times_1000(s: &str) -> String {
    if s.is_empty() || s.eq_ignore_ascii_case("nan") {
        return s.to_string();
    }
    let (sign, digits) = s.strip_prefix('-').map_or(("", s), |d| ("-", d));
    assert!(
        digits.bytes().all(|b| b.is_ascii_digit() || b == b'.'),
        "not a plain decimal: {s}"
    );
    let (int, frac) = digits.split_once('.').unwrap_or((digits, ""));
    let frac = format!("{frac:0<3}");
    let joined = format!("{int}{}", &frac[..3]);
    let joined = joined.trim_start_matches('0');
    let joined = if joined.is_empty() { "0" } else { joined };
    if frac.len() > 3 {
        format!("{sign}{joined}.{}", &frac[3..])
    } else {
        format!("{sign}{joined}")
    }
}

/// Copies the frame `from` to `to` in mm and mm/s (every numeric column is
/// a position or a velocity), the header stating the units.
fn to_mm(from: &std::path::Path, to: &std::path::Path) {
    let text = std::fs::read_to_string(from).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let units: Vec<String> = header
        .iter()
        .map(|h| match *h {
            "x" | "y" => format!("{h} [mm]"),
            "u" | "v" | "sigma_u" | "sigma_v" => format!("{h} (mm/s)"),
            other => panic!("synth wrote a column {other} this test does not convert"),
        })
        .collect();
    let mut out = units.join(",") + "\n";
    for l in lines {
        let cells: Vec<String> = l.split(',').map(times_1000).collect();
        out.push_str(&cells.join(","));
        out.push('\n');
    }
    std::fs::write(to, out).unwrap();
}

/// Six frames of synth's vortex (noise, outliers and all) written in m and
/// m/s, and the same decimals shifted to mm and mm/s with a header `x
/// [mm],y [mm],u (mm/s),v (mm/s)` and no unit in the pipeline.
///
/// Not bit for bit: a value read as `12.5` mm becomes 12.5 × 1e-3 in f64,
/// which may differ by one unit in the last place from `0.0125` read
/// directly (1e-3 is not exact in binary). The outputs agree to 1e-12 of
/// each column's largest magnitude (vorticity, a difference quotient, can
/// lose relative precision where it crosses zero); the counts of valid,
/// invalid, rejected and replaced vectors are equal.
#[test]
fn a_campaign_in_mm_with_units_in_the_header_reduces_like_the_one_in_m() {
    assert_eq!(times_1000("0.0125"), "12.5");
    assert_eq!(times_1000("-1.5"), "-1500");
    assert_eq!(times_1000("0.0001234"), "0.1234");
    let w = Work::new();
    w.ok(&[
        "synth",
        "vortex",
        "--out",
        "si",
        "--frames",
        "6",
        "--speeds",
        "0.2",
        "--seed",
        "5",
        "--length-unit",
        "m",
        "--velocity-unit",
        "m/s",
    ]);
    let si = std::fs::read_to_string(w.path("si/pipeline.toml")).unwrap();
    assert!(
        si.contains("length_unit = \"m\"\n") && si.contains("velocity_unit = \"m/s\"\n"),
        "{si}"
    );
    let mm = si
        .replace("length_unit = \"m\"\n", "")
        .replace("velocity_unit = \"m/s\"\n", "");
    std::fs::create_dir_all(w.path("mm/u020")).unwrap();
    w.write("mm/pipeline.toml", &mm);
    let mut n = 0;
    for e in std::fs::read_dir(w.path("si/u020")).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap().to_string_lossy().into_owned();
        let to = w.path(&format!("mm/u020/{name}"));
        // frames f00001.csv…; the frame table and the rest as they are
        if name.starts_with("f0") && name.ends_with(".csv") {
            to_mm(&p, &to);
            n += 1;
        } else if p.is_file() {
            std::fs::copy(&p, &to).unwrap();
        }
    }
    assert!(n >= 6, "{n} frames");

    let check = w.ok(&["check", "mm/pipeline.toml"]);
    assert!(
        check.contains("x, y in units of 0.001 m; u, v in units of 0.001 m/s")
            && check.contains("x, y in mm (from the header of f00001.csv, line 1: 'x [mm]')")
            && check.contains("u, v in mm/s (from the header of f00001.csv, line 1: 'u [mm/s]')"),
        "{check}"
    );
    let check = w.ok(&["check", "si/pipeline.toml"]);
    assert!(
        check.contains("x, y in m (stated by the pipeline)"),
        "{check}"
    );

    w.ok(&["run", "si/pipeline.toml", "--out", "o_si", "--quiet"]);
    w.ok(&["run", "mm/pipeline.toml", "--out", "o_mm", "--quiet"]);
    tables_agree_to_rounding(&w);
    let manifest = std::fs::read_to_string(w.path("o_mm/manifest.json")).unwrap();
    let m: serde_json::Value = serde_json::from_str(&manifest).unwrap();
    let units = m["runs"][0]["units"].as_str().unwrap();
    assert!(
        units.contains("mm/s (from the header of f00001.csv"),
        "{units}"
    );
}

/// ensemble.csv of the two runs to 1e-12 of each column's largest
/// magnitude (a relative tolerance would lose relative precision where a
/// column crosses zero); frames.csv: the counts equal, the rest (noise
/// estimates, in SI) as close.
fn tables_agree_to_rounding(w: &Work) {
    let a = Csv::read(&w.path("o_si/u020/ensemble.csv"));
    let b = Csv::read(&w.path("o_mm/u020/ensemble.csv"));
    assert_eq!(a.header, b.header);
    assert_eq!(a.col("n_valid"), b.col("n_valid"));
    let mut worst = 0.0f64;
    for c in &a.header {
        let (p, q) = (b.col(c), a.col(c));
        let big = q
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |m, v| m.max(v.abs()));
        assert_all_close(&p, &q, 1e-12 * big, 0.0, c);
        for (x, y) in p.iter().zip(&q) {
            if y.is_finite() && big > 0.0 {
                worst = worst.max((x - y).abs() / big);
            }
        }
    }
    eprintln!("largest difference: {worst:e} of the column's largest magnitude");
    // frames.csv: the counts equal, the rest (noise estimates, in SI) as close
    let fa = Csv::read(&w.path("o_si/u020/frames.csv"));
    let fb = Csv::read(&w.path("o_mm/u020/frames.csv"));
    assert_eq!(fa.header, fb.header);
    for c in &fa.header {
        let (p, q) = (fb.col(c), fa.col(c));
        if c.starts_with("n_") {
            assert_eq!(p, q, "frames.csv {c}");
        } else {
            let big = q
                .iter()
                .filter(|v| v.is_finite())
                .fold(0.0f64, |m, v| m.max(v.abs()));
            assert_all_close(&p, &q, 1e-12 * big, 0.0, c);
        }
    }
}
