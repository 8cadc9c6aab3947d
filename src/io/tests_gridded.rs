//! NetCDF-3 frames written by scipy (tests/reference/netcdf3_frame.py):
//! gridded x-first arrays and shuffled long vectors read to the very field
//! the CSV of the same values gives, bit for bit.

use super::tests::spec;
use super::*;

fn reference(name: &str) -> FrameSource {
    FrameSource::File(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/reference")
            .join(name),
    )
}

fn netcdf_spec(format: Format) -> InputSpec {
    let mut s = spec(format);
    s.columns.x = "xc".into();
    s.columns.y = "yc".into();
    s.columns.u = "U".into();
    s.columns.v = "V".into();
    s.length_scale = 1e-3;
    s
}

#[test]
fn netcdf_frames_equal_the_csv_frame_bit_for_bit() {
    let csv = read_frame(&netcdf_spec(Format::Csv), &reference("netcdf3_frame.csv")).unwrap();
    assert_eq!((csv.grid.nx, csv.grid.ny), (5, 4));
    for file in ["netcdf3_frame_grid.nc", "netcdf3_frame_long.nc"] {
        let f = read_frame(&netcdf_spec(Format::NetCdf), &reference(file)).unwrap();
        assert_eq!(f.grid, csv.grid, "{file}");
        assert_eq!(f.status, csv.status, "{file}");
        for (a, b) in [(&f.u, &csv.u), (&f.v, &csv.v)] {
            for (p, q) in a.iter().zip(b.iter()) {
                assert!(p.to_bits() == q.to_bits(), "{file}: {p} vs {q}");
            }
        }
    }
    assert_eq!(csv.count(crate::field::FILLED), 1);
}

#[test]
fn wrong_variables_shapes_and_files_are_named() {
    let mut s = netcdf_spec(Format::NetCdf);
    s.columns.u = "W".into();
    let e = read_frame(&s, &reference("netcdf3_frame_grid.nc")).unwrap_err();
    assert!(
        e.message.contains("no variable 'W'") && e.message.contains("U, V"),
        "{e}"
    );
    assert!(e.to_string().contains("netcdf3_frame_grid.nc"), "{e}");
    let mut s = netcdf_spec(Format::NetCdf);
    s.columns.x = "yc".into(); // 1-D of the wrong length for the first dimension
    s.columns.y = "yc".into();
    let e = read_frame(&s, &reference("netcdf3_frame_grid.nc")).unwrap_err();
    assert!(e.message.contains("shape"), "{e}");
    // a CSV named as NetCDF
    let e = read_frame(
        &netcdf_spec(Format::NetCdf),
        &reference("netcdf3_frame.csv"),
    )
    .unwrap_err();
    assert!(
        e.message.contains("not a NetCDF-3 file") && e.to_string().contains("netcdf3_frame.csv"),
        "{e}"
    );
}
