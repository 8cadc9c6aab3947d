//! Tests of the whole chain: detection rates on an analytic field with
//! injected outliers, the ensemble test against coherent wrong patches,
//! counting order, and whole-frame rejection.

use super::*;
use crate::field::{Grid, MASKED};
use crate::testutil::rng;
use rand::Rng;
use rand_distr::{Distribution, Normal};

fn grid(n: usize) -> Grid {
    Grid {
        nx: n,
        ny: n,
        x0: 0.0,
        y0: 0.0,
        dx: 1.0,
        dy: 1.0,
    }
}

/// A smooth analytic field in px of displacement (px_velocity = 1): a
/// uniform stream of 6 px plus a cellular (Taylor-Green) flow of amplitude
/// 1 px and wavelength 64 nodes: the largest change between neighbours is
/// 0.1 px, a moderate gradient for PIV.
fn truth(x: f64, y: f64) -> (f64, f64) {
    let k = 2.0 * std::f64::consts::PI / 64.0;
    (
        6.0 + (k * x).sin() * (k * y).cos(),
        -(k * x).cos() * (k * y).sin(),
    )
}

/// `truth` on an n x n grid plus Gaussian noise of `noise` px per component.
fn noisy(n: usize, noise: f64, r: &mut impl Rng) -> Field {
    let nd = Normal::new(0.0, noise).unwrap();
    let mut f = Field::from_fn(grid(n), truth);
    f.u.iter_mut().for_each(|x| *x += nd.sample(r));
    f.v.iter_mut().for_each(|x| *x += nd.sample(r));
    f
}

/// Detection rates of the default median test (eps 0.1 px, threshold 2,
/// radius 1, either component) on `frames` frames of 64 x 64 vectors with
/// Gaussian noise of `noise` px and 2 % outliers displaced by 10..40 times
/// the noise in a random direction. Returns (recall, false-positive rate).
fn detection(noise: f64, frames: usize, seed: u64) -> (f64, f64) {
    // eps 0.1 (px here), threshold 2
    detection_with(&Params::default(), 1.0, noise, frames, seed)
}

/// As `detection`, with the chain `p` and every velocity multiplied by
/// `scale` (m/s per px).
fn detection_with(p: &Params, scale: f64, noise: f64, frames: usize, seed: u64) -> (f64, f64) {
    let mut r = rng(seed);
    let (mut hit, mut n_out, mut fp, mut n_ok) = (0, 0, 0, 0);
    for _ in 0..frames {
        let mut f = noisy(64, noise, &mut r);
        let mut is_out = vec![false; 64 * 64];
        for (k, o) in is_out.iter_mut().enumerate() {
            if r.random::<f64>() < 0.02 {
                *o = true;
                let a = r.random_range(0.0..std::f64::consts::TAU);
                let m = noise * r.random_range(10.0..40.0);
                f.u[[k / 64, k % 64]] += m * a.cos();
                f.v[[k / 64, k % 64]] += m * a.sin();
            }
        }
        f.u *= scale;
        f.v *= scale;
        let c = validate_frame(p, &mut f, None);
        assert_eq!(c.outliers(), c.median);
        for (k, &o) in is_out.iter().enumerate() {
            let rej = f.status[[k / 64, k % 64]] == REPLACED;
            if o {
                n_out += 1;
                hit += rej as usize;
            } else {
                n_ok += 1;
                fp += rej as usize;
            }
        }
    }
    (hit as f64 / n_out as f64, fp as f64 / n_ok as f64)
}

