//! Tests of reading and writing, each asserting real values.

use std::fs;
use std::path::Path;

use super::*;
use crate::error::ErrorKind;
use crate::field::{FILLED, VALID};

pub(crate) fn spec(format: Format) -> InputSpec {
    InputSpec {
        format,
        columns: ColumnMap {
            x: "x".into(),
            y: "y".into(),
            u: "u".into(),
            v: "v".into(),
            sigma_u: None,
            sigma_v: None,
            flag: None,
            frame: "frame".into(),
            mask: None,
        },
        length_scale: 1.0,
        velocity_scale: 1.0,
        skip_lines: 0,
        grid_tolerance: 0.05,
        orientation: Default::default(),
        length_unit: None,
        velocity_unit: None,
        units_from_header: None,
    }
}

fn write(dir: &Path, name: &str, text: &str) -> FrameSource {
    let p = dir.join(name);
    fs::write(&p, text).unwrap();
    FrameSource::File(p)
}

/// A 4 x 3 frame in mm with u = x + 10 y, v = -y (so every value is unique).
fn frame_rows() -> Vec<String> {
    let mut rows = Vec::new();
    for j in 0..3 {
        for i in 0..4 {
            let (x, y) = (1.5 * i as f64, 2.0 * j as f64);
            rows.push(format!("{x},{y},{},{}", x + 10.0 * y, -y));
        }
    }
    rows
}

#[test]
fn csv_frame_in_any_row_order_gives_the_same_field() {
    let d = tempfile::tempdir().unwrap();
    let rows = frame_rows();
    let sorted = format!("x,y,u,v\n{}\n", rows.join("\n"));
    let mut shuffled = rows.clone();
    shuffled.reverse();
    shuffled.swap(0, 5);
    shuffled.swap(2, 9);
    let shuffled = format!("x,y,u,v\n{}\n", shuffled.join("\n"));
    let s = spec(Format::Csv);
    let a = read_frame(&s, &write(d.path(), "a.csv", &sorted)).unwrap();
    let b = read_frame(&s, &write(d.path(), "b.csv", &shuffled)).unwrap();
    let g = a.grid;
    assert_eq!(
        (g.nx, g.ny, g.x0, g.y0, g.dx, g.dy),
        (4, 3, 0.0, 0.0, 1.5, 2.0)
    );
    assert_eq!(a.grid, b.grid);
    assert_eq!(a.u, b.u);
    assert_eq!(a.v, b.v);
    // u = x + 10 y at node (i = 3, j = 2): 4.5 + 40.
    assert_eq!(a.u[[2, 3]], 44.5);
    assert_eq!(a.v[[2, 3]], -4.0);
    assert_eq!(a.count(VALID), 12);
}

#[test]
fn units_scale_positions_and_velocities_to_si() {
    let d = tempfile::tempdir().unwrap();
    let src = write(
        d.path(),
        "f.csv",
        &format!("x,y,u,v\n{}\n", frame_rows().join("\n")),
    );
    // px positions with 1e-5 m/px, px displacement over 2e-4 s: 0.05 m/s per px.
    let mut s = spec(Format::Csv);
    s.length_scale = 1e-5;
    s.velocity_scale = 1e-5 / 2e-4;
    let f = read_frame(&s, &src).unwrap();
    assert!((f.grid.dx - 1.5e-5).abs() < 1e-20 && (f.grid.dy - 2e-5).abs() < 1e-20);
    assert!((f.u[[2, 3]] - 44.5 * 0.05).abs() < 1e-15);
    // mm and mm/s.
    s.length_scale = 1e-3;
    s.velocity_scale = 1e-3;
    let f = read_frame(&s, &src).unwrap();
    assert!((f.grid.dx - 1.5e-3).abs() < 1e-18);
    assert!((f.v[[1, 0]] + 2e-3).abs() < 1e-18);
}

