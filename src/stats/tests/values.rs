//! Values of the finished columns: sample rules, uncertainty, phase
//! averaging and N_eff, against formulas worked by hand.

use rand_distr::{Distribution, StandardNormal};

use super::*;

#[test]
fn samples_counts_and_instantaneous_uncertainty_follow_the_rules() {
    // Node 0 valid in frames 0..4 with u = 1, 2, 3, 4; replaced in frame 4
    // and filled in frame 5 (u = 100, excluded by default).
    let g = grid(1, 1);
    let us = [1.0, 2.0, 3.0, 4.0, 100.0, 100.0];
    let st = [VALID, VALID, VALID, VALID, REPLACED, FILLED];
    let frames: Vec<Frame> = (0..6)
        .map(|f| {
            frame(
                g,
                f,
                None,
                None,
                &|_, _| [us[f], 0.0, us[f], 0.0],
                &|_, _| st[f],
            )
        })
        .collect();
    let p = Params::default();
    let s = accumulate(&p, g, &frames).finish(&p);
    let c = |n: &str| s.ensemble.get(n).unwrap()[0];
    assert_eq!(c("n_valid"), 4.0);
    assert_eq!(c("u_mean"), 2.5);
    // Sample std of 1..4 = sqrt(5/3); u(mean) = s/sqrt(4) (no systematics on u).
    assert_close(c("u_std"), (5.0f64 / 3.0).sqrt(), 1e-15, 0.0, "u_std");
    assert_close(
        c("u_mean_unc"),
        (5.0f64 / 3.0).sqrt() / 2.0,
        1e-15,
        0.0,
        "u_mean_unc",
    );
    // Expanded: t_0.975(3) = 3.182446 (scipy.stats.t.ppf(0.975, 3));
    // curlew's interpolated t is within 1e-8 of it.
    assert_close(
        c("u_mean_unc_p95"),
        3.182446305284263 * (5.0f64 / 3.0).sqrt() / 2.0,
        0.0,
        1e-8,
        "U95",
    );
    assert_close(c("outlier_frac"), 1.0 / 6.0, 1e-15, 0.0, "outlier_frac");
    assert_close(c("filled_frac"), 1.0 / 6.0, 1e-15, 0.0, "filled_frac");
    // omega unc alternates 0.1, 0.2 over the 4 counted frames: RMS
    // sqrt(0.025), combined with the systematic part of one frame's value
    // (b = 0.010, 0.012, 0.014, 0.010: sqrt(1.35e-4 - 1e-5) = 0.01118).
    let bi = expected_systematic_inst(0..4);
    assert_close(bi, 1.25e-4f64.sqrt(), 1e-15, 0.0, "worked by hand");
    assert_close(
        c("omega_inst_unc"),
        (0.025 + bi * bi).sqrt(),
        1e-15,
        0.0,
        "omega_inst_unc",
    );
    assert_close(c("u_inst_unc"), 0.02, 1e-15, 0.0, "u_inst_unc");
    // omega_mean_unc combines s/sqrt(N) with the systematic part of the
    // mean, the debiased mean of the signed truncation estimates (GUM eq. 10).
    let r = (5.0f64 / 3.0).sqrt() / 2.0;
    let b = expected_systematic(0..4);
    assert_close(c("omega_bias"), b, 1e-15, 0.0, "omega_bias");
    assert_close(c("omega_bias_inst"), bi, 1e-15, 0.0, "omega_bias_inst");
    assert_close(
        c("omega_mean_unc"),
        (r * r + b * b).sqrt(),
        1e-15,
        0.0,
        "omega_mean_unc",
    );
    assert!(s.phase.is_empty() && s.n_eff.is_none());
    // With include_filled the replaced and filled vectors are samples too.
    let p = Params {
        include_filled: true,
        ..Params::default()
    };
    let s = accumulate(&p, g, &frames).finish(&p);
    assert_eq!(s.ensemble.get("n_samples").unwrap()[0], 6.0);
    assert_eq!(s.ensemble.get("n_valid").unwrap()[0], 4.0);
}

