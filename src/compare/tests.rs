use super::*;
use crate::plan::report::resolve_compare;
use crate::plot::fixtures::{grid, run, VORTEX};
use rand_distr::{Distribution, Normal};

fn plan(ids: &[&str]) -> ComparePlan {
    let ids: Vec<String> = ids.iter().map(|s| s.to_string()).collect();
    resolve_compare(&[], &ids).unwrap().remove(0)
}

/// Adds `delta` to omega_mean inside the box x in [20, 40) mm, y in [-10, 10) mm.
fn impose(r: &mut RunResult, delta: f64) -> Vec<bool> {
    let g = r.stats.ensemble.grid;
    let mut inside = vec![false; g.len()];
    let col = &mut r
        .stats
        .ensemble
        .columns
        .iter_mut()
        .find(|(n, _)| n == "omega_mean")
        .unwrap()
        .1;
    for k in 0..g.len() {
        let (x, y) = (g.x(k % g.nx), g.y(k / g.nx));
        if (0.020..0.040).contains(&x) && (-0.010..0.010).contains(&y) {
            col[k] += delta;
            inside[k] = true;
        }
    }
    inside
}

#[test]
fn imposed_difference_is_significant_exactly_where_imposed() {
    let dir = tempfile::tempdir().unwrap();
    let a = run("a", &VORTEX, grid(64, 48));
    let mut b = run("b", &VORTEX, grid(64, 48));
    // u(ω̄) = 2 1/s in both runs: k·sqrt(u1² + u2²) = 2·2√2 = 5.66 1/s.
    let inside = impose(&mut b, 8.0);
    let res = run_comparisons(&[plan(&["a", "b"])], &[a.clone(), b.clone()], dir.path()).unwrap();
    if let Ok(keep) = std::env::var("CURLEW_FIGURE_PREVIEW") {
        run_comparisons(&[plan(&["a", "b"])], &[a, b], Path::new(&keep)).unwrap();
    }
    let c = &res[0];
    assert_eq!(c.n_compared, 64 * 48);
    assert_eq!(c.n_significant, inside.iter().filter(|s| **s).count());
    // Check node by node from the written table.
    let text = std::fs::read_to_string(dir.path().join("compare/a-vs-b/difference.csv")).unwrap();
    let mut rows = 0;
    for (k, line) in text.lines().skip(1).enumerate() {
        let sig = line.rsplit(',').next().unwrap() == "1";
        assert_eq!(sig, inside[k], "node {k}: {line}");
        rows += 1;
    }
    assert_eq!(rows, 64 * 48);
    for f in &c.figures {
        assert!(dir.path().join(&f.png).is_file() && dir.path().join(&f.svg).is_file());
    }
    assert!(c.tables.iter().all(|t| dir.path().join(t).is_file()));
}

#[test]
fn with_measurement_noise_the_rates_match_the_normal_distribution() {
    // Both fields get independent N(0, u) noise, u = 2 1/s; an imposed
    // Δ = 20 1/s in the box. Outside it the false-positive rate is
    // P(|N(0, √2 u)| > 2·√2 u) = 4.55 % (normal table, k = 2); inside the
    // detection rate is P(|20 + N(0, 2.83)| > 5.66) ≈ 100 %.
    let dir = tempfile::tempdir().unwrap();
    let mut a = run("a", &VORTEX, grid(64, 48));
    let mut b = run("b", &VORTEX, grid(64, 48));
    let inside = impose(&mut b, 20.0);
    let mut rng = crate::testutil::rng(606);
    let noise = Normal::new(0.0, 2.0).unwrap();
    for r in [&mut a, &mut b] {
        let col = &mut r
            .stats
            .ensemble
            .columns
            .iter_mut()
            .find(|(n, _)| n == "omega_mean")
            .unwrap()
            .1;
        for v in col.iter_mut() {
            *v += noise.sample(&mut rng);
        }
    }
    let res = run_comparisons(&[plan(&["a", "b"])], &[a, b], dir.path()).unwrap();
    let text = std::fs::read_to_string(dir.path().join("compare/a-vs-b/difference.csv")).unwrap();
    let (mut fp, mut out_n, mut tp, mut in_n) = (0, 0, 0, 0);
    for (k, line) in text.lines().skip(1).enumerate() {
        let sig = line.rsplit(',').next().unwrap() == "1";
        if inside[k] {
            in_n += 1;
            tp += usize::from(sig);
        } else {
            out_n += 1;
            fp += usize::from(sig);
        }
    }
    let fpr = fp as f64 / out_n as f64;
    let tpr = tp as f64 / in_n as f64;
    eprintln!(
        "false-positive rate {fpr:.4} over {out_n} nodes, detection rate {tpr:.4} over {in_n}"
    );
    // Binomial sd of the rate over ~2670 nodes is 0.40 %: allow 3 sd.
    assert!(
        (0.0455 - 0.012..=0.0455 + 0.012).contains(&fpr),
        "false-positive rate {fpr}"
    );
    assert!(tpr > 0.99, "detection rate {tpr}");
    assert_eq!(res[0].n_significant, fp + tp);
}

#[test]
fn scalars_profiles_and_a_missing_run() {
    let dir = tempfile::tempdir().unwrap();
    let a = run("a", &VORTEX, grid(64, 48));
    let strong = crate::plot::fixtures::Vortex {
        gamma: 0.008,
        ..VORTEX
    };
    let b = run("b", &strong, grid(64, 48));
    let res = run_comparisons(&[plan(&["a", "b"])], &[a.clone(), b], dir.path()).unwrap();
    let c = &res[0];
    let get = |run: &str, name: &str| {
        c.scalars
            .iter()
            .find(|s| s.run == run && s.name == name)
            .unwrap()
            .value
    };
    // Lamb–Oseen ω = Γ/(π rc²)·exp(−r²/rc²) at the nearest nodes, which sit
    // 0.5 mm off the centre (y0 = −23.5 mm, dy = 1 mm).
    let peak = 0.004 / (std::f64::consts::PI * 16e-6) * (-(0.5e-3f64).powi(2) / 16e-6).exp();
    crate::testutil::assert_close(get("a", "peak vorticity"), peak, 0.0, 1e-9, "peak");
    let ratio = get("b", "circulation of the strongest vortex")
        / get("a", "circulation of the strongest vortex");
    crate::testutil::assert_close(ratio, 2.0, 0.0, 1e-9, "circulation scales with Γ");
    // Phase bins hold Lamb–Oseen vortices with Γ = 0.004 m²/s: the region
    // above 0.2 of the peak holds (1 − 0.2) Γ (see scalars.rs); 3 % for the
    // 1 mm grid against rc = 4 mm.
    crate::testutil::assert_close(
        get("a", "circulation of the strongest phase-mean vortex"),
        0.8 * 0.004,
        0.0,
        0.03,
        "phase Γ",
    );
    assert!(c.figures.iter().any(|f| f.title == "Profiles"));
    let prof = std::fs::read_to_string(dir.path().join("compare/a-vs-b/profiles.csv")).unwrap();
    // 2 runs × 3 default stations × 48 nodes along y.
    assert_eq!(prof.lines().count(), 1 + 2 * 3 * 48);
    let missing = run_comparisons(&[plan(&["a", "zz"])], &[a], dir.path()).unwrap();
    assert!(missing[0].warnings[0].contains("'zz'"));
    assert!(missing[0].figures.is_empty());
}
