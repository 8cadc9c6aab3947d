//! What a file holds, as plain aligned text (for `curlew inspect`).
//!
//! Owns: recognising a frame file (it has the mapped x, y, u, v columns), a
//! parquet long table (also a frame column), or any other table (an output
//! such as `ensemble.csv`), and summarising it. Does not own: reading rules
//! (the same readers as a run, so `inspect` fails where `run` would).
//!
//! A long table is summarised from its frame index and its first frame only,
//! so inspecting a 1000-frame file does not decode it whole.

use std::fmt::Write;
use std::path::Path;

use crate::error::Result;
use crate::field::{Field, FILLED, VALID};

use super::{parquet, read_frame, read_table, Format, FrameSource, InputSpec, Table, Values};

fn range(values: impl Iterator<Item = f64>) -> (f64, f64, usize, usize) {
    let (mut lo, mut hi, mut nan, mut n) = (f64::INFINITY, f64::NEG_INFINITY, 0, 0);
    for x in values {
        n += 1;
        if x.is_nan() {
            nan += 1;
        } else {
            lo = lo.min(x);
            hi = hi.max(x);
        }
    }
    (lo, hi, nan, n)
}

fn num(x: f64) -> String {
    if !x.is_finite() {
        return "-".into();
    }
    let a = x.abs();
    if a == 0.0 || (1e-3..1e6).contains(&a) {
        format!("{x:.6}")
    } else {
        format!("{x:.6e}")
    }
}

fn line(out: &mut String, key: &str, value: impl std::fmt::Display) {
    let _ = writeln!(out, "{key:<10} {value}");
}

fn describe_field(out: &mut String, f: &Field, rows: usize) {
    let g = f.grid;
    line(
        out,
        "grid",
        format!(
            "{} x {} nodes, pitch {:.4} x {:.4} mm",
            g.nx,
            g.ny,
            g.dx * 1e3,
            g.dy * 1e3
        ),
    );
    line(
        out,
        "extent",
        format!(
            "x {:.4} .. {:.4} mm, y {:.4} .. {:.4} mm",
            g.x0 * 1e3,
            g.x(g.nx - 1) * 1e3,
            g.y0 * 1e3,
            g.y(g.ny - 1) * 1e3
        ),
    );
    let valid = f.count(VALID);
    let missing = g.len() - rows.min(g.len());
    let invalid = f.count(FILLED) - missing;
    line(
        out,
        "vectors",
        format!(
            "{} nodes: {valid} valid, {invalid} invalid in the input (empty, NaN or flagged), {missing} without a row",
            g.len()
        ),
    );
    for (name, a) in [("u", &f.u), ("v", &f.v)] {
        let (lo, hi, _, _) = range(a.iter().copied());
        line(out, name, format!("{} .. {} m/s", num(lo), num(hi)));
    }
}

fn describe_table(out: &mut String, t: &Table) {
    let w = t
        .columns
        .iter()
        .map(|c| c.0.len())
        .max()
        .unwrap_or(6)
        .max(6);
    let _ = writeln!(
        out,
        "{:<w$}  {:>16}  {:>16}  {:>8}",
        "column", "min", "max", "NaN"
    );
    for (name, vals) in &t.columns {
        let numbers: Vec<f64> = match vals {
            Values::F64(v) => v.clone(),
            Values::I64(v) => v.iter().map(|&x| x as f64).collect(),
            Values::Str(v) => {
                let distinct: std::collections::BTreeSet<&String> = v.iter().collect();
                let d = format!("{} distinct", distinct.len());
                let _ = writeln!(out, "{name:<w$}  {:>16}  {d:>16}  {:>8}", "text", "-");
                continue;
            }
        };
        let (lo, hi, nan, _) = range(numbers.into_iter());
        let _ = writeln!(
            out,
            "{name:<w$}  {:>16}  {:>16}  {nan:>8}",
            num(lo),
            num(hi)
        );
    }
}

