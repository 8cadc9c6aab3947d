//! Tests of the parquet long tables and of frame tables (moved out of
//! tests.rs to keep it under 600 lines), each asserting real values.

use std::fs;

use super::parquet::write_frames_parquet;
use super::tests::*;
use super::*;
use crate::field::{FILLED, VALID};

#[test]
fn parquet_long_table_round_trip_frame_by_frame() {
    let d = tempfile::tempdir().unwrap();
    let grid = Grid {
        nx: 7,
        ny: 5,
        x0: -3e-3,
        y0: 1e-3,
        dx: 0.5e-3,
        dy: 0.75e-3,
    };
    let mut frames = Vec::new();
    for k in 0..3 {
        let mut f = Field::from_fn(grid, |x, y| {
            (x * 1e3 + k as f64 / 3.0, y * y + 0.1 * k as f64)
        });
        f.sigma_u.fill(0.01 * (k + 1) as f64);
        f.sigma_v.fill(0.02);
        if k == 1 {
            f.u[[2, 3]] = f64::NAN;
            f.v[[2, 3]] = f64::NAN;
            f.status[[2, 3]] = FILLED;
            f.status[[4, 6]] = crate::field::MASKED; // no row: a missing node
        }
        frames.push(f);
    }
    let path = d.path().join("run.parquet");
    let ids = [4i64, 9, 17];
    let pairs: Vec<(i64, &Field)> = ids.iter().copied().zip(frames.iter()).collect();
    write_frames_parquet(&path, &pairs).unwrap();
    // One row group per frame.
    use polars::prelude::SerReader;
    let mut r = polars::prelude::ParquetReader::new(fs::File::open(&path).unwrap());
    assert_eq!(r.get_metadata().unwrap().row_groups.len(), 3);
    let mut s = spec(Format::Parquet);
    s.columns.sigma_u = Some("sigma_u".into());
    s.columns.sigma_v = Some("sigma_v".into());
    let list = list_frames(&s, path.to_str().unwrap()).unwrap();
    assert_eq!(
        list.iter().map(|f| f.0.as_str()).collect::<Vec<_>>(),
        ["4", "9", "17"]
    );
    // Read in reverse order from several threads at once.
    use rayon::prelude::*;
    let got: Vec<Field> = list
        .par_iter()
        .rev()
        .map(|(_, src)| read_frame(&s, src).unwrap())
        .collect();
    for (k, g) in got.iter().rev().enumerate() {
        let want = &frames[k];
        assert_eq!(g.grid.nx, 7);
        assert!(g.grid.difference(&grid, 1e-12).is_none());
        for j in 0..5 {
            for i in 0..7 {
                let (a, b) = (g.u[[j, i]], want.u[[j, i]]);
                if want.status[[j, i]] == VALID {
                    assert_eq!((a, g.v[[j, i]]), (b, want.v[[j, i]]));
                    assert_eq!(g.sigma_u[[j, i]], want.sigma_u[[j, i]]);
                    assert_eq!(g.status[[j, i]], VALID);
                } else {
                    assert!(a.is_nan());
                    assert_eq!(g.status[[j, i]], FILLED);
                }
            }
        }
    }
    assert_eq!(read_grid(&s, &list[0].1).unwrap().ny, 5);
    let e = read_frame(
        &s,
        &FrameSource::Parquet {
            path: path.clone(),
            frame: 5,
        },
    )
    .unwrap_err();
    assert!(e.to_string().contains("frame 5 is not in the table"));
}