/// Issue #3: recall >= 0.98 for outliers > 10x the noise and false
/// positives <= 0.5 % at threshold 2. Measured (seed 31, 8 frames of 4096
/// vectors, about 650 outliers), eps 0.1 px:
/// - noise 0.05 px: recall 0.9955, false positives 0.000 %;
/// - noise 0.075 px: recall 1.000, false positives 0.13 %;
/// - noise 0.1 px (noise = eps): recall 1.000, false positives 0.92 %, over
///   the 0.5 % target: with eps no larger than the noise the test at
///   threshold 2 flags about 1 % of good vectors (the residual of a median
///   of eight noisy values, derived), so eps should be at least the noise.
#[test]
fn median_test_detects_injected_outliers_with_few_false_positives() {
    for (noise, max_fpr) in [(0.05, 0.005), (0.075, 0.005), (0.1, 0.012)] {
        let (recall, fpr) = detection(noise, 8, 31);
        eprintln!("noise {noise} px: recall {recall:.4}, false-positive rate {fpr:.5}");
        assert!(recall >= 0.98, "noise {noise}: recall {recall}");
        assert!(fpr <= max_fpr, "noise {noise}: false-positive rate {fpr}");
    }
}

/// Issue 11 item 12: input in m/s without a calibration. The 0.1 px
/// default used to be read as 0.1 m/s (about 50 x the noise here), and the
/// test caught few outliers. Now eps is each frame's estimated noise
/// (`MedianParams::eps_noise`); its detection must be comparable to the
/// calibrated default (eps = 0.1 px; Westerweel & Scarano 2005). 1 px =
/// 0.019 m/s (a water channel: 40 um pixels, 2.1 ms between exposures),
/// noise 0.075 px and 0.1 px, 2 % outliers of 10-40 x the noise.
#[test]
fn median_test_without_calibration_takes_eps_from_the_noise_not_from_px() {
    let px = 4e-5 / 2.1e-3;
    let with = |eps: f64, eps_noise: Option<f64>| Params {
        median: Some(MedianParams {
            eps,
            eps_noise,
            ..MedianParams::default()
        }),
        ..Params::default()
    };
    for noise in [0.075, 0.1] {
        let cal = detection_with(&with(0.1 * px, None), px, noise, 8, 41);
        let new = detection_with(&with(0.0, Some(1.0)), px, noise, 8, 41);
        let old = detection_with(&with(0.1, None), px, noise, 8, 41);
        eprintln!(
            "noise {noise} px: (recall, false positives) calibrated {cal:.4?}, \
             from noise {new:.4?}, 0.1 px read as 0.1 m/s {old:.4?}"
        );
        assert!(
            new.0 >= cal.0 - 0.01,
            "recall {} vs calibrated {}",
            new.0,
            cal.0
        );
        assert!(
            new.1 <= cal.1 + 0.005,
            "false positives {} vs {}",
            new.1,
            cal.1
        );
        assert!(old.0 < 0.5, "the old reading should miss most: {}", old.0);
    }
}

/// A 3x3 patch of identical wrong vectors in one frame agrees with itself:
/// the median test keeps its centre (all eight neighbours agree with it),
/// the ensemble test, which compares each node with its own history, rejects
/// all nine.
#[test]
fn ensemble_test_catches_a_coherent_wrong_patch_the_median_test_misses() {
    let mut r = rng(32);
    let mut frames: Vec<Field> = (0..40).map(|_| noisy(16, 0.05, &mut r)).collect();
    for j in 6..9 {
        for i in 6..9 {
            frames[17].u[[j, i]] = 1.0;
            frames[17].v[[j, i]] = 3.0;
        }
    }
    // median test alone: the centre survives
    let mut alone = frames[17].clone();
    validate_frame(&Params::default(), &mut alone, None);
    assert_eq!(
        alone.status[[7, 7]],
        VALID,
        "median test should miss the patch centre"
    );

    let p = Params {
        ensemble: Some(EnsembleParams {
            floor: 0.1,
            ..EnsembleParams::default()
        }),
        ..Params::default()
    };
    assert!(p.needs_ensemble_pass());
    let mut b = EnsembleBuilder::new(&p, grid(16));
    frames.iter().for_each(|f| b.push(f));
    let e = b.finish();
    let mut total = Counts::default();
    for (n, f) in frames.iter_mut().enumerate() {
        let c = validate_frame(&p, f, Some(&e));
        if n == 17 {
            assert_eq!(c.ensemble, 9, "{c:?}");
            for j in 6..9 {
                for i in 6..9 {
                    assert_eq!(f.status[[j, i]], REPLACED);
                }
            }
        }
        total.ensemble += c.ensemble;
        total.median += c.median;
    }
    // with noise 0.05 px and floor 0.1 px, k = 5 rejects nothing else
    assert_eq!(total.ensemble, 9);
    // the median test then flags a handful of the 10240 vectors (measured:
    // 4, beside the hole the patch left and at the edges)
    assert!(total.median <= 10, "{total:?}");
}

