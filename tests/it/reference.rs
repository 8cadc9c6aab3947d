//! curlew against an independent implementation: the NumPy/pandas
//! reduction of the benchmark (bench/numpy_reduce.py: median test,
//! neighbour-mean fill, least-squares vorticity, ensemble statistics,
//! written with whole-array numpy operations) on a `curlew synth` wake.
//! Both must take the same validation decisions and give the same ensemble.
//! The NumPy result is committed: tests/reference/numpy_reduction.{py,json}.

use crate::util::*;

/// The committed reference values of `topic` (tests/reference/<topic>.json).
pub fn reference(topic: &str) -> serde_json::Value {
    let p = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/reference")
        .join(format!("{topic}.json"));
    let text = std::fs::read_to_string(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

#[test]
fn the_numpy_reduction_gives_the_same_ensemble() {
    let r = reference("numpy_reduction");
    let synth: Vec<&str> = r["synth"]
        .as_array()
        .unwrap()
        .iter()
        .map(|a| a.as_str().unwrap())
        .collect();
    let w = Work::new();
    w.ok(&synth);
    w.write("c/bench.toml", r["bench_toml"].as_str().unwrap());
    w.ok(&["run", "c/bench.toml", "--out", "o", "--quiet"]);
    let a = Csv::read(&w.path("o/u020/ensemble.csv"));
    let cols = r["columns"].as_object().unwrap();
    assert_eq!(cols.len(), 10);
    for (name, col) in cols {
        let cb: Vec<f64> = col
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap_or(f64::NAN))
            .collect();
        let ca = a.col(name);
        assert_eq!(ca.len(), cb.len(), "{name}: rows");
        let scale = cb
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |m, v| m.max(v.abs()));
        assert!(scale > 0.0 || name == "n_valid", "{name}: all zero");
        assert_all_close(&ca, &cb, 1e-9 * scale, 0.0, name);
    }
}
