//! Tests of `lags` (moved out of lags.rs to keep it under 600 lines).

use super::*;
use crate::stats::moments::Scalar;
use crate::testutil::{assert_close, rng};
use rand_distr::{Distribution, StandardNormal};

fn ar1(n: usize, a: f64, seed: u64) -> Vec<f64> {
    let mut r = rng(seed);
    let mut x = 0.0;
    (0..n)
        .map(|_| {
            let e: f64 = StandardNormal.sample(&mut r);
            x = a * x + e;
            10.0 + x
        })
        .collect()
}

fn n_eff_of(l: &Lags, xs: &[f64], cap: usize) -> f64 {
    let mut s = Scalar::new(1);
    xs.iter()
        .filter(|x| x.is_finite())
        .for_each(|&x| s.add(0, x));
    l.n_eff(0, s.n[0], s.mean[0], s.m2[0], cap).n_eff
}

#[test]
fn ar1_with_coefficient_one_half_gives_a_third_of_the_samples() {
    // Derived (docs/methods.md): rho(k) = 0.5^k, 1 + 2 sum rho = 3, so N_eff ~ N/3.
    let n = 20_000;
    let xs = ar1(n, 0.5, 21);
    let mut l = Lags::new(50, 1);
    for (i, &x) in xs.iter().enumerate() {
        l.push(i as u64, vec![x]);
    }
    let ne = n_eff_of(&l, &xs, 50);
    eprintln!(
        "AR(1) a = 0.5, N = {n}: N_eff = {ne:.1} (N/3 = {:.1})",
        n as f64 / 3.0
    );
    assert_close(ne, n as f64 / 3.0, 0.0, 0.05, "N_eff of AR(1) 0.5");
    // White noise: N_eff close to N (first zero crossing cuts at once or soon).
    let xs = ar1(n, 0.0, 22);
    let mut l = Lags::new(50, 1);
    for (i, &x) in xs.iter().enumerate() {
        l.push(i as u64, vec![x]);
    }
    assert!(n_eff_of(&l, &xs, 50) > 0.9 * n as f64);
}

/// The finite-N `tau = 1 + 2 sum_{k<N} (1 - k/N) a^k` of AR(1), the
/// exact variance factor of the mean of N samples (module doc).
fn ar1_tau(a: f64, n: usize) -> f64 {
    1.0 + 2.0
        * (1..n)
            .map(|k| (1.0 - k as f64 / n as f64) * a.powi(k as i32))
            .sum::<f64>()
}

#[test]
fn short_correlated_ar1_records_get_a_near_unbiased_n_eff_and_are_flagged() {
    // Monte Carlo of AR(1) at N = 100 against the analytic N_eff: the
    // exact finite-N N / tau and the asymptotic N (1-a)/(1+a) (Bayley &
    // Hammersley 1946, from memory). Before: median estimated/true
    // (asymptotic) 1.6 at a = 0.9 and 2.7 at a = 0.97 (issue #11).
    let n = 100;
    for (a, lo, hi, seed) in [
        (0.5, 0.85, 1.15, 61u64),
        (0.9, 0.9, 1.3, 62),
        (0.97, 0.9, 1.75, 63),
    ] {
        let trials = 400;
        let mut ratio = Vec::with_capacity(trials);
        let mut short = 0;
        for t in 0..trials {
            let xs = ar1(n + 300, a, seed * 1000 + t as u64);
            let xs = &xs[300..];
            let mut l = Lags::new(50, 1);
            let mut sc = Scalar::new(1);
            for (i, &x) in xs.iter().enumerate() {
                l.push(i as u64, vec![x]);
                sc.add(0, x);
            }
            let e = l.n_eff(0, sc.n[0], sc.mean[0], sc.m2[0], 50);
            ratio.push(e.n_eff / (n as f64 / ar1_tau(a, n)));
            short += usize::from(e.short);
        }
        ratio.sort_by(f64::total_cmp);
        let med = ratio[trials / 2];
        let asym = n as f64 * (1.0 - a) / (1.0 + a);
        let med_asym = med * (n as f64 / ar1_tau(a, n)) / asym;
        eprintln!(
            "AR(1) a = {a}, N = {n}: median N_eff estimated/true {med:.3} (finite-N truth {:.2}), {med_asym:.3} against the asymptotic {asym:.2}; flagged short in {short} of {trials}",
            n as f64 / ar1_tau(a, n)
        );
        assert!(med > lo && med < hi, "a = {a}: median ratio {med}");
        if a >= 0.9 {
            // true N_eff 5.8 and 2.2: most records must say so
            assert!(short > trials * 7 / 10, "a = {a}: short flagged {short}");
        } else {
            assert!(short < trials / 10, "a = {a}: short flagged {short}");
        }
    }
}