#[test]
fn each_vector_is_counted_once_by_the_first_test_in_order() {
    let mut f = Field::from_fn(grid(8), |_, _| (1.0, 0.0));
    f.u[[1, 1]] = f64::NAN; // valid status but NaN: invalid input
    f.status[[0, 5]] = crate::field::FILLED; // flagged by io
    f.status[[7, 7]] = MASKED; // outside the domain: not counted
    f.u[[4, 4]] = 50.0; // outside the limits and a median outlier
    f.u[[2, 5]] = 1.5; // inside the limits, a median outlier
    let p = Params {
        limits: Some(Limits {
            shape: Shape::Ellipse,
            bounds: Bounds::Given {
                u: [-10.0, 10.0],
                v: [-10.0, 10.0],
            },
        }),
        ..Params::default()
    };
    let c = validate_frame(&p, &mut f, None);
    assert_eq!(
        c,
        Counts {
            invalid_input: 2,
            limits: 1,
            median: 1,
            ensemble: 0
        }
    );
    assert_eq!(c.outliers(), 2);
    assert_eq!(f.status[[1, 1]], crate::field::FILLED);
    assert_eq!(f.status[[4, 4]], REPLACED);
    assert_eq!(f.status[[2, 5]], REPLACED);
    assert!(f.u[[2, 5]].is_nan() && f.v[[2, 5]].is_nan());
    // 4 of 64 rejected or invalid: 6.25 %
    let q = Params {
        max_rejected_fraction: Some(0.06),
        ..Params::default()
    };
    assert!(frame_rejected(&q, &c, 64));
    let q = Params {
        max_rejected_fraction: Some(0.07),
        ..Params::default()
    };
    assert!(!frame_rejected(&q, &c, 64));
    assert!(!frame_rejected(&Params::default(), &c, 64));
}

#[test]
fn limits_from_the_run_statistics_reject_gross_outliers_only() {
    let mut r = rng(33);
    let mut frames: Vec<Field> = (0..20).map(|_| noisy(16, 0.05, &mut r)).collect();
    frames[3].u[[5, 5]] = 40.0;
    let p = Params {
        limits: Some(Limits {
            shape: Shape::Box,
            bounds: Bounds::Robust {
                spread: 6.0,
                floor: 0.1,
            },
        }),
        median: None,
        ..Params::default()
    };
    assert!(p.needs_ensemble_pass());
    let mut b = EnsembleBuilder::new(&p, grid(16));
    frames.iter().for_each(|f| b.push(f));
    let e = b.finish();
    // the global median is that of the noise-free field over the nodes
    // (noise 0.05 px, 5120 samples: within a few thousandths)
    let mut t: Vec<f64> = Field::from_fn(grid(16), truth).u.iter().copied().collect();
    t.sort_by(f64::total_cmp);
    let med = 0.5 * (t[127] + t[128]);
    assert!(
        (e.global_u.0 - med).abs() < 0.01,
        "{:?} vs {med}",
        e.global_u
    );
    let n: usize = frames
        .iter_mut()
        .map(|f| validate_frame(&p, f, Some(&e)).limits)
        .sum();
    assert_eq!(n, 1);
    assert_eq!(frames[3].status[[5, 5]], REPLACED);
    // without the ensemble reference the robust limits do not run
    let mut f = frames[4].clone();
    f.u[[0, 0]] = 40.0;
    assert_eq!(validate_frame(&p, &mut f, None).limits, 0);
}