#[test]
fn empty_nan_flag_and_missing_rows_are_invalid_vectors() {
    let d = tempfile::tempdir().unwrap();
    let text = "x,y,u,v,flag\n\
                0,0,1,1,0\n\
                1,0,,1,0\n\
                2,0,nan,1,0\n\
                0,1,1,NaN,0\n\
                1,1,1,1,3\n\
                2,1,1,1,\n\
                0,2,1,1,0\n\
                2,2,5,6,0\n";
    let mut s = spec(Format::Csv);
    s.columns.flag = Some("flag".into());
    let f = read_frame(&s, &write(d.path(), "f.csv", text)).unwrap();
    assert_eq!((f.grid.nx, f.grid.ny), (3, 3));
    let st: Vec<u8> = f.status.iter().copied().collect();
    // Row by row (j outer): (1,0) empty u, (2,0) nan, (0,1) NaN, (1,1)
    // flagged, (1,2) has no row; (2,1) has an empty flag, which is no flag.
    assert_eq!(
        st,
        [VALID, FILLED, FILLED, FILLED, FILLED, VALID, VALID, FILLED, VALID]
    );
    assert!(f.u[[0, 1]].is_nan() && f.v[[1, 1]].is_nan() && f.u[[2, 1]].is_nan());
    assert_eq!((f.u[[2, 2]], f.v[[2, 2]]), (5.0, 6.0));
}

#[test]
fn non_numeric_cell_names_file_line_column_and_value() {
    let d = tempfile::tempdir().unwrap();
    let src = write(
        d.path(),
        "f007.csv",
        "x,y,u,v\n0,0,1,1\n1,0,abc,1\n0,1,1,1\n1,1,1,1\n",
    );
    let e = read_frame(&spec(Format::Csv), &src).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Data);
    assert_eq!(e.exit_code(), 1);
    assert_eq!(e.line, Some(3));
    assert_eq!(e.column.as_deref(), Some("u"));
    let msg = e.to_string();
    assert!(
        msg.contains("f007.csv:3 (column 'u')") && msg.contains("'abc'"),
        "{msg}"
    );
    // A bad position is an error too, and `inf` is not a velocity.
    let src = write(d.path(), "g.csv", "x,y,u,v\n0,,1,1\n");
    let e = read_frame(&spec(Format::Csv), &src).unwrap_err();
    assert_eq!((e.line, e.column.as_deref()), (Some(2), Some("y")));
    let src = write(d.path(), "h.csv", "x,y,u,v\n0,0,inf,1\n");
    assert!(read_frame(&spec(Format::Csv), &src)
        .unwrap_err()
        .to_string()
        .contains("'inf'"));
}

#[test]
fn missing_column_lists_the_header() {
    let d = tempfile::tempdir().unwrap();
    let src = write(d.path(), "f.csv", "x,y,vx,vy\n0,0,1,1\n");
    let e = read_frame(&spec(Format::Csv), &src).unwrap_err();
    let msg = e.to_string();
    assert_eq!(e.kind, ErrorKind::Data);
    assert!(msg.contains("f.csv:1 (column 'u')"), "{msg}");
    assert!(
        msg.contains("missing column 'u'; the header has: x, y, vx, vy"),
        "{msg}"
    );
}

#[test]
fn irregular_grid_names_the_value_and_line() {
    let d = tempfile::tempdir().unwrap();
    let mut text = String::from("x,y,u,v\n");
    for y in [0.0, 1.0] {
        for x in [0.0, 1.0, 2.0, 3.4, 4.4] {
            text.push_str(&format!("{x},{y},1,1\n"));
        }
    }
    let e = read_frame(&spec(Format::Csv), &write(d.path(), "f.csv", &text)).unwrap_err();
    let msg = e.to_string();
    assert!(msg.contains("irregular grid: x = 3.4"), "{msg}");
    assert_eq!(e.line, Some(5));
    assert!(e.path.unwrap().ends_with("f.csv"));
}

