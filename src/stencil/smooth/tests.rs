use super::*;
use crate::testutil::{assert_close, float, floats, reference, rng};
use rand::Rng;

fn random(ny: usize, nx: usize, seed: u64) -> Array2<f64> {
    let mut r = rng(seed);
    Array2::from_shape_fn((ny, nx), |_| r.random_range(-1.0..1.0))
}

#[test]
fn smoothing_a_constant_changes_nothing_with_edges_and_gaps() {
    let (ny, nx) = (20, 25);
    let a = Array2::from_elem((ny, nx), 0.75);
    let mut valid = Array2::from_elem((ny, nx), true);
    for k in (3..ny * nx).step_by(11) {
        valid[(k / nx, k % nx)] = false;
    }
    let smoothers = [
        Smoother::gaussian(1.5),
        Smoother::savitzky_golay(2, 2),
        Smoother::savitzky_golay(3, 4),
        Smoother::Pls {
            s: Some(20.0),
            robust: false,
        },
        Smoother::Pls {
            s: None,
            robust: true,
        },
    ];
    for sm in &smoothers {
        let z = sm.apply(&a, &valid);
        for ((j, i), v) in z.indexed_iter() {
            if valid[(j, i)] {
                assert_close(*v, 0.75, 1e-12, 0.0, &format!("{sm:?} at ({j},{i})"));
            } else {
                assert!(v.is_nan());
            }
        }
    }
}

/// Reference library: scipy.ndimage.gaussian_filter (truncate = 4.0, its
/// default; tests/reference/gaussian_filter.py) at interior nodes, where
/// the boundary mode does not enter.
#[test]
fn gaussian_matches_scipy_gaussian_filter_at_interior_nodes() {
    let r = reference("gaussian_filter");
    let (ny, nx) = (30, 34);
    assert_eq!(floats(&r["shape"]), [ny as f64, nx as f64]);
    let a = Array2::from_shape_vec((ny, nx), floats(&r["input"])).unwrap();
    let cases = r["filtered"].as_array().unwrap();
    assert_eq!(cases.len(), 3);
    for case in cases {
        let (sigma, want) = (float(&case["sigma"]), floats(&case["output"]));
        let st = gaussian(sigma);
        let r = (4.0 * sigma + 0.5) as usize;
        assert_eq!(st.reach(), (r, r));
        let z = Smoother::Linear(st, Kernel::Custom).apply(&a, &Array2::from_elem((ny, nx), true));
        for j in r..ny - r {
            for i in r..nx - r {
                assert_close(
                    z[(j, i)],
                    want[j * nx + i],
                    1e-10,
                    0.0,
                    &format!("sigma {sigma} ({j},{i})"),
                );
            }
        }
    }
}

/// Reference library: numpy.linalg.pinv of the monomial matrix (first row
/// of the pseudo-inverse gives the centre value of the fit;
/// tests/reference/savitzky_golay.py).
#[test]
fn savitzky_golay_weights_match_numpy_least_squares() {
    let r = reference("savitzky_golay");
    let cases = r["smoothing"].as_array().unwrap();
    assert_eq!(cases.len(), 4);
    for case in cases {
        let (m, p) = (float(&case["m"]) as usize, float(&case["p"]) as usize);
        let want = floats(&case["weights"]);
        let st = savitzky_golay(m, p);
        let side = 2 * m + 1;
        let mut got = vec![0.0; side * side];
        for t in &st.taps {
            got[(t.dj + m as i32) as usize * side + (t.di + m as i32) as usize] = t.w;
        }
        for (k, (g, w)) in got.iter().zip(&want).enumerate() {
            assert_close(*g, *w, 1e-12, 0.0, &format!("m {m} p {p} tap {k}"));
        }
    }
}

#[test]
fn savitzky_golay_reproduces_polynomials_of_its_order() {
    let st = savitzky_golay(2, 3);
    let f = |x: f64, y: f64| 1.0 + 0.5 * x - 0.3 * y + 0.2 * x * x - 0.1 * x * y + 0.05 * y * y * y;
    let (x0, y0) = (3.0, -2.0);
    let s: f64 = st
        .taps
        .iter()
        .map(|t| t.w * f(x0 + t.di as f64, y0 + t.dj as f64))
        .sum();
    assert_close(s, f(x0, y0), 1e-11, 0.0, "cubic reproduced");
}

