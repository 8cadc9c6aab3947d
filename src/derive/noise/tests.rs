//! Tests of the noise and correlation estimates (`derive::noise`).

use super::*;
use crate::derive::flows::lamb_oseen;
use crate::field::Grid;
use crate::testutil::{assert_close, rng};
use ndarray::Array2;
use rand_distr::{Distribution, Normal};

#[test]
fn recovers_injected_noise_next_to_a_vortex_within_ten_percent() {
    // A Lamb-Oseen vortex, peak u_theta = 0.638 Gamma/(2 pi rc)
    // (Saffman 1992) = 0.51 m/s, core radius 4 pitches, in a 0.3 m/s
    // stream; noise 2 % and 5 % of the peak, independent and 50 %-overlap
    // correlated (top-hat average of white noise, docs/methods.md).
    let g = Grid {
        nx: 64,
        ny: 48,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 1e-3,
    };
    let f = lamb_oseen(0.02, 4e-3, 0.03, 0.024, 0.3);
    let mut rng = rng(7);
    for sigma in [0.01, 0.025] {
        for overlap in [false, true] {
            let mut fld = Field::from_fn(g, &f);
            let n = Normal::new(0.0, 1.0).unwrap();
            let white = |rng: &mut rand_chacha::ChaCha8Rng| {
                Array2::from_shape_fn((g.ny + 1, g.nx + 1), |_| n.sample(rng))
            };
            for a in [&mut fld.u, &mut fld.v] {
                let e = white(&mut rng);
                for j in 0..g.ny {
                    for i in 0..g.nx {
                        a[[j, i]] += sigma
                            * if overlap {
                                0.5 * (e[[j, i]]
                                    + e[[j, i + 1]]
                                    + e[[j + 1, i]]
                                    + e[[j + 1, i + 1]])
                            } else {
                                e[[j, i]]
                            };
                    }
                }
            }
            let corr = if overlap {
                Correlation::Window(0.5)
            } else {
                Correlation::Independent
            };
            let est = estimate(&fld, &corr).unwrap();
            assert_close(
                est,
                sigma,
                0.0,
                0.10,
                &format!("sigma {sigma} overlap {overlap}"),
            );
        }
    }
}

#[test]
fn too_few_valid_runs_give_no_estimate() {
    let g = Grid {
        nx: 4,
        ny: 4,
        x0: 0.0,
        y0: 0.0,
        dx: 1.0,
        dy: 1.0,
    };
    let fld = Field::from_fn(g, |x, y| (x, y));
    assert!(estimate(&fld, &Correlation::Independent).is_none());
}

/// Unit-variance noise on `(ny, nx)` from a W x W top-hat average of
/// white noise: the window model with `c = 1 - 1/W` (derived).
pub(crate) fn box_noise(
    rng: &mut rand_chacha::ChaCha8Rng,
    ny: usize,
    nx: usize,
    w: usize,
) -> Array2<f64> {
    let n = Normal::new(0.0, 1.0).unwrap();
    let e = Array2::from_shape_fn((ny + w - 1, nx + w - 1), |_| n.sample(rng));
    Array2::from_shape_fn((ny, nx), |(j, i)| {
        let mut s = 0.0;
        for a in 0..w {
            for b in 0..w {
                s += e[[j + a, i + b]];
            }
        }
        s / w as f64
    })
}

#[test]
fn overlap_of_box_filtered_noise_is_recovered_next_to_a_vortex() {
    // Top-hat windows of W = 1, 2, 4 steps (0, 50 %, 75 % overlap;
    // rho(d) = max(0, 1 - d/W), derived, Sciacchitano & Wieneke 2016
    // from memory) over a Lamb-Oseen vortex of core 4 pitches in a
    // stream; noise 2 % and 0.6 % of the peak velocity.
    let g = Grid {
        nx: 64,
        ny: 48,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 1e-3,
    };
    let f = lamb_oseen(0.02, 4e-3, 0.03, 0.024, 0.3);
    let mut rng = rng(11);
    for (w, c) in [(1, 0.0), (2, 0.5), (4, 0.75)] {
        for sigma in [0.01, 0.003] {
            let mut fld = Field::from_fn(g, &f);
            fld.u = &fld.u + &(box_noise(&mut rng, g.ny, g.nx, w) * sigma);
            fld.v = &fld.v + &(box_noise(&mut rng, g.ny, g.nx, w) * sigma);
            let got = estimate_overlap(&fld).unwrap();
            assert_close(got, c, 0.051, 0.0, &format!("W {w} sigma {sigma}"));
            let level = estimate(&fld, &overlap_model(got)).unwrap();
            assert_close(
                level,
                sigma,
                0.0,
                0.12,
                &format!("level W {w} sigma {sigma}"),
            );
        }
    }
}

