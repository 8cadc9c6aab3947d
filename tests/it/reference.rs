//! curlew against an independent implementation: the NumPy/pandas
//! reduction of the benchmark (bench/numpy_reduce.py: median test,
//! neighbour-mean fill, least-squares vorticity, ensemble statistics,
//! written with whole-array numpy operations) on a `curlew synth` wake.
//! Both must take the same validation decisions and give the same ensemble.

use crate::util::*;

#[test]
fn the_numpy_reduction_gives_the_same_ensemble() {
    let w = Work::new();
    w.ok(&[
        "synth", "wake", "--out", "c", "--frames", "12", "--speeds", "0.2", "--seed", "5",
    ]);
    let root = env!("CARGO_MANIFEST_DIR");
    let py = |args: &[&str]| {
        let o = std::process::Command::new("python3")
            .args(args)
            .current_dir(w.dir.path())
            .output()
            .unwrap();
        assert!(
            o.status.success(),
            "python3 {args:?}: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        String::from_utf8_lossy(&o.stdout).into_owned()
    };
    let bench = py(&[
        &format!("{root}/bench/bench_pipeline.py"),
        "c/pipeline.toml",
    ]);
    w.write("c/bench.toml", &bench);
    w.ok(&["run", "c/bench.toml", "--out", "o", "--quiet"]);
    py(&[
        &format!("{root}/bench/numpy_reduce.py"),
        "c/bench.toml",
        "np.csv",
    ]);
    let a = Csv::read(&w.path("o/u020/ensemble.csv"));
    let b = Csv::read(&w.path("np.csv"));
    assert_eq!(a.rows.len(), b.rows.len());
    for name in &b.header {
        let (ca, cb) = (a.col(name), b.col(name));
        let scale = cb
            .iter()
            .filter(|v| v.is_finite())
            .fold(0.0f64, |m, v| m.max(v.abs()));
        assert_all_close(&ca, &cb, 1e-9 * scale, 0.0, name);
    }
}