#[test]
fn pls_kernel_reproduces_the_solver_in_the_interior_and_sums_to_one() {
    let s = 3.0;
    let st = pls_kernel(s);
    assert_close(
        st.taps.iter().map(|t| t.w).sum::<f64>(),
        1.0,
        1e-13,
        0.0,
        "sum",
    );
    let (ny, nx) = (120, 120);
    let a = random(ny, nx, 62);
    let z = Pls::new(ny, nx).smooth_full(a.as_slice().unwrap(), s);
    let (rj, ri) = st.reach();
    for (j, i) in [(60, 60), (55, 70), (64, 48)] {
        let mut v = 0.0;
        for t in &st.taps {
            v += t.w * a[((j as i32 + t.dj) as usize, (i as i32 + t.di) as usize)];
        }
        assert!(rj < 50 && ri < 50);
        assert_close(v, z[j * nx + i], 1e-5, 0.0, "kernel vs solver");
    }
    assert_eq!(
        Smoother::Pls {
            s: Some(s),
            robust: false
        }
        .equivalent_stencil(),
        Some(st)
    );
    assert!(Smoother::Pls {
        s: None,
        robust: false
    }
    .equivalent_stencil()
    .is_none());
}

/// White-noise factor against the spectral formula (derived, Parseval):
/// sum w^2 = mean over wavenumbers of G^2, G = 1/(1 + s L^2),
/// L = -4 sin^2(kx/2) - 4 sin^2(ky/2).
#[test]
fn pls_noise_factor_matches_the_spectral_integral() {
    for s in [0.5, 10.0] {
        let n = 400;
        let mut m = 0.0;
        for a in 0..n {
            for b in 0..n {
                let kx = std::f64::consts::PI * (a as f64 + 0.5) / n as f64;
                let ky = std::f64::consts::PI * (b as f64 + 0.5) / n as f64;
                let l = -4.0 * (kx / 2.0).sin().powi(2) - 4.0 * (ky / 2.0).sin().powi(2);
                m += (1.0 / (1.0 + s * l * l)).powi(2);
            }
        }
        m /= (n * n) as f64;
        assert_close(pls_noise_factor(s), m.sqrt(), 0.0, 2e-3, &format!("s {s}"));
    }
}

#[test]
fn gaussian_at_edges_is_renormalised_and_sg_refits() {
    // a linear ramp: the renormalised Gaussian at the left edge is pulled
    // toward the interior (mean of the taps inside); Savitzky-Golay refits
    // its quadratic on the nodes inside (stencil::cut), which keeps a ramp
    let a = Array2::from_shape_fn((9, 9), |(_, i)| i as f64);
    let valid = Array2::from_elem((9, 9), true);
    let g = Smoother::gaussian(1.0).apply(&a, &valid);
    assert!(g[(4, 0)] > 0.0 && g[(4, 0)] < 1.0, "{}", g[(4, 0)]);
    assert_close(g[(4, 4)], 4.0, 1e-12, 0.0, "interior of a ramp");
    let sg = Smoother::savitzky_golay(2, 2).apply(&a, &valid);
    assert_close(sg[(4, 0)], 0.0, 1e-12, 0.0, "edge of a ramp");
    assert_close(sg[(0, 0)], 0.0, 1e-12, 0.0, "corner of a ramp");
    assert_close(sg[(4, 4)], 4.0, 1e-12, 0.0, "interior of a ramp");
}

/// Issue 11 item 11: PLS without s smooths (GCV per frame), never passes
/// the raw field through. Garcia 2010: on a smooth field plus white noise
/// the GCV choice removes most of the noise.
#[test]
fn pls_without_s_chooses_by_gcv_for_the_frame() {
    let (ny, nx) = (40, 48);
    let mut r = rng(91);
    let n = rand_distr::Normal::new(0.0, 0.05).unwrap();
    use rand_distr::Distribution;
    let truth = |j: usize, i: usize| ((i as f64) * 0.2).sin() + ((j as f64) * 0.15).cos();
    let u = Array2::from_shape_fn((ny, nx), |(j, i)| truth(j, i) + n.sample(&mut r));
    let v = Array2::from_shape_fn((ny, nx), |(j, i)| {
        0.5 * truth(i % ny, j % nx) + n.sample(&mut r)
    });
    let valid = Array2::from_elem((ny, nx), true);
    let sm = Smoother::Pls {
        s: None,
        robust: false,
    }
    .for_frame(&u, &v, &valid);
    let Smoother::Pls { s: Some(s), .. } = sm else {
        panic!("GCV did not resolve s: {sm:?}");
    };
    assert!(s > 0.01 && s < 1e4, "s {s}");
    assert_close(s, quantise_s(s), 1e-12, 0.0, "quantised");
    let z = sm.apply(&u, &valid);
    let rms = |f: &dyn Fn(usize, usize) -> f64| {
        let mut e = 0.0;
        for j in 0..ny {
            for i in 0..nx {
                e += f(j, i).powi(2);
            }
        }
        (e / (ny * nx) as f64).sqrt()
    };
    let raw = rms(&|j, i| u[(j, i)] - truth(j, i));
    let smoothed = rms(&|j, i| z[(j, i)] - truth(j, i));
    eprintln!("PLS by GCV: s = {s:.3}, rms error raw {raw:.4}, smoothed {smoothed:.4}");
    assert!(smoothed < 0.6 * raw, "{smoothed} vs {raw}");
}
