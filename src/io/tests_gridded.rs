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

fn nc_spec() -> InputSpec {
    let mut s = spec(Format::NetCdf);
    s.length_scale = 1e-3;
    s
}

fn glob_of(rel: &str) -> String {
    format!("{}/tests/reference/{rel}", env!("CARGO_MANIFEST_DIR"))
}

/// Files of many frames (tests/reference/netcdf3_time.py, scipy 1.17.1): a
/// record dimension over 2-D arrays and a fixed time dimension over
/// shuffled long vectors split into frames named `<stem>_t<k>`, each equal
/// bit for bit to the same frame written alone.
#[test]
fn netcdf_time_dimensions_are_frames_equal_to_the_single_files() {
    let s = nc_spec();
    let single = list_frames(&s, &glob_of("nc_time/frames/run_t*.nc")).unwrap();
    assert_eq!(single.len(), 4);
    for file in ["run", "long"] {
        let many = list_frames(&s, &glob_of(&format!("nc_time/{file}.nc"))).unwrap();
        let names: Vec<&str> = many.iter().map(|m| m.0.as_str()).collect();
        let want: Vec<String> = (0..4).map(|k| format!("{file}_t{k}")).collect();
        assert_eq!(names, want);
        for ((_, a), (_, b)) in many.iter().zip(&single) {
            assert!(matches!(a, FrameSource::Indexed { .. }), "{a:?}");
            let (fa, fb) = (read_frame(&s, a).unwrap(), read_frame(&s, b).unwrap());
            assert_eq!(fa.grid, fb.grid);
            assert_eq!(fa.status, fb.status);
            assert_eq!(fa.count(crate::field::FILLED), 1);
            for (p, q) in
                fa.u.iter()
                    .chain(fa.v.iter())
                    .zip(fb.u.iter().chain(fb.v.iter()))
            {
                assert!(p.to_bits() == q.to_bits(), "{file}: {p} vs {q}");
            }
        }
    }
    let path = Path::new(&glob_of("nc_time/run.nc")).to_path_buf();
    let e = read_frame(&s, &FrameSource::Indexed { path, index: 4 }).unwrap_err();
    assert!(
        e.message
            .contains("time index 4 is past the file's 4 frames")
            && e.to_string().contains("run.nc"),
        "{e}"
    );
    assert_eq!(nctime::frame_names("a", 11)[3], "a_t03");
    assert_eq!(nctime::frame_names("a", 1), vec!["a".to_string()]);
}