#[test]
fn scale_systematics_enter_by_unit() {
    // u = 2 +- 1 alternating (N = 100): random part s/10; calibration 1 %
    // and pulse separation 2 % give 2 * sqrt(0.01^2 + 0.02^2) for u (m/s);
    // vorticity (1/s) carries only the pulse-separation part.
    let g = grid(1, 1);
    let frames: Vec<Frame> = (0..100)
        .map(|f| {
            let x = if f % 2 == 0 { 3.0 } else { 1.0 };
            frame(g, f, None, None, &|_, _| [x, 0.0, x, 0.0], &|_, _| VALID)
        })
        .collect();
    let p = Params {
        calibration_unc: 0.01,
        pulse_separation_unc: 0.02,
        ..Params::default()
    };
    let s = accumulate(&p, g, &frames).finish(&p);
    let sd = (100.0f64 / 99.0).sqrt();
    let c = |n: &str| s.ensemble.get(n).unwrap()[0];
    let sys = 2.0 * (0.01f64.powi(2) + 0.02f64.powi(2)).sqrt();
    assert_close(
        c("u_mean_unc"),
        ((sd / 10.0).powi(2) + sys * sys).sqrt(),
        1e-14,
        0.0,
        "u_mean_unc",
    );
    let sys_w = 2.0 * 0.02;
    assert_close(
        c("omega_mean_unc"),
        ((sd / 10.0).powi(2) + sys_w * sys_w + expected_systematic(0..100).powi(2)).sqrt(),
        1e-14,
        0.0,
        "omega",
    );
    // Welch-Satterthwaite: nu_eff = u_c^4 / (u_r^4 / 99).
    let uc = ((sd / 10.0).powi(2) + sys * sys).sqrt();
    let nu = uc.powi(4) / ((sd / 10.0).powi(4) / 99.0);
    // k from Student's t at nu_eff straight from statrs (the reference
    // library, not curlew's cached coverage_factor, whose interpolation is
    // good to 1e-8).
    use statrs::distribution::{ContinuousCDF, StudentsT};
    let k95 = StudentsT::new(0.0, 1.0, nu).unwrap().inverse_cdf(0.975);
    assert_close(c("u_mean_unc_p95"), k95 * uc, 0.0, 1e-7, "U95");
}

#[test]
fn phase_bins_reproduce_the_analytic_bin_means_and_the_parts_add_back() {
    // u = U + A cos(phi) + noise, v = B sin(phi); 720 frames with evenly
    // spaced phases, 12 bins. The bin mean of cos over [a, b) is
    // (sin b - sin a)/(b - a) (calculus; midpoint-rule error ~1e-6 here).
    let g = grid(2, 1);
    let (u0, amp, bamp) = (1.5, 0.4, 0.3);
    let n = 720;
    let mut r = rng(46);
    let frames = phase_frames(g, n, (u0, amp, bamp), &mut r);
    let p = Params {
        phase_bins: 12,
        ..Params::default()
    };
    let s = chunked(&p, g, &frames, 16).finish(&p);
    assert_eq!(s.phase.len(), 12);
    check_bin_means(&s, (u0, amp, bamp));
    check_parts_add_back(&s);
    // Node 0 has no noise: nearly all energy is coherent; the within-bin
    // spread of a 30-degree bin is what is left: 1 - sinc^2(15 deg) of it.
    let frac = s
        .summary
        .iter()
        .find(|(n, _)| n == "k_coherent_frac")
        .unwrap()
        .1;
    assert!(frac > 0.9 && frac < 1.0, "coherent fraction {frac}");
    let sinc = (15f64.to_radians()).sin() / 15f64.to_radians();
    // Less the noise of the 12 bin means, (K - 1) times the pooled
    // within-bin variance (phase module): here that spread itself.
    let e = &s.ensemble;
    let kc0 = e.get("k_coherent").unwrap()[0];
    let ks0 = e.get("k_stochastic").unwrap()[0];
    assert_close(
        kc0,
        0.25 * (amp * amp + bamp * bamp) * sinc * sinc * 720.0 / 719.0 - 11.0 * ks0 / 719.0,
        0.0,
        1e-4,
        "k_coherent, node 0",
    );
}

