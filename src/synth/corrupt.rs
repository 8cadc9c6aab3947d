//! Measurement errors: Gaussian noise, outliers and gaps, seeded per frame.
//!
//! Owns: the random part of a synthetic frame. Each frame has its own
//! ChaCha8 stream (`seed`, stream = `run << 32 | frame`), so frames can be
//! made in any order or in parallel and still give the same values.
//!
//! For every node, in node order (`j` outer, `i` inner), one uniform draw
//! decides its fate: with probability `gap_fraction` a gap, with
//! probability `outlier_fraction` an outlier, else a measurement with
//! noise. Then:
//! - noise: `u + N(0, sigma)`, `v + N(0, sigma)` with `sigma = noise_px`
//!   pixels of displacement in m/s; independent between nodes, or, with
//!   `noise_correlation = rho > 0`, correlated between neighbours (see
//!   `correlated_noise`; drawn from a second stream of the frame), or
//!   with `noise_window` or `noise_memory` made by `noise::noise_fields`
//!   (window-averaged in space, AR(1) in time);
//! - outlier: a vector of uniform random direction and magnitude uniform
//!   in `[0.5, outlier_scale] * max(|u_true|, 0.1 speed)`; it is written
//!   like any other vector (nothing in the file marks it);
//! - gap: a second draw makes it a missing row or a row with empty `u` and
//!   `v` cells, with equal odds; with a flag column, a third kind joins with
//!   equal odds: a flagged row (a noisy value written, `flag = 1`). A node on
//!   the edge of the grid is never a missing row (it becomes an empty one)
//!   so that the grid a reader infers from the rows is always the whole grid.
//!
//! Nodes inside a body are absent rows and are not events.

use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

use super::scenario::{RunSetup, TruthFrame};
use super::SynthOptions;

/// What happened to one node of one frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[repr(u8)]
pub enum Kind {
    /// Measured with noise.
    Measured = 0,
    /// Replaced by a random vector.
    Outlier = 1,
    /// The node's row is absent from the frame file.
    Missing = 2,
    /// The node's row is present with empty `u` and `v` cells.
    Empty = 3,
    /// Inside a body: absent, and not an event.
    Body = 4,
    /// The row carries a value but a nonzero `flag` (only with a flag column).
    Flagged = 5,
}

impl Kind {
    pub(crate) fn from_code(c: u8) -> Kind {
        match c {
            0 => Kind::Measured,
            1 => Kind::Outlier,
            2 => Kind::Missing,
            3 => Kind::Empty,
            5 => Kind::Flagged,
            _ => Kind::Body,
        }
    }
    /// The name written in the events table.
    pub(crate) fn name(self) -> &'static str {
        match self {
            Kind::Measured => "measured",
            Kind::Outlier => "outlier",
            Kind::Missing => "missing",
            Kind::Empty => "empty",
            Kind::Body => "body",
            Kind::Flagged => "flagged",
        }
    }
    /// True for nodes a reader must treat as invalid input (no value, or
    /// flagged).
    pub(crate) fn is_gap(self) -> bool {
        matches!(
            self,
            Kind::Missing | Kind::Empty | Kind::Body | Kind::Flagged
        )
    }
}

/// The measured values (SI; NaN where the file has no value; flagged rows
/// keep the value they are written with) and each node's `Kind` code.
#[derive(Debug, Clone)]
pub(crate) struct Measured {
    pub u: Array2<f64>,
    pub v: Array2<f64>,
    pub kind: Array2<u8>,
}

/// The generator of frame `frame` of run number `run`.
pub(crate) fn frame_rng(seed: u64, run: usize, frame: usize) -> ChaCha8Rng {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    r.set_stream(((run as u64) << 32) | frame as u64);
    r
}

/// Applies noise, outliers and gaps to a noise-free frame (see the module
/// doc for the exact procedure).
pub(crate) fn corrupt(
    opts: &SynthOptions,
    setup: &RunSetup,
    truth: &TruthFrame,
    run: usize,
    frame: usize,
) -> Measured {
    let mut rng = frame_rng(opts.seed, run, frame);
    let (ny, nx) = truth.u.dim();
    let mut m = Measured {
        u: truth.u.clone(),
        v: truth.v.clone(),
        kind: Array2::zeros((ny, nx)),
    };
    let sigma = setup.noise_sigma;
    let floor = 0.1 * setup.speed;
    let corr = if super::noise::structured(opts) {
        Some(super::noise::noise_fields(opts, run, frame, ny, nx))
    } else {
        (opts.noise_correlation > 0.0)
            .then(|| correlated_noise(opts.seed, run, frame, ny, nx, opts.noise_correlation))
    };
    let noise = |rng: &mut ChaCha8Rng, j: usize, i: usize| -> (f64, f64) {
        match &corr {
            None => (StandardNormal.sample(rng), StandardNormal.sample(rng)),
            Some((a, b)) => (a[[j, i]], b[[j, i]]),
        }
    };
    for j in 0..ny {
        for i in 0..nx {
            if truth.body[[j, i]] {
                m.kind[[j, i]] = Kind::Body as u8;
                continue;
            }
            let p: f64 = rng.random();
            if p < opts.gap_fraction {
                let edge = i == 0 || j == 0 || i + 1 == nx || j + 1 == ny;
                let kinds: &[Kind] = if opts.flag_column {
                    &[Kind::Missing, Kind::Empty, Kind::Flagged]
                } else {
                    &[Kind::Missing, Kind::Empty]
                };
                let mut k = kinds[rng.random_range(0..kinds.len())];
                if k == Kind::Missing && edge {
                    k = Kind::Empty;
                }
                m.kind[[j, i]] = k as u8;
                if k == Kind::Flagged {
                    let (nu, nv) = noise(&mut rng, j, i);
                    m.u[[j, i]] += sigma * nu;
                    m.v[[j, i]] += sigma * nv;
                } else {
                    m.u[[j, i]] = f64::NAN;
                    m.v[[j, i]] = f64::NAN;
                }
            } else if p < opts.gap_fraction + opts.outlier_fraction {
                let local = truth.u[[j, i]].hypot(truth.v[[j, i]]).max(floor);
                let mag = local * (0.5 + (opts.outlier_scale - 0.5) * rng.random::<f64>());
                let ang = std::f64::consts::TAU * rng.random::<f64>();
                m.u[[j, i]] = mag * ang.cos();
                m.v[[j, i]] = mag * ang.sin();
                m.kind[[j, i]] = Kind::Outlier as u8;
            } else {
                let (nu, nv) = noise(&mut rng, j, i);
                m.u[[j, i]] += sigma * nu;
                m.v[[j, i]] += sigma * nv;
            }
        }
    }
    m
}