#[test]
fn parquet_from_pyarrow_with_a_single_row_group() {
    // A long table written by pyarrow (the reference parquet library), rows
    // shuffled within frames and frames interleaved in two blocks; the files
    // and what pyarrow reads back are committed (tests/reference/pyarrow_long_table.py).
    let r = crate::testutil::reference("pyarrow_long_table");
    let path = crate::testutil::reference_path("pyarrow_long_table.parquet");
    let p5 = crate::testutil::reference_path("pyarrow_long_table_rg5.parquet");
    let files = &r["files"];
    assert_eq!(files["pyarrow_long_table.parquet"]["row_groups"], 1);
    assert_eq!(files["pyarrow_long_table_rg5.parquet"]["row_groups"], 5);
    let mut s = spec(Format::Parquet);
    s.columns = ColumnMap {
        x: "X".into(),
        y: "Y".into(),
        u: "U".into(),
        v: "V".into(),
        frame: "id".into(),
        ..s.columns
    };
    s.length_scale = 1e-3;
    let list = list_frames(&s, path.to_str().unwrap()).unwrap();
    assert_eq!(
        list.iter().map(|f| f.0.as_str()).collect::<Vec<_>>(),
        ["1", "2"]
    );
    let f = read_frame(&s, &list[1].1).unwrap();
    assert_eq!((f.grid.nx, f.grid.ny), (4, 3));
    assert_eq!(f.u[[2, 3]], 200.0 + 3.0 + 20.0);
    assert_eq!(f.v[[1, 0]], -210.0);
    // Every value pyarrow reads is where curlew puts it (x, y in mm; the
    // frame's grid starts at 0).
    let cols = &files["pyarrow_long_table.parquet"]["columns"];
    for ((frame, src), k) in list.iter().zip(1..) {
        let f = read_frame(&s, src).unwrap();
        let mut n = 0;
        for row in 0..24 {
            if cols["id"][row] != k {
                continue;
            }
            let (x, y) = (
                cols["X"][row].as_f64().unwrap(),
                cols["Y"][row].as_f64().unwrap(),
            );
            let (i, j) = (x as usize, y as usize);
            assert_eq!(
                f.u[[j, i]],
                cols["U"][row].as_f64().unwrap(),
                "frame {frame}"
            );
            assert_eq!(
                f.v[[j, i]],
                cols["V"][row].as_f64().unwrap(),
                "frame {frame}"
            );
            n += 1;
        }
        assert_eq!(n, 12);
    }
    // The same table in row groups of 5 rows: frames span row groups.
    let list5 = list_frames(&s, p5.to_str().unwrap()).unwrap();
    for ((_, a), (_, b)) in list.iter().zip(&list5) {
        let (fa, fb) = (read_frame(&s, a).unwrap(), read_frame(&s, b).unwrap());
        assert_eq!((fa.grid, &fa.u, &fa.v), (fb.grid, &fb.u, &fb.v));
    }
}

#[test]
fn frame_table_reads_and_rejects() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("frames.csv");
    fs::write(&p, "frame,time_s,phase_deg\nf_1,0.0,-30\nf_2,0.01,400.5\n").unwrap();
    let t = read_frame_table(&p).unwrap();
    assert_eq!(t.lookup("f_2"), Some((Some(0.01), Some(400.5))));
    fs::write(&p, "frame,phase_deg\n1,10\n2,x20\n").unwrap();
    let e = read_frame_table(&p).unwrap_err();
    assert_eq!((e.line, e.column.as_deref()), (Some(3), Some("phase_deg")));
    assert!(e.to_string().contains("'x20'"));
    fs::write(&p, "frame,time_s\n1,0\n2,1\n1,2\n").unwrap();
    assert!(read_frame_table(&p)
        .unwrap_err()
        .to_string()
        .contains("lines 2 and 4"));
    fs::write(&p, "frame,t\n1,0\n").unwrap();
    assert!(read_frame_table(&p)
        .unwrap_err()
        .to_string()
        .contains("'time_s' or a 'phase_deg'"));
    fs::write(&p, "frame,time_s\n3,0.5\n").unwrap();
    assert_eq!(
        read_frame_table(&p).unwrap().lookup("3"),
        Some((Some(0.5), None))
    );
    assert_eq!(read_frame_table(&p).unwrap().frequency, None);
}

#[test]
fn frame_table_frequency_column_is_averaged_and_checked() {
    let d = tempfile::tempdir().unwrap();
    let p = d.path().join("frames.csv");
    fs::write(&p, "frame,phase_deg,frequency_hz\n1,0,2.0\n2,90,2.2\n").unwrap();
    let f = read_frame_table(&p).unwrap().frequency.unwrap();
    assert_eq!((f.column, f.rows), ("frequency_hz", 2));
    assert!((f.hz - 2.1).abs() < 1e-12 && (f.spread - 0.1 / 2.1).abs() < 1e-12);
    fs::write(&p, "frame,phase_deg,period_s\n1,0,0.25\n2,90,0.25\n").unwrap();
    let f = read_frame_table(&p).unwrap().frequency.unwrap();
    assert_eq!((f.column, f.hz, f.spread), ("period_s", 4.0, 0.0));
    fs::write(&p, "frame,phase_deg,period_s\n1,0,0.25\n2,90,-1\n").unwrap();
    let e = read_frame_table(&p).unwrap_err();
    assert_eq!((e.line, e.column.as_deref()), (Some(3), Some("period_s")));
    assert!(e.to_string().contains("-1 must be a positive"), "{e}");
    fs::write(&p, "frame,phase_deg,period_s,frequency_hz\n1,0,1,1\n").unwrap();
    assert!(read_frame_table(&p)
        .unwrap_err()
        .to_string()
        .contains("not both"));
}