/// `n` frames of u = U + A cos(phi) + noise (noise at node 1 only, drawn
/// from `r`), v = B sin(phi), at a permutation of the 720 phase midpoints.
fn phase_frames(
    g: Grid,
    n: usize,
    (u0, amp, bamp): (f64, f64, f64),
    r: &mut impl Rng,
) -> Vec<Frame> {
    let noise: Vec<f64> = (0..n)
        .map(|_| 0.05 * Distribution::<f64>::sample(&StandardNormal, r))
        .collect();
    (0..n)
        .map(|f| {
            let ph = (f as f64 * 7.0 + 0.5) % 720.0 * 0.5; // a permutation of the 720 midpoints
            let phr = ph.to_radians();
            frame(
                g,
                f,
                None,
                Some(ph + 360.0 * (f % 3) as f64),
                &|_, i| {
                    [
                        u0 + amp * phr.cos() + noise[f] * i as f64,
                        bamp * phr.sin(),
                        0.0,
                        0.0,
                    ]
                },
                &|_, _| VALID,
            )
        })
        .collect()
}

/// Each of the 12 bins holds 60 frames, is centred mid-bin, and its u, v
/// and coherent u means are the analytic bin means of cos and sin.
fn check_bin_means(s: &RunStats, (u0, amp, bamp): (f64, f64, f64)) {
    for b in &s.phase {
        assert_eq!(b.n_frames, 60);
        let (a, e) = (
            (b.bin as f64 * 30.0).to_radians(),
            ((b.bin as f64 + 1.0) * 30.0).to_radians(),
        );
        let cos_mean = (e.sin() - a.sin()) / (e - a);
        let sin_mean = (a.cos() - e.cos()) / (e - a);
        assert_close(
            b.table.get("u_mean").unwrap()[0],
            u0 + amp * cos_mean,
            1e-5,
            0.0,
            "bin mean u",
        );
        assert_close(
            b.table.get("v_mean").unwrap()[0],
            bamp * sin_mean,
            1e-5,
            0.0,
            "bin mean v",
        );
        assert_close(
            b.table.get("u_coherent").unwrap()[0],
            amp * cos_mean,
            1e-5,
            0.0,
            "coherent u",
        );
        assert_eq!(b.centre_deg, b.bin as f64 * 30.0 + 15.0);
    }
}

/// The parts add back: k_coherent + k_stochastic = k at every node, and
/// the frame-weighted coherent parts sum to zero.
fn check_parts_add_back(s: &RunStats) {
    let e = &s.ensemble;
    for k in 0..2 {
        let (kc, ks, kk) = (
            e.get("k_coherent").unwrap()[k],
            e.get("k_stochastic").unwrap()[k],
            e.get("k").unwrap()[k],
        );
        assert_close(kc + ks, kk, 0.0, 1e-12, "k_coherent + k_stochastic = k");
        let sum: f64 = s
            .phase
            .iter()
            .map(|b| b.n_frames as f64 * b.table.get("u_coherent").unwrap()[k])
            .sum();
        assert_close(sum, 0.0, 1e-12, 0.0, "sum of coherent parts");
    }
}

