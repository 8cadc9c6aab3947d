//! The CF NetCDF outputs (`ensemble.nc`, `phase.nc`): present after `run`,
//! holding the parquet/CSV tables' values on (y, x) and (phase, y, x), and
//! read by `curlew inspect`. (xarray opens them in .ci/run:
//! tests/python/after_curlew.py.)

use crate::util::{Csv, Work};
use curlew::io::netcdf::Dataset;

#[test]
fn ensemble_and_phase_netcdf_hold_the_tables_values() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "c", "--frames", "24", "--speeds", "0.2", "--seed", "4",
    ]);
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let ds = Dataset::from_bytes(&std::fs::read(w.path("o/u020/ensemble.nc")).unwrap()).unwrap();
    let csv = Csv::read(&w.path("o/u020/ensemble.csv"));
    let (nx, ny) = (
        ds.dims[ds.dim_index("x").unwrap()].1,
        ds.dims[ds.dim_index("y").unwrap()].1,
    );
    assert_eq!(nx * ny, csv.rows.len());
    let om = ds.var("omega_mean").unwrap();
    assert_eq!(om.text("units"), Some("s-1"));
    assert_eq!(
        om.text("ancillary_variables"),
        Some("omega_mean_unc omega_inst_unc")
    );
    assert_eq!(ds.var("u_mean").unwrap().text("units"), Some("m s-1"));
    for name in csv.header.iter().filter(|n| *n != "x" && *n != "y") {
        let nc = ds
            .var(name)
            .unwrap_or_else(|| panic!("no variable {name}"))
            .data
            .to_f64();
        let col = csv.col(name);
        for (k, (a, b)) in nc.iter().zip(&col).enumerate() {
            // the CSV prints 17 significant digits at most: equal values
            let ok = (a.is_nan() && b.is_nan()) || (a - b).abs() <= 1e-15 * b.abs().max(1e-300);
            assert!(ok, "{name}[{k}]: {a} vs {b}");
        }
    }
    let xs = ds.var("x").unwrap().data.to_f64();
    assert_eq!(xs[1], csv.col("x")[1]);
    let text = std::fs::read_to_string(w.path("c/pipeline.toml")).unwrap();
    assert!(ds
        .attrs
        .iter()
        .any(|(n, a)| n == "pipeline" && *a == curlew::io::netcdf::Attr::Text(text.clone())));

    let ph = Dataset::from_bytes(&std::fs::read(w.path("o/u020/phase.nc")).unwrap()).unwrap();
    let bins = ph.dims[ph.dim_index("phase").unwrap()].1;
    let pcsv = Csv::read(&w.path("o/u020/phase.csv"));
    assert_eq!(bins * nx * ny, pcsv.rows.len());
    let a = ph.var("u_mean").unwrap().data.to_f64();
    let b = pcsv.col("u_mean");
    assert!(a
        .iter()
        .zip(&b)
        .all(|(x, y)| (x.is_nan() && y.is_nan()) || (x - y).abs() <= 1e-15 * y.abs()));

    let out = w.ok(&["inspect", "o/u020/ensemble.nc"]);
    assert!(
        out.contains("dimensions y = ") && out.contains("variable   omega_mean(y, x) [s-1]"),
        "{out}"
    );
}
