use super::*;

fn fixture(name: &str) -> Vec<u8> {
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(name);
    std::fs::read(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

/// Files written by scipy.io.netcdf_file (classic with a record dimension,
/// and 64-bit offset) decode to the values scipy reads back
/// (tests/reference/netcdf3_fixture.py and .json), bit for bit.
#[test]
fn files_written_by_scipy_decode_to_scipys_values() {
    let refs: serde_json::Value = serde_json::from_slice(&fixture("netcdf3_fixture.json")).unwrap();
    let ds = Dataset::from_bytes(&fixture("netcdf3_fixture_v1.nc")).unwrap();
    assert_eq!(ds.dims[ds.unlimited.unwrap()], ("time".to_string(), 2));
    match ds.attrs.iter().find(|(n, _)| n == "title") {
        Some((_, Attr::Text(t))) => assert_eq!(t, refs["title"].as_str().unwrap()),
        other => panic!("title: {other:?}"),
    }
    for name in ["x", "u", "v", "s", "f", "b"] {
        let want: Vec<f64> = refs["values"][name]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap().parse().unwrap())
            .collect();
        let v = ds.var(name).unwrap();
        assert_eq!(v.data.to_f64(), want, "variable {name}");
    }
    let u = ds.var("u").unwrap();
    assert_eq!(ds.shape(u), vec![2, 3, 4]);
    assert_eq!(u.text("units"), Some("m/s"));
    let ds2 = Dataset::from_bytes(&fixture("netcdf3_fixture_v2.nc")).unwrap();
    let want: Vec<f64> = refs["v2_u"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap().parse().unwrap())
        .collect();
    assert_eq!(ds2.var("u").unwrap().data.to_f64(), want);
}

#[test]
fn what_we_write_reads_back() {
    let ds = Dataset {
        dims: vec![("y".into(), 2), ("x".into(), 3)],
        unlimited: None,
        attrs: vec![
            ("Conventions".into(), Attr::Text("CF-1.8".into())),
            ("scale".into(), Attr::Num(vec![0.5, f64::NAN])),
        ],
        vars: vec![
            Var {
                name: "x".into(),
                dims: vec![1],
                attrs: vec![("units".into(), Attr::Text("m".into()))],
                data: Data::F64(vec![0.0, 1e-3, 2e-3]),
            },
            Var {
                name: "n".into(),
                dims: vec![0, 1],
                attrs: vec![],
                data: Data::I32(vec![1, -2, 3, 4, 5, 6]),
            },
            Var {
                name: "u".into(),
                dims: vec![0, 1],
                attrs: vec![("_FillValue".into(), Attr::Num(vec![f64::NAN]))],
                data: Data::F64(vec![0.1, f64::NAN, -0.3, 4.0, 5.5, 1e300]),
            },
        ],
    };
    let bytes = ds.to_bytes();
    assert_eq!(&bytes[..4], b"CDF\x02");
    let back = Dataset::from_bytes(&bytes).unwrap();
    assert_eq!(back.dims, ds.dims);
    assert_eq!(
        back.var("n").unwrap().data.to_f64(),
        vec![1.0, -2.0, 3.0, 4.0, 5.0, 6.0]
    );
    let u = back.var("u").unwrap().data.to_f64();
    assert_eq!(u[0], 0.1);
    assert!(u[1].is_nan());
    assert_eq!(u[5], 1e300);
    assert_eq!(back.var("x").unwrap().text("units"), Some("m"));
}

#[test]
fn other_files_are_named_errors() {
    let e = Dataset::from_bytes(b"x,y,u,v\n1,2,3,4\n").unwrap_err();
    assert!(e.contains("not a NetCDF-3 file"), "{e}");
    let e = Dataset::from_bytes(b"\x89HDF\r\n\x1a\n........").unwrap_err();
    assert!(e.contains("HDF5"), "{e}");
    let mut b = fixture("netcdf3_fixture_v1.nc");
    b.truncate(200);
    assert!(Dataset::from_bytes(&b).is_err());
}