#[test]
fn duplicate_node_names_both_lines() {
    let d = tempfile::tempdir().unwrap();
    let src = write(
        d.path(),
        "f.csv",
        "x,y,u,v\n0,0,1,1\n1,0,1,1\n0,1,1,1\n1,1,1,1\n0,0,2,2\n",
    );
    let msg = read_frame(&spec(Format::Csv), &src)
        .unwrap_err()
        .to_string();
    assert!(msg.contains("lines 2 and 6"), "{msg}");
}

#[test]
fn two_decimal_mm_coordinates_give_the_exact_grid() {
    // Pitch 1/3 mm on 20 x 15 nodes printed with 2 decimals, descending y.
    let d = tempfile::tempdir().unwrap();
    let mut text = String::from("x,y,u,v\n");
    for j in (0..15).rev() {
        for i in 0..20 {
            let (x, y) = (5.0 + i as f64 / 3.0, -2.0 + j as f64 / 3.0);
            text.push_str(&format!("{x:.2},{y:.2},{i},{j}\n"));
        }
    }
    let mut s = spec(Format::Csv);
    s.length_scale = 1e-3;
    let f = read_frame(&s, &write(d.path(), "f.csv", &text)).unwrap();
    assert_eq!((f.grid.nx, f.grid.ny), (20, 15));
    // Least-squares pitch under rounding errors |e| <= r = 0.005 mm:
    // |dh| <= r sum|i - i_mean| / sum (i - i_mean)^2 < 3 r / n (from the
    // normal equations; common practice).
    let r = 0.005e-3;
    assert!(
        (f.grid.dx - 1e-3 / 3.0).abs() < 3.0 * r / 20.0,
        "dx {}",
        f.grid.dx
    );
    assert!(
        (f.grid.dy - 1e-3 / 3.0).abs() < 3.0 * r / 15.0,
        "dy {}",
        f.grid.dy
    );
    assert!((f.grid.x0 - 5e-3).abs() < 5e-6 && (f.grid.y0 + 2e-3).abs() < 5e-6);
    // Every row landed on its own node: u = i, v = j.
    for j in 0..15 {
        for i in 0..20 {
            assert_eq!((f.u[[j, i]], f.v[[j, i]]), (i as f64, j as f64));
        }
    }
}

#[test]
fn whitespace_text_with_preamble_and_comments() {
    let d = tempfile::tempdir().unwrap();
    let text = "exported 2026-12-01\nscale 1.0\n# x y u v\n\
                x   y\tu  v\n\
                0 0 1 2\n\
                # a comment inside the data\n\
                1   0   3 4\n\n\
                0 1\t5 6\r\n\
                1 1 7 8\n";
    let mut s = spec(Format::Text);
    s.skip_lines = 2;
    let f = read_frame(&s, &write(d.path(), "f.txt", text)).unwrap();
    assert_eq!((f.grid.nx, f.grid.ny), (2, 2));
    assert_eq!(
        f.u.iter().copied().collect::<Vec<_>>(),
        [1.0, 3.0, 5.0, 7.0]
    );
    assert_eq!(
        f.v.iter().copied().collect::<Vec<_>>(),
        [2.0, 4.0, 6.0, 8.0]
    );
    // Lines are physical: the bad cell below is on line 6.
    let bad = "pre\nx y u v\n0 0 1 2\n1 0 3 4\n\n0 1 5 z6\n";
    s.skip_lines = 1;
    let e = read_frame(&s, &write(d.path(), "g.txt", bad)).unwrap_err();
    assert_eq!((e.line, e.column.as_deref()), (Some(6), Some("v")));
}

