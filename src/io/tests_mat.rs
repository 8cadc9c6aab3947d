//! MATLAB MAT frames written by scipy.io.savemat (tests/reference/mat_frame.py,
//! scipy 1.17.1): an uncompressed 2-D file (MATLAB's (ny, nx), x a row and
//! y a column vector) and a compressed file of shuffled long vectors in
//! single precision with an int16 flag read to the very field the CSV of
//! the same values gives, bit for bit; wrong names, shapes and files are
//! errors naming the file and the variable.

use super::tests::spec;
use super::*;

fn reference(name: &str) -> FrameSource {
    FrameSource::File(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/reference")
            .join(name),
    )
}

fn mat_spec(format: Format, u: &str, v: &str) -> InputSpec {
    let mut s = spec(format);
    s.columns.x = "xs".into();
    s.columns.y = "ys".into();
    s.columns.u = u.into();
    s.columns.v = v.into();
    s.length_scale = 1e-3;
    s
}

fn assert_same_bits(f: &Field, csv: &Field, what: &str) {
    assert_eq!(f.grid, csv.grid, "{what}");
    assert_eq!(f.status, csv.status, "{what}");
    for (a, b) in [(&f.u, &csv.u), (&f.v, &csv.v)] {
        for (p, q) in a.iter().zip(b.iter()) {
            assert!(p.to_bits() == q.to_bits(), "{what}: {p} vs {q}");
        }
    }
}

#[test]
fn mat_v5_and_compressed_v7_frames_equal_the_csv_frame_bit_for_bit() {
    let csv = read_frame(
        &mat_spec(Format::Csv, "U", "V"),
        &reference("mat_frame.csv"),
    )
    .unwrap();
    assert_eq!((csv.grid.nx, csv.grid.ny), (6, 4));
    assert_eq!(csv.count(crate::field::FILLED), 1);
    let v5 = read_frame(
        &mat_spec(Format::Mat, "U", "V"),
        &reference("mat_frame_v5.mat"),
    )
    .unwrap();
    assert_same_bits(&v5, &csv, "v5");

    // compressed, single precision, flagged: against the widened values
    let mut c32 = mat_spec(Format::Csv, "U32", "V32");
    c32.columns.flag = Some("bad".into());
    let csv32 = read_frame(&c32, &reference("mat_frame.csv")).unwrap();
    assert_eq!(csv32.count(crate::field::FILLED), 2, "NaN and flagged");
    let mut m7 = mat_spec(Format::Mat, "U", "V");
    m7.columns.flag = Some("bad".into());
    let v7 = read_frame(&m7, &reference("mat_frame_v7.mat")).unwrap();
    assert_same_bits(&v7, &csv32, "v7");
}

#[test]
fn mat_wrong_variables_shapes_and_files_are_named() {
    let e = read_frame(
        &mat_spec(Format::Mat, "W", "V"),
        &reference("mat_frame_v7.mat"),
    )
    .unwrap_err();
    let all = e.to_string();
    assert!(
        e.message.contains("no variable 'W'") && e.message.contains("xs, ys, U, V, bad"),
        "{e}"
    );
    assert!(all.contains("mat_frame_v7.mat"), "{all}");
    // u a (4, 6) array with x a column of 4: the shape error names u
    let mut s = mat_spec(Format::Mat, "U", "V");
    s.columns.x = "ys".into();
    let e = read_frame(&s, &reference("mat_frame_v5.mat")).unwrap_err();
    assert!(
        e.message.contains("'U' has shape [4, 6]") && e.to_string().contains("mat_frame_v5.mat"),
        "{e}"
    );
    // u and v of different shapes (a 2-D array and a vector)
    let e = read_frame(
        &mat_spec(Format::Mat, "U", "xs"),
        &reference("mat_frame_v5.mat"),
    )
    .unwrap_err();
    assert!(e.message.contains("'xs' has shape [6]"), "{e}");
    // a CSV and a NetCDF file named as MAT
    for other in ["mat_frame.csv", "netcdf3_frame_grid.nc"] {
        let e = read_frame(&mat_spec(Format::Mat, "U", "V"), &reference(other)).unwrap_err();
        assert!(
            e.message.contains("not a MAT file of version 5 or 7") && e.to_string().contains(other),
            "{e}"
        );
    }
    // a MAT file read as NetCDF says so
    let mut nc = mat_spec(Format::NetCdf, "U", "V");
    nc.columns.x = "xs".into();
    let e = read_frame(&nc, &reference("mat_frame_v5.mat")).unwrap_err();
    assert!(e.message.contains("not a NetCDF-3 file"), "{e}");
}