#[test]
fn time_resolved_runs_get_n_eff_from_the_autocorrelation() {
    // AR(1) with coefficient 0.5 at every node: N_eff ~ N/3 (derived,
    // docs/methods.md); the uncertainty of the mean uses it.
    let g = grid(2, 1);
    let n = 3000;
    let mut r = rng(47);
    let mut x = [0.0f64; 2];
    let frames: Vec<Frame> = (0..n)
        .map(|f| {
            for xi in x.iter_mut() {
                *xi = 0.5 * *xi + Distribution::<f64>::sample(&StandardNormal, &mut r);
            }
            let xv = x;
            frame(
                g,
                f,
                Some(0.002 * f as f64),
                None,
                &|_, i| [5.0 + xv[i], xv[1 - i], xv[i], 0.0],
                &|_, _| VALID,
            )
        })
        .collect();
    let p = Params {
        max_lag: 30,
        ..Params::default()
    };
    let s = chunked(&p, g, &frames, 16).finish(&p);
    let e = &s.ensemble;
    for k in 0..2 {
        let ne = e.get("u_n_eff").unwrap()[k];
        assert_close(ne, n as f64 / 3.0, 0.0, 0.12, "u_n_eff");
        let sd = e.get("u_std").unwrap()[k];
        assert_close(
            e.get("u_mean_unc").unwrap()[k],
            gum::mean_unc_correlated(sd, n as f64, ne),
            0.0,
            1e-12,
            "u_mean_unc uses N_eff",
        );
    }
    let mean = s.n_eff.unwrap();
    assert_close(mean, n as f64 / 3.0, 0.0, 0.1, "run N_eff");
    // A jump in time_s: not uniform, so independent samples and a warning.
    let mut frames = frames;
    frames.truncate(100);
    frames[50].meta.time_s = Some(1.0);
    let s = accumulate(&p, g, &frames).finish(&p);
    assert_eq!(s.ensemble.get("u_n_eff").unwrap()[0], 100.0);
    assert!(
        s.warnings.iter().any(|w| w.contains("not uniform")),
        "{:?}",
        s.warnings
    );
}

#[test]
fn running_statistics_end_at_the_ensemble_values() {
    // The last row of each probe's trace is the ensemble value at its node.
    let g = grid(3, 2);
    let p = Params {
        probes: vec![(0.0, 0.0), (2e-3, 1e-3)],
        ..params()
    };
    let frames = random_frames(g, 40, 53, false);
    let s = chunked(&p, g, &frames, 16).finish(&p);
    let t = s.convergence.unwrap();
    assert_eq!(t.n_rows(), 80);
    let f = |n: &str| match t.get(n) {
        Some(Values::F64(v)) => v.clone(),
        _ => panic!("{n}"),
    };
    for (probe, node) in [(0usize, 0usize), (1, 5)] {
        let last = 40 * probe + 39;
        for name in ["u_mean", "u_std", "v_mean", "omega_std"] {
            assert_close(
                f(name)[last],
                s.ensemble.get(name).unwrap()[node],
                0.0,
                1e-12,
                name,
            );
        }
        assert_eq!(f("x")[last], g.x(node % 3));
    }
}

#[test]
fn n_eff_uncertainty_matches_the_scatter_of_correlated_means() {
    // Monte Carlo (seeded): AR(1) with a = 0.5 has Var(mean) = 3 sigma^2/N
    // (derived; 1 + 2 sum a^k = (1 + a)/(1 - a)). The u_mean_unc built from
    // the estimated N_eff must match the observed scatter of the means.
    let g = grid(1, 1);
    let (trials, n) = (150, 400);
    let mut r = rng(54);
    let p = Params {
        max_lag: 20,
        ..Params::default()
    };
    let (mut means, mut unc2) = (Vec::new(), Vec::new());
    for _ in 0..trials {
        let mut x = 0.0f64;
        let mut acc = RunAccumulator::new(&p, g, &Q);
        let mut fr = frame(g, 0, Some(0.0), None, &|_, _| [0.0; 4], &|_, _| VALID);
        for f in 0..n {
            x = 0.5 * x + Distribution::<f64>::sample(&StandardNormal, &mut r);
            fr.meta.index = f;
            fr.meta.time_s = Some(f as f64 * 1e-3);
            fr.derived.u[[0, 0]] = x;
            fr.derived.v[[0, 0]] = -x;
            acc.push(&fr.meta, &fr.field, &fr.derived);
        }
        let s = acc.finish(&p);
        means.push(s.ensemble.get("u_mean").unwrap()[0]);
        unc2.push(s.ensemble.get("u_mean_unc").unwrap()[0].powi(2));
    }
    let m = means.iter().sum::<f64>() / trials as f64;
    let var = means.iter().map(|a| (a - m) * (a - m)).sum::<f64>() / (trials as f64 - 1.0);
    let predicted = unc2.iter().sum::<f64>() / trials as f64;
    // True value 3 sigma_u^2 / N with sigma_u^2 = 1/(1 - a^2) = 4/3.
    let truth = 3.0 * (4.0 / 3.0) / n as f64;
    eprintln!("u_mean_unc^2 mean {predicted:.4e}, observed var {var:.4e}, truth {truth:.4e}");
    // The estimator is slightly conservative here (python port of it,
    // 400 trials: mean tau 3.27 against 3, median 3.12), so 0.25.
    assert_close(predicted, truth, 0.0, 0.25, "mean u_mean_unc^2 vs truth");
    assert_close(
        var,
        truth,
        0.0,
        0.3,
        "observed scatter vs truth (150 trials)",
    );
}

