//! Two-point correlations and integral scales against a reference library:
//! numpy.corrcoef of the pairwise-complete samples and numpy.trapezoid to
//! the first zero crossing (tests/reference/correlation.py → .json).

use curlew::field::Grid;
use curlew::scales::{finish, CorrAcc, Layout};

fn reference() -> serde_json::Value {
    let p = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/reference/correlation.json"
    );
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn rows(v: &serde_json::Value) -> Vec<Vec<f64>> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_f64().unwrap())
                .collect()
        })
        .collect()
}

#[test]
fn correlations_and_integral_scales_equal_numpy() {
    let r = reference();
    let g = Grid {
        nx: r["nx"].as_u64().unwrap() as usize,
        ny: r["ny"].as_u64().unwrap() as usize,
        x0: 0.0,
        y0: 0.0,
        dx: r["dx"].as_f64().unwrap(),
        dy: r["dy"].as_f64().unwrap(),
    };
    let cases = r["cases"].as_array().unwrap();
    let ij: Vec<(usize, usize)> = cases
        .iter()
        .map(|c| {
            (
                c["i"].as_u64().unwrap() as usize,
                c["j"].as_u64().unwrap() as usize,
            )
        })
        .collect();
    let mut acc = CorrAcc::with_layout(Layout {
        grid: g,
        points: ij.iter().map(|&(i, j)| (g.x(i), g.y(j))).collect(),
        nodes: ij.iter().map(|&(i, j)| j * g.nx + i).collect(),
        include_filled: false,
    });
    let (u, v) = (rows(&r["u"]), rows(&r["v"]));
    let ok: Vec<Vec<bool>> = r["valid"]
        .as_array()
        .unwrap()
        .iter()
        .map(|row| {
            row.as_array()
                .unwrap()
                .iter()
                .map(|b| b.as_bool().unwrap())
                .collect()
        })
        .collect();
    let unc = vec![f64::NAN; g.len()];
    for f in 0..u.len() {
        acc.push_values(&ok[f], [&u[f], &v[f]], [&unc, &unc]);
    }
    let s = finish(&acc);
    let mut worst = 0.0f64;
    for (p, case) in cases.iter().enumerate() {
        for (c, name) in ["u", "v"].iter().enumerate() {
            let want = case[format!("rho_{name}")].as_array().unwrap();
            for (q, w) in want.iter().enumerate() {
                let got = s.probes[p].rho[c][q];
                match w.as_f64() {
                    Some(w) => {
                        worst = worst.max((got - w).abs());
                        assert!(
                            (got - w).abs() < 1e-12,
                            "probe {p} {name} node {q}: {got} vs {w}"
                        );
                    }
                    None => assert!(got.is_nan()),
                }
            }
            let lens = &case[format!("length_{name}")];
            for (ax, got) in [("x", &s.probes[p].comp[c].x), ("y", &s.probes[p].comp[c].y)] {
                let w = lens[ax].as_f64().unwrap();
                assert!(
                    (got.length - w).abs() < 1e-12 * w,
                    "probe {p} {name} L{ax}: {} vs numpy {w}",
                    got.length
                );
            }
        }
    }
    eprintln!("correlations against numpy.corrcoef: worst |difference| {worst:.1e}");
}
