//! Micro-benchmarks of validation and filling (not tests of correctness:
//! run by hand, `#[ignore]`d). Run with the crate optimised:
//!
//! ```text
//! CARGO_PROFILE_DEV_OPT_LEVEL=3 cargo test --lib validate::bench -- --ignored --nocapture --test-threads 1
//! ```
//!
//! (only the curlew crate is rebuilt at opt-level 3; dependencies stay at
//! the dev profile's opt-level 1 but their generic code, ndarray and
//! rustdct, is instantiated in curlew and so optimised with it.)
//!
//! Data: 128 x 128 nodes, 64 frames, smooth field + 0.05 px noise, 2 %
//! outliers, 3 % invalid input. Prints ns per vector (node) per stage.

use std::time::Instant;

use super::*;
use crate::field::Grid;
use crate::fill;
use crate::testutil::rng;
use rand::Rng;
use rand_distr::{Distribution, Normal};

const N: usize = 128;
const FRAMES: usize = 64;

fn frames() -> Vec<Field> {
    let g = Grid {
        nx: N,
        ny: N,
        x0: 0.0,
        y0: 0.0,
        dx: 1.0,
        dy: 1.0,
    };
    let mut r = rng(71);
    let nd = Normal::new(0.0, 0.05).unwrap();
    (0..FRAMES)
        .map(|_| {
            let k = std::f64::consts::TAU / 64.0;
            let mut f = Field::from_fn(g, |x, y| {
                (
                    6.0 + (k * x).sin() * (k * y).cos(),
                    -(k * x).cos() * (k * y).sin(),
                )
            });
            for ((s, u), v) in f.status.iter_mut().zip(f.u.iter_mut()).zip(f.v.iter_mut()) {
                *u += nd.sample(&mut r);
                *v += nd.sample(&mut r);
                let x: f64 = r.random();
                if x < 0.02 {
                    *u += r.random_range(-3.0..3.0);
                    *v += r.random_range(-3.0..3.0);
                } else if x < 0.05 {
                    *s = crate::field::FILLED;
                    *u = f64::NAN;
                    *v = f64::NAN;
                }
            }
            f
        })
        .collect()
}

/// CPU time of this thread in ns (Linux: first field of
/// /proc/thread-self/schedstat), so that a loaded shared machine does not
/// inflate the numbers; wall time is printed beside it.
fn cpu_ns() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|t| t.parse().ok()))
        .unwrap_or(f64::NAN)
}

fn time<T>(what: &str, n_vectors: usize, mut f: impl FnMut() -> T) -> T {
    let t = Instant::now();
    let c0 = cpu_ns();
    let out = f();
    let cpu = (cpu_ns() - c0) / n_vectors as f64;
    let wall = t.elapsed().as_nanos() as f64 / n_vectors as f64;
    eprintln!("{what:<40} {cpu:8.1} ns/vector CPU ({wall:.1} wall)");
    out
}

#[test]
#[ignore]
fn bench_validation_and_filling() {
    let base = frames();
    let nv = N * N * FRAMES;
    let sum: f64 = time("baseline: sum of u over the frames", nv, || {
        base.iter()
            .map(|f| {
                f.u.as_slice()
                    .unwrap()
                    .iter()
                    .filter(|x| x.is_finite())
                    .sum::<f64>()
            })
            .sum()
    });
    assert!(sum > 0.0);
    let a = bench_median(&base, nv);
    bench_ensemble(&base, nv);
    let mut pl = peaklock::PeakLockAcc::new(1.0);
    time("peak-locking accumulator", nv, || {
        base.iter().for_each(|f| pl.push(f))
    });
    bench_fill(&a, nv);
}

/// Times input + median validation of copies of `base` with a 3x3 and a
/// 5x5 neighbourhood; returns the frames validated with 3x3.
fn bench_median(base: &[Field], nv: usize) -> Vec<Field> {
    let p = Params::default();
    let mut a = base.to_vec();
    let c: usize = time("validate: input + median (3x3)", nv, || {
        a.iter_mut()
            .map(|f| validate_frame(&p, f, None).outliers())
            .sum()
    });
    assert!(c > nv / 100);
    let p5 = Params {
        median: Some(MedianParams {
            radius: 2,
            min_neighbours: 8,
            ..MedianParams::default()
        }),
        ..Params::default()
    };
    let mut b = base.to_vec();
    time("validate: input + median (5x5)", nv, || {
        b.iter_mut()
            .map(|f| validate_frame(&p5, f, None).outliers())
            .sum::<usize>()
    });
    a
}

/// Times the ensemble pass (push, finish) over `base` and a validation
/// of copies of it with limits, the ensemble test and the median.
fn bench_ensemble(base: &[Field], nv: usize) {
    let pe = Params {
        ensemble: Some(EnsembleParams::default()),
        limits: Some(Limits {
            shape: Shape::Ellipse,
            bounds: Bounds::Robust {
                spread: 6.0,
                floor: 0.1,
            },
        }),
        ..Params::default()
    };
    let eb = time("ensemble pass: push", nv, || {
        let mut eb = EnsembleBuilder::new(&pe, base[0].grid);
        base.iter().for_each(|f| eb.push(f));
        eb
    });
    let e = time("ensemble pass: finish (per vector pushed)", nv, || {
        eb.clone().finish()
    });
    let mut d = base.to_vec();
    time("validate: limits + ensemble + median", nv, || {
        d.iter_mut()
            .map(|f| validate_frame(&pe, f, Some(&e)).outliers())
            .sum::<usize>()
    });
}

/// Times the neighbour-mean fill of copies of the validated frames `a`,
/// and the inpaint fill of copies of its first 8.
fn bench_fill(a: &[Field], nv: usize) {
    let mut a2 = a.to_vec();
    let fp = fill::Params::default();
    let filled: usize = time("fill: neighbour mean", nv, || {
        a2.iter_mut().map(|f| fill::fill(&fp, f).replaced).sum()
    });
    assert!(filled > nv / 100);
    let fi = fill::Params {
        method: fill::Method::Inpaint,
        ..fill::Params::default()
    };
    let mut a3: Vec<Field> = a.iter().take(8).cloned().collect();
    time("fill: inpaint (30 iterations)", N * N * 8, || {
        a3.iter_mut()
            .map(|f| fill::fill(&fi, f).replaced)
            .sum::<usize>()
    });
}