#[test]
fn tsv_with_sigma_columns_and_read_grid() {
    let d = tempfile::tempdir().unwrap();
    let text = "\"x\"\t\"y\"\tu\tv\tsu\tsv\n0\t0\t1\t1\t0.1\t0.2\n2\t0\t1\t1\t0.1\t\n0\t3\t1\t1\t0.1\t0.2\n2\t3\t1\t1\t0.1\t0.2\n";
    let mut s = spec(Format::Tsv);
    s.columns.sigma_u = Some("su".into());
    s.columns.sigma_v = Some("sv".into());
    s.velocity_scale = 1e-3;
    let src = write(d.path(), "f.tsv", text);
    let f = read_frame(&s, &src).unwrap();
    assert!((f.sigma_u[[0, 0]] - 1e-4).abs() < 1e-18 && (f.sigma_v[[1, 1]] - 2e-4).abs() < 1e-18);
    assert!(f.sigma_v[[0, 1]].is_nan());
    assert_eq!(f.status[[0, 1]], VALID);
    let g = read_grid(&s, &src).unwrap();
    assert_eq!(g, f.grid);
    assert_eq!((g.nx, g.ny, g.dx, g.dy), (2, 2, 2.0, 3.0));
}

#[test]
fn glob_in_natural_order_and_no_match_is_named() {
    let d = tempfile::tempdir().unwrap();
    for n in [10, 2, 1] {
        write(d.path(), &format!("frame_{n}.csv"), "x,y,u,v\n");
    }
    let pat = format!("{}/frame_*.csv", d.path().display());
    let names: Vec<String> = list_frames(&spec(Format::Csv), &pat)
        .unwrap()
        .into_iter()
        .map(|f| f.0)
        .collect();
    assert_eq!(names, ["frame_1", "frame_2", "frame_10"]);
    let pat = format!("{}/nothing_*.csv", d.path().display());
    let e = list_frames(&spec(Format::Csv), &pat).unwrap_err();
    assert_eq!(e.kind, ErrorKind::Data);
    assert!(e.to_string().contains(&pat) && e.to_string().contains("matches no file"));
}

#[test]
fn write_csv_round_trips_floats_exactly() {
    let d = tempfile::tempdir().unwrap();
    let mut rng = crate::testutil::rng(20261202);
    use rand::Rng;
    let mut xs: Vec<f64> = (0..500)
        .map(|_| rng.random::<f64>() * 10f64.powi(rng.random_range(-12..12)))
        .collect();
    xs.extend([
        0.1,
        1.0 / 3.0,
        -2.5e-300,
        1e16,
        123456789012345680.0,
        f64::MIN_POSITIVE,
        -0.0,
        f64::NAN,
    ]);
    let n = xs.len();
    let mut t = Table::new();
    t.push("value", Values::F64(xs.clone()));
    t.push("k", Values::I64((0..n as i64).map(|k| k - 3).collect()));
    t.push(
        "name",
        Values::Str(
            (0..n)
                .map(|k| {
                    if k == 1 {
                        "a,\"b\"".into()
                    } else {
                        format!("n{k}")
                    }
                })
                .collect(),
        ),
    );
    let p = d.path().join("t.csv");
    write_csv(&p, &t).unwrap();
    let back = read_table(&p, Format::Csv, 0).unwrap();
    let Some(Values::F64(v)) = back.get("value") else {
        panic!("value column")
    };
    for (a, b) in v.iter().zip(&xs) {
        assert!(
            a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan()),
            "{a} vs {b}"
        );
    }
    assert_eq!(
        back.get("k"),
        Some(&Values::F64((0..n).map(|k| k as f64 - 3.0).collect()))
    );
    let text = fs::read_to_string(&p).unwrap();
    assert!(text.starts_with("value,k,name\n"));
    assert!(text.contains(",-2,\"a,\"\"b\"\"\"\n"), "quoted string");
    assert!(
        text.ends_with(&format!("\n,{},n{}\n", n - 4, n - 1)),
        "NaN is an empty cell"
    );
}