/// A summary of `path` read with `spec` (format, columns, units).
pub fn describe(path: &Path, spec: &InputSpec) -> Result<String> {
    let mut out = String::new();
    line(&mut out, "file", path.display());
    let c = &spec.columns;
    let frame_cols = [&c.x, &c.y, &c.u, &c.v];
    if spec.format == Format::Parquet {
        let schema_cols = parquet::column_names(path)?;
        let has = |n: &str| schema_cols.iter().any(|c| c == n);
        if has(&c.frame) && frame_cols.iter().all(|n| has(n)) {
            let ix = parquet::index(path, &c.frame)?;
            let rows: usize = ix.frames.values().flatten().map(|r| r.1).sum();
            let (first, last) = (
                ix.frames.keys().next().unwrap(),
                ix.frames.keys().last().unwrap(),
            );
            line(
                &mut out,
                "kind",
                format!("parquet long table (frame column '{}')", c.frame),
            );
            line(&mut out, "columns", schema_cols.join(", "));
            line(&mut out, "rows", rows);
            line(
                &mut out,
                "frames",
                format!("{} (ids {first} .. {last})", ix.frames.len()),
            );
            let src = FrameSource::Parquet {
                path: path.to_path_buf(),
                frame: *first,
            };
            let f = read_frame(spec, &src)?;
            let n0: usize = ix.frames[first].iter().map(|r| r.1).sum();
            line(&mut out, "frame", format!("{first} (the first):"));
            describe_field(&mut out, &f, n0);
            return Ok(out);
        }
    }
    let t = read_table(path, spec.format, spec.skip_lines)?;
    let names: Vec<&str> = t.columns.iter().map(|c| c.0.as_str()).collect();
    let is_frame = frame_cols.iter().all(|n| names.contains(&n.as_str()));
    line(&mut out, "kind", if is_frame { "frame" } else { "table" });
    line(&mut out, "columns", names.join(", "));
    line(&mut out, "rows", t.n_rows());
    if is_frame {
        let f = read_frame(spec, &FrameSource::File(path.to_path_buf()))?;
        describe_field(&mut out, &f, t.n_rows());
    } else {
        out.push('\n');
        describe_table(&mut out, &t);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::write_csv;

    /// The io tests' spec, with positions in mm.
    fn spec(format: Format) -> InputSpec {
        InputSpec {
            length_scale: 1e-3,
            ..crate::io::tests::spec(format)
        }
    }

    #[test]
    fn a_frame_file_reports_grid_counts_and_ranges() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("f.csv");
        // 3 x 2 nodes at 0.5 mm, one NaN, one node without a row.
        std::fs::write(
            &p,
            "x,y,u,v\n0,0,1,-2\n0.5,0,3,4\n1,0,NaN,0\n0,0.5,-1,0.5\n0.5,0.5,2,1\n",
        )
        .unwrap();
        let s = describe(&p, &spec(Format::Csv)).unwrap();
        assert!(s.contains("kind       frame"), "{s}");
        assert!(s.contains("rows       5"), "{s}");
        assert!(s.contains("3 x 2 nodes, pitch 0.5000 x 0.5000 mm"), "{s}");
        assert!(
            s.contains("x 0.0000 .. 1.0000 mm, y 0.0000 .. 0.5000 mm"),
            "{s}"
        );
        assert!(
            s.contains(
                "6 nodes: 4 valid, 1 invalid in the input (empty, NaN or flagged), 1 without a row"
            ),
            "{s}"
        );
        assert!(s.contains("u          -1.000000 .. 3.000000 m/s"), "{s}");
    }

    #[test]
    fn a_parquet_long_table_reports_frames_and_the_first_grid() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("run.parquet");
        let g = crate::field::Grid {
            nx: 5,
            ny: 4,
            x0: 0.0,
            y0: 1e-3,
            dx: 2e-3,
            dy: 1e-3,
        };
        let f = Field::from_fn(g, |x, y| (x * 100.0, -y));
        crate::io::parquet::write_frames_parquet(&p, &[(3, &f), (8, &f), (9, &f)]).unwrap();
        let mut sp = spec(Format::Parquet);
        sp.length_scale = 1.0;
        let s = describe(&p, &sp).unwrap();
        assert!(s.contains("rows       60"), "{s}");
        assert!(s.contains("frames     3 (ids 3 .. 9)"), "{s}");
        assert!(s.contains("5 x 4 nodes, pitch 2.0000 x 1.0000 mm"), "{s}");
        assert!(s.contains("u          0.000000 .. 0.800000 m/s"), "{s}");
    }

    #[test]
    fn an_output_table_reports_each_column() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("ensemble.csv");
        let mut t = Table::new();
        t.push("x", Values::F64(vec![0.0, 1e-3, 2e-3]));
        t.push("y", Values::F64(vec![0.0; 3]));
        t.push("omega_mean", Values::F64(vec![-4.5, f64::NAN, 12.25]));
        write_csv(&p, &t).unwrap();
        let s = describe(&p, &spec(Format::Csv)).unwrap();
        assert!(s.contains("kind       table"), "{s}");
        let row = s.lines().find(|l| l.starts_with("omega_mean")).unwrap();
        assert_eq!(
            row.split_whitespace().collect::<Vec<_>>(),
            ["omega_mean", "-4.500000", "12.250000", "1"]
        );
    }
}