#[test]
fn the_model_lags_of_white_noise_are_the_filter_autocorrelation() {
    // c = 0: R(L) = sum_k w_k w_k+L / sum_k w_k^2 of the residual
    // weights (derived); lag 1 = -0.4577 for the 11-node quartic
    // (numpy, scipy.signal.savgol_coeffs(11, 4), by hand).
    let w = residual_weights();
    let c0: f64 = w.iter().map(|x| x * x).sum();
    let c1: f64 = w.windows(2).map(|p| p[0] * p[1]).sum();
    let r = model_lags(0.0);
    assert_close(r[0], c1 / c0, 1e-14, 0.0, "lag 1");
    assert_close(r[0], -0.4577, 5e-4, 0.0, "lag 1 value");
}

#[test]
fn default_vorticity_uncertainty_of_overlapping_windows_matches_monte_carlo() {
    // Issue 11 item 3: with no settings, box-filtered noise at 50 % and
    // 75 % overlap (W = 2, 4; rho(d) = max(0, 1 - d/W), derived;
    // Sciacchitano & Wieneke 2016, from memory) must get an
    // instantaneous u(omega) within 10 % of the Monte Carlo scatter.
    // 300 realisations of a uniform stream; interior nodes pooled.
    use crate::derive::{Params, Scheme};
    use crate::stencil::derivatives::DiffScheme;
    let g = Grid {
        nx: 32,
        ny: 32,
        x0: 0.0,
        y0: 0.0,
        dx: 1e-3,
        dy: 1e-3,
    };
    let sigma = 0.02;
    let mut rng = rng(31);
    for (w, scheme) in [
        (
            2,
            Scheme::Fixed(DiffScheme::LeastSquares {
                window: 5,
                order: 1,
            }),
        ),
        (
            4,
            Scheme::Fixed(DiffScheme::LeastSquares {
                window: 5,
                order: 1,
            }),
        ),
        (2, Scheme::Fixed(DiffScheme::Central)),
        (4, Scheme::Fixed(DiffScheme::Central)),
    ] {
        let p = Params {
            scheme,
            quantities: vec![],
            truncation: false,
            ..Params::default()
        };
        let (reported, var) = monte_carlo_omega(&mut rng, g, &p, w, sigma);
        eprintln!(
            "W {w} {scheme:?}: reported {reported:.4} MC {:.4}",
            var.sqrt()
        );
        assert_close(
            reported,
            var.sqrt(),
            0.0,
            0.10,
            &format!("W {w} {scheme:?}"),
        );
    }
}

/// Over 300 realisations of a uniform stream plus box-filtered noise of
/// width `w` and standard deviation `sigma` (drawn from `rng`), the rms
/// reported u(omega) and the scatter variance of omega, both pooled over
/// interior nodes.
fn monte_carlo_omega(
    rng: &mut rand_chacha::ChaCha8Rng,
    g: Grid,
    p: &crate::derive::Params,
    w: usize,
    sigma: f64,
) -> (f64, f64) {
    use crate::derive::{derive_with, Workspace};
    let nodes: Vec<(usize, usize)> = (4..28)
        .step_by(3)
        .flat_map(|j| (4..28).step_by(3).map(move |i| (j, i)))
        .collect();
    let (mut s1, mut s2, mut unc, mut n) =
        (vec![0.0; nodes.len()], vec![0.0; nodes.len()], 0.0, 0usize);
    let mut ws = Workspace::new();
    for _ in 0..300 {
        let mut fld = Field::from_fn(g, |_, _| (0.3, 0.1));
        fld.u = &fld.u + &(box_noise(rng, g.ny, g.nx, w) * sigma);
        fld.v = &fld.v + &(box_noise(rng, g.ny, g.nx, w) * sigma);
        let d = derive_with(&mut ws, p, &fld, None, None);
        let q = d.get("omega").unwrap();
        for (k, &(j, i)) in nodes.iter().enumerate() {
            let x = q.value[[j, i]];
            s1[k] += x;
            s2[k] += x * x;
            unc += q.unc.as_ref().unwrap()[[j, i]].powi(2);
        }
        n += 1;
    }
    let nf = n as f64;
    let var: f64 = s1
        .iter()
        .zip(&s2)
        .map(|(a, b)| (b - a * a / nf) / (nf - 1.0))
        .sum::<f64>()
        / nodes.len() as f64;
    let reported = (unc / (nf * nodes.len() as f64)).sqrt();
    (reported, var)
}