#[test]
fn write_parquet_types_and_values() {
    let d = tempfile::tempdir().unwrap();
    let mut t = Table::new();
    t.push("x", Values::F64(vec![0.25, f64::NAN, -1e-9]));
    t.push("n", Values::I64(vec![1, 2, 3]));
    t.push("id", Values::Str(vec!["a".into(), "b".into(), "c".into()]));
    let p = d.path().join("t.parquet");
    write_parquet(&p, &t).unwrap();
    // pyarrow (reference library) reads the parquet types and values of
    // this exact file: tests/reference/pyarrow_reads_curlew.py. Set
    // CURLEW_BLESS=1 to rewrite the committed file after a deliberate
    // change of the writer, then rerun the script.
    let written = fs::read(&p).unwrap();
    let committed = crate::testutil::reference_path("curlew_written.parquet");
    if std::env::var_os("CURLEW_BLESS").is_some() {
        fs::write(&committed, &written).unwrap();
    }
    assert!(
        fs::read(&committed).unwrap() == written,
        "write_parquet no longer writes the bytes pyarrow was checked on"
    );
    let r = crate::testutil::reference("pyarrow_reads_curlew");
    assert_eq!(r["names"], serde_json::json!(["x", "n", "id"]));
    assert_eq!(
        r["physical_types"],
        serde_json::json!(["DOUBLE", "INT64", "BYTE_ARRAY"])
    );
    assert_eq!(r["logical_types"][2], "String");
    let c = &r["columns"];
    assert_eq!(c["x"], serde_json::json!([0.25, null, -1e-9]));
    assert_eq!(c["n"], serde_json::json!([1, 2, 3]));
    assert_eq!(c["id"], serde_json::json!(["a", "b", "c"]));
}

#[test]
fn hash_file_matches_sha256_of_abc() {
    // FIPS 180-2, appendix B.1: SHA-256("abc").
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("abc");
    fs::write(&p, "abc").unwrap();
    assert_eq!(
        hash_file(&p).unwrap(),
        (
            3,
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad".to_string()
        )
    );
    assert_eq!(
        hash_file(&d.path().join("none")).unwrap_err().kind,
        ErrorKind::Io
    );
}

#[test]
fn output_dir_replaces_only_on_commit() {
    let d = tempfile::tempdir().unwrap();
    let fin = d.path().join("out").join("campaign");
    // A first good output.
    let o = OutputDir::begin(&fin).unwrap();
    fs::write(o.path().join("a.csv"), "old").unwrap();
    fs::write(o.path().join("manifest.json"), "{}").unwrap();
    o.commit().unwrap();
    assert_eq!(fs::read_to_string(fin.join("a.csv")).unwrap(), "old");
    // A failed run: dropped without commit, the old folder is untouched.
    {
        let o = OutputDir::begin(&fin).unwrap();
        fs::write(o.path().join("a.csv"), "half").unwrap();
        assert!(o.path().exists() && o.path() != fin);
    }
    assert_eq!(fs::read_to_string(fin.join("a.csv")).unwrap(), "old");
    // A successful one replaces it entirely.
    let o = OutputDir::begin(&fin).unwrap();
    fs::write(o.path().join("b.csv"), "new").unwrap();
    o.commit().unwrap();
    assert!(!fin.join("a.csv").exists());
    assert_eq!(fs::read_to_string(fin.join("b.csv")).unwrap(), "new");
    // Nothing else is left beside it.
    let names: Vec<_> = fs::read_dir(d.path().join("out"))
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(names, ["campaign"]);
    // A folder that is not a curlew output is never replaced.
    fs::remove_file(fin.join("manifest.json")).ok();
    let e = OutputDir::begin(&fin).err().expect("refused");
    assert!(e.to_string().contains("not a curlew output"), "{e}");
    // Nor one that holds an input.
    let input = fin.join("b.csv");
    let e = OutputDir::begin_over(&d.path().join("out"), &[input])
        .err()
        .expect("refused");
    assert!(e.to_string().contains("holds the input"), "{e}");
}

#[test]
fn write_failures_say_cannot_write() {
    let e = super::write::write_error(
        std::path::Path::new("out/a.csv"),
        std::io::Error::from_raw_os_error(28),
    );
    assert_eq!(e.exit_code(), 1);
    assert!(
        e.to_string()
            .starts_with("out/a.csv: cannot write: no space left on device"),
        "{e}"
    );
}
