//! `run` end to end against `synth`'s analytic truth (`<run>/truth/mean.csv`):
//! the reduced means must lie within their own stated uncertainty of the
//! exact values, and the uncertainty must not be wildly larger than the
//! actual error (a test of the error bars in both directions).

use crate::util::*;

/// Fraction of nodes where |got - want| <= k * unc (finite values only),
/// and the median of |got - want| / unc.
fn coverage(got: &[f64], want: &[f64], unc: &[f64], k: f64) -> (f64, f64, usize) {
    let mut z: Vec<f64> = (0..got.len())
        .filter(|&i| got[i].is_finite() && want[i].is_finite() && unc[i] > 0.0)
        .map(|i| (got[i] - want[i]).abs() / unc[i])
        .collect();
    let n = z.len();
    let inside = z.iter().filter(|&&x| x <= k).count() as f64 / n as f64;
    z.sort_by(f64::total_cmp);
    (inside, z[n / 2], n)
}

#[test]
fn the_synth_pipeline_recovers_the_analytic_mean_within_its_uncertainty() {
    let w = Work::new();
    w.ok(&[
        "synth", "vortex", "--out", "c", "--frames", "40", "--seed", "7",
    ]);
    w.ok(&["run", "c/pipeline.toml", "--out", "o", "--quiet"]);
    let run = std::fs::read_dir(w.path("o"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.join("ensemble.csv").is_file())
        .expect("a run folder");
    let id = run.file_name().unwrap().to_str().unwrap().to_string();
    let got = Csv::read(&run.join("ensemble.csv"));
    let truth = Csv::read(&w.path(&format!("c/{id}/truth/mean.csv")));
    // Same nodes in the same order.
    assert_all_close(&got.col("x"), &truth.col("x"), 1e-9, 0.0, "x");
    assert_all_close(&got.col("y"), &truth.col("y"), 1e-9, 0.0, "y");
    for (q, unc) in [
        ("u_mean", "u_mean_unc"),
        ("v_mean", "v_mean_unc"),
        ("omega_mean", "omega_mean_unc"),
    ] {
        let (inside, med, n) = coverage(&got.col(q), &truth.col(q), &got.col(unc), 3.0);
        eprintln!("{q}: {n} nodes, {inside:.3} within 3 u, median |error|/u {med:.2}");
        assert!(n > 100, "{q}: only {n} nodes");
        // Normal errors: 99.7 % within 3 standard uncertainties; allow for
        // the vortex core, where truncation dominates.
        assert!(inside >= 0.95, "{q}: only {inside:.3} of nodes within 3 u");
        // For normal errors the median of |z| is 0.67; error bars ten times
        // too large would give 0.07.
        assert!(
            med > 0.2,
            "{q}: median |error|/u = {med:.2}: uncertainty far too large"
        );
    }
}