#[test]
fn chunked_lags_equal_one_pass_with_gaps() {
    let n = 300;
    let mut xs = ar1(n, 0.8, 23);
    for i in (0..n).step_by(7) {
        xs[i] = f64::NAN; // gaps
    }
    let mut one = Lags::new(12, 1);
    for (i, &x) in xs.iter().enumerate() {
        one.push(i as u64, vec![x]);
    }
    for chunk in [1usize, 5, 16, 299] {
        let mut acc: Option<Lags> = None;
        for (c, part) in xs.chunks(chunk).enumerate() {
            let mut l = Lags::new(12, 1);
            for (i, &x) in part.iter().enumerate() {
                l.push((c * chunk + i) as u64, vec![x + 0.0]);
            }
            match acc.as_mut() {
                None => acc = Some(l),
                Some(a) => a.merge(l),
            }
        }
        let acc = acc.unwrap();
        assert_eq!(acc.sums.len(), one.sums.len());
        for k in 0..one.sums.len() {
            assert_eq!(acc.sums[k].c, one.sums[k].c, "pair counts, chunk {chunk}");
        }
        assert_close(
            n_eff_of(&acc, &xs, 12),
            n_eff_of(&one, &xs, 12),
            0.0,
            1e-12,
            "N_eff",
        );
    }
}

#[test]
fn clock_accepts_uniform_steps_across_merges_and_rejects_a_jump() {
    let mut a = Clock::new();
    let mut b = Clock::new();
    for i in 0..5u64 {
        a.push(i, Some(0.01 * i as f64));
    }
    for i in 6..9u64 {
        b.push(i, Some(0.01 * i as f64)); // index 5 missing: still uniform per index
    }
    let mut m = a.clone();
    m.merge(&b);
    let tb = m.time_base().unwrap();
    assert_close(tb.step, 0.01, 0.0, 1e-9, "step");
    assert_eq!(tb.gaps, 0);
    // One step back in time: not resolved.
    let mut c = Clock::new();
    c.push(9, Some(0.0));
    let mut back = m.clone();
    back.merge(&c);
    assert!(back.time_base().is_none());
    // Bursts: 3 bursts of 20 frames at 1 ms, 1 s apart: resolved, 2 gaps.
    let mut burst = Clock::new();
    for i in 0..60u64 {
        burst.push(i, Some((i / 20) as f64 + 1e-3 * (i % 20) as f64));
    }
    let tb = burst.time_base().unwrap();
    assert_eq!(tb.gaps, 2);
    assert_close(tb.step, 1e-3, 0.0, 1e-6, "burst step");
    // Steps that alternate 1 and 2 ms: half the steps are not the base.
    let mut alt = Clock::new();
    let mut t = 0.0;
    for i in 0..40u64 {
        alt.push(i, Some(t));
        t += if i % 2 == 0 { 1e-3 } else { 2e-3 };
    }
    assert!(alt.time_base().is_none());
    let mut d = Clock::new();
    d.push(0, None);
    d.push(1, None);
    d.push(2, None);
    assert!(d.time_base().is_none());
}