/// The largest neighbour correlation `correlated_noise` can make.
pub(crate) const MAX_NOISE_CORRELATION: f64 = std::f64::consts::FRAC_1_SQRT_2;

/// Two unit-variance Gaussian fields `(ny, nx)` whose values at x- or
/// y-adjacent nodes have correlation coefficient `rho` (0 < rho <= 1/sqrt 2).
///
/// Method: white N(0, 1) noise on a grid padded by one node on every side
/// (so that edge nodes are like interior ones) is filtered with the
/// separable kernel `[a, 1, a] x [a, 1, a]` and divided by `1 + 2a²` (the
/// kernel's norm per axis). The lag-one autocorrelation per axis of
/// `[a, 1, a]` is `2a / (1 + 2a²)` (sum of the kernel's overlapping
/// products over their sum of squares; common practice), so
/// `a = (1 - sqrt(1 - 2 rho²)) / (2 rho)`. Diagonal neighbours then have
/// correlation `rho²`, and nodes two or more apart along an axis are
/// uncorrelated (apart from `rho²`-order terms at lag two: `a² / (1+2a²)`
/// per axis). Drawn from stream `frame_rng(..) | 1 << 63`.
pub(crate) fn correlated_noise(
    seed: u64,
    run: usize,
    frame: usize,
    ny: usize,
    nx: usize,
    rho: f64,
) -> (Array2<f64>, Array2<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream((1u64 << 63) | ((run as u64) << 32) | frame as u64);
    let rho = rho.min(MAX_NOISE_CORRELATION);
    let a = (1.0 - (1.0 - 2.0 * rho * rho).max(0.0).sqrt()) / (2.0 * rho);
    let norm = 1.0 + 2.0 * a * a;
    let mut field = || {
        let w: Array2<f64> =
            Array2::from_shape_simple_fn((ny + 2, nx + 2), || StandardNormal.sample(&mut rng));
        // along x, then along y
        let mut hx = Array2::zeros((ny + 2, nx));
        for j in 0..ny + 2 {
            for i in 0..nx {
                hx[[j, i]] = a * w[[j, i]] + w[[j, i + 1]] + a * w[[j, i + 2]];
            }
        }
        let mut out = Array2::zeros((ny, nx));
        for j in 0..ny {
            for i in 0..nx {
                out[[j, i]] = (a * hx[[j, i]] + hx[[j + 1, i]] + a * hx[[j + 2, i]]) / norm;
            }
        }
        out
    };
    let fu = field();
    let fv = field();
    (fu, fv)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn correlated_noise_has_unit_variance_and_the_asked_neighbour_correlation() {
        // statistics over 40 frames of 60 x 50 nodes: 120 000 samples;
        // sampling standard deviation of a correlation ~ 1/sqrt(n) = 0.003
        let rho = 0.45;
        let (mut s0, mut sx, mut sy, mut sd, mut s2) = (0.0, 0.0, 0.0, 0.0, 0.0);
        let (mut n0, mut nx_, mut ny_, mut nd, mut n2) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for f in 0..40 {
            let (u, _) = correlated_noise(5, 0, f, 50, 60, rho);
            for j in 0..50 {
                for i in 0..60 {
                    s0 += u[[j, i]] * u[[j, i]];
                    n0 += 1.0;
                    if i + 1 < 60 {
                        sx += u[[j, i]] * u[[j, i + 1]];
                        nx_ += 1.0;
                    }
                    if j + 1 < 50 {
                        sy += u[[j, i]] * u[[j + 1, i]];
                        ny_ += 1.0;
                    }
                    if i + 1 < 60 && j + 1 < 50 {
                        sd += u[[j, i]] * u[[j + 1, i + 1]];
                        nd += 1.0;
                    }
                    if i + 3 < 60 {
                        s2 += u[[j, i]] * u[[j, i + 3]];
                        n2 += 1.0;
                    }
                }
            }
        }
        let var = s0 / n0;
        assert!((var - 1.0).abs() < 0.02, "variance {var}");
        for (name, got, want) in [
            ("x", sx / nx_, rho),
            ("y", sy / ny_, rho),
            ("diagonal", sd / nd, rho * rho),
            ("lag 3", s2 / n2, 0.0),
        ] {
            assert!(
                (got / var - want).abs() < 0.015,
                "{name}: {} vs {want}",
                got / var
            );
        }
    }
}