/// The ensemble mean of a periodic signal sampled at a fixed rate, against
/// its long-time mean (Monte Carlo, 400 replicas): omega = A sin(phi) +
/// noise with A = 10 1/s, noise 1 1/s, 100 frames advancing 75.6 degrees
/// each (the demo wake's 3.15 Hz at 15 frames/s) from a random start, 7 %
/// of the samples missing at random, 12 phase bins. The truth is 0. With
/// the bins as strata (`strata`: Cochran 1977, stratified sampling) the
/// width of the uncertainty matches the actual scatter; the unstratified
/// s / sqrt(N) is over 3x too wide (it counts the coherent swing
/// A / sqrt(2) as sampling noise). The coverage is above 95 % by
/// construction: the bins' imbalance is a nearly exactly known part of the
/// error, included (not corrected) at its full size.
#[test]
fn the_mean_of_a_periodic_run_has_the_stratified_uncertainty() {
    let g = grid(1, 1);
    let (amp, sigma, n, reps) = (10.0, 1.0, 100usize, 400);
    let p = Params {
        phase_bins: 12,
        ..Params::default()
    };
    let mut r = rng(20261203);
    let (mut errs, mut uncs, mut plain) = (Vec::new(), Vec::new(), Vec::new());
    for _ in 0..reps {
        let start: f64 = r.random_range(0.0..360.0);
        let frames: Vec<Frame> = (0..n)
            .map(|f| {
                let ph = (start + 75.6 * f as f64) % 360.0;
                let w = amp * ph.to_radians().sin()
                    + sigma * Distribution::<f64>::sample(&StandardNormal, &mut r);
                let missing = r.random_range(0.0..1.0) < 0.07;
                frame(g, f, None, Some(ph), &|_, _| [0.0, 0.0, w, 0.0], &|_, _| {
                    if missing {
                        REPLACED
                    } else {
                        VALID
                    }
                })
            })
            .collect();
        let s = accumulate(&p, g, &frames).finish(&p);
        let e = &s.ensemble;
        let (m, u, sd, ns) = (
            e.get("omega_mean").unwrap()[0],
            e.get("omega_mean_unc").unwrap()[0],
            e.get("omega_std").unwrap()[0],
            e.get("n_samples").unwrap()[0],
        );
        errs.push(m);
        uncs.push(u);
        plain.push(sd / ns.sqrt());
    }
    let rms = (errs.iter().map(|e| e * e).sum::<f64>() / reps as f64).sqrt();
    let cover = errs
        .iter()
        .zip(&uncs)
        .filter(|(e, u)| e.abs() <= 2.0 * **u)
        .count() as f64
        / reps as f64;
    let ratio = crate::robust::median(&mut uncs.clone()) / rms;
    let plain_ratio = crate::robust::median(&mut plain) / rms;
    // Measured: coverage 1.00, width ratio 1.06, unstratified 3.3 (rms
    // error 0.22 1/s, of which the noise of 93 samples is 0.10).
    assert!(cover >= 0.95, "k = 2 coverage {cover}");
    assert!((0.8..=1.25).contains(&ratio), "width ratio {ratio}");
    assert!(plain_ratio > 2.5, "unstratified width ratio {plain_ratio}");
}
