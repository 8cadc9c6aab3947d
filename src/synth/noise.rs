//! Structured measurement noise: spatially correlated as overlapping
//! interrogation windows make it, and correlated in time as a
//! time-resolved camera sees it.
//!
//! Owns: unit-variance noise fields of one frame for the options
//! `noise_window` (box filter over sub-cells) and `noise_memory` (AR(1) in
//! time). Does not own: the white noise and the neighbour-correlation model
//! of `corrupt` (kept there so that old campaigns keep their bytes), the
//! scale (`corrupt` multiplies by the noise sigma) or the fate of a node.
//!
//! # Window noise (`noise_window = m >= 2`)
//!
//! Model: a PIV vector is the average displacement over its interrogation
//! window; with windows of side `W` at a spacing `h = W (1 - overlap)` the
//! window covers `m = 1 / (1 - overlap)` sub-cells of side `h` along each
//! axis (m = 2 at 50 %, m = 4 at 75 % overlap). The error of a vector is
//! taken as the average of independent sub-cell errors over its window:
//! white N(0, 1) on a grid padded by `m - 1` cells, box-filtered with an
//! `m x m` kernel and multiplied by `1/m` (so the variance stays 1). The
//! correlation of vectors `l` nodes apart along an axis is then
//! `max(0, 1 - l/m)` (top-hat windows: 0.5 at lag 1 for 50 %; 0.75, 0.5,
//! 0.25 for 75 %), and the product of the two axes' factors off the axes
//! (the triangular autocorrelation of a top-hat window; common practice,
//! e.g. the window model of Foucaut & Stanislas 2002, from memory).
//!
//! # Noise memory (`noise_memory = a`, 0 < a < 1)
//!
//! The noise of frame `k` is a stationary AR(1) process in the frame
//! index: `e_k = a e_(k-1) + sqrt(1 - a²) s_k` with `s_k` independent
//! unit-variance spatial fields (white or window noise). It is made as the
//! truncated sum `e_k = sqrt(1 - a²) sum_(l=0..L) a^l s_(k-l)`, with `L`
//! the smallest lag where `a^L < 1e-3`; the missing variance is
//! `a^(2(L+1)) < 1e-6` (negligible) and every frame, the first included,
//! is a draw from the stationary process (the innovations before frame 0
//! have their own streams). The lag-`l` correlation in time is `a^l`; the
//! integral time scale gives `N/N_eff = (1 + a)/(1 - a)` for long records
//! (Bayley & Hammersley 1946; common practice).
//!
//! Each innovation `s_j` (j counted from `-L`) is drawn from its own
//! ChaCha8 stream, so frames can be made in any order.

use ndarray::Array2;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

use super::SynthOptions;

/// Number of past innovations that enter a frame's AR(1) noise (0 without
/// memory): the smallest `L` with `a^L < 1e-3`.
pub(crate) fn memory_lags(a: f64) -> usize {
    if a <= 0.0 {
        0
    } else {
        ((1e-3f64).ln() / a.ln()).ceil() as usize
    }
}

/// The window of an interrogation-window overlap: `m = 1/(1 - overlap)`
/// sub-cells per axis (0 for no overlap). Only overlaps giving a whole `m`
/// (0, 0.5, 2/3, 0.75, ...) are accepted.
pub fn window_of_overlap(overlap: f64) -> crate::Result<usize> {
    if overlap == 0.0 {
        return Ok(0);
    }
    let m = 1.0 / (1.0 - overlap);
    if !(0.0..0.95).contains(&overlap) || (m - m.round()).abs() > 1e-6 {
        return Err(crate::Error::usage(format!(
            "noise overlap = {overlap} must be 0 or 1 - 1/m for a whole m from 2 to 16 (0.5, 0.75, ...)"
        )));
    }
    Ok(m.round() as usize)
}

/// True when `noise_fields` (not `corrupt`'s own draws) makes the noise.
pub(crate) fn structured(opts: &SynthOptions) -> bool {
    opts.noise_window >= 2 || opts.noise_memory > 0.0
}

/// White N(0, 1) values on `(ny, nx)` from the stream of innovation
/// `index` (shifted by `L` so that it is never negative) of `run`.
fn white(seed: u64, run: usize, index: usize, comp: u64, sh: (usize, usize)) -> Array2<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed ^ 0x5eed_0fa1);
    rng.set_stream((comp << 62) | ((run as u64) << 32) | index as u64);
    Array2::from_shape_simple_fn(sh, || StandardNormal.sample(&mut rng))
}

/// The `m x m` box average of `w` (shape `(ny + m - 1, nx + m - 1)`) times
/// `1/m`: unit variance when `w` is white with unit variance. `m = 1`
/// returns `w` unchanged. Separable: row sums, then column sums.
pub(crate) fn box_filter(w: &Array2<f64>, m: usize) -> Array2<f64> {
    if m <= 1 {
        return w.clone();
    }
    let (py, px) = w.dim();
    let (ny, nx) = (py + 1 - m, px + 1 - m);
    let mut hx = Array2::zeros((py, nx));
    for j in 0..py {
        for i in 0..nx {
            hx[[j, i]] = (0..m).map(|d| w[[j, i + d]]).sum::<f64>();
        }
    }
    Array2::from_shape_fn((ny, nx), |(j, i)| {
        (0..m).map(|d| hx[[j + d, i]]).sum::<f64>() / m as f64
    })
}

/// Unit-variance noise of the u and v components of frame `frame` of run
/// `run`, `(ny, nx)`, with the spatial and temporal structure of `opts`
/// (module doc).
pub(crate) fn noise_fields(
    opts: &SynthOptions,
    run: usize,
    frame: usize,
    ny: usize,
    nx: usize,
) -> (Array2<f64>, Array2<f64>) {
    let m = opts.noise_window.max(1);
    let a = opts.noise_memory;
    let lags = memory_lags(a);
    let sh = (ny + m - 1, nx + m - 1);
    let scale = (1.0 - a * a).sqrt();
    let comp = |c: u64| {
        let mut acc = Array2::<f64>::zeros(sh);
        let mut w = if lags == 0 { 1.0 } else { scale };
        // innovation of frame j has index j + lags (never negative)
        for l in 0..=lags {
            let idx = frame + lags - l;
            acc.scaled_add(w, &white(opts.seed, run, idx, c, sh));
            w *= a;
        }
        box_filter(&acc, m)
    };
    (comp(1), comp(2))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn opts(m: usize, a: f64) -> SynthOptions {
        SynthOptions {
            noise_window: m,
            noise_memory: a,
            seed: 9,
            ..SynthOptions::default()
        }
    }

    /// Correlation of `f` with itself shifted by `(dj, di)`, over nodes.
    fn corr(fs: &[Array2<f64>], dj: usize, di: usize) -> f64 {
        let (mut s, mut n) = (0.0, 0.0);
        for f in fs {
            let (ny, nx) = f.dim();
            for j in 0..ny - dj {
                for i in 0..nx - di {
                    s += f[[j, i]] * f[[j + dj, i + di]];
                    n += 1.0;
                }
            }
        }
        s / n
    }

    #[test]
    fn window_noise_has_the_top_hat_correlation() {
        // top-hat windows (module doc): rho(l) = 1 - l/m along an axis,
        // the product off the axes; 30 fields of 40 x 40 nodes (48 000
        // samples, sampling sd of a correlation ~0.005-0.02 with the
        // neighbour correlation; tolerance 0.04)
        for m in [2usize, 4] {
            let o = opts(m, 0.0);
            let fs: Vec<_> = (0..30).map(|k| noise_fields(&o, 0, k, 40, 40).0).collect();
            let var = corr(&fs, 0, 0);
            assert!((var - 1.0).abs() < 0.05, "m {m}: variance {var}");
            for (dj, di) in [(0, 1), (1, 0), (0, 2), (1, 1), (0, 4)] {
                let want =
                    (1.0 - di as f64 / m as f64).max(0.0) * (1.0 - dj as f64 / m as f64).max(0.0);
                let got = corr(&fs, dj, di) / var;
                assert!(
                    (got - want).abs() < 0.04,
                    "m {m}, lag ({dj},{di}): {got:.3} vs {want:.3}"
                );
            }
        }
    }

    #[test]
    fn noise_memory_is_ar1_in_time_and_stationary() {
        // AR(1): corr(e_k, e_(k+l)) = a^l, unit variance from frame 0 on
        let a = 0.9;
        let o = opts(1, a);
        let frames: Vec<_> = (0..40).map(|k| noise_fields(&o, 1, k, 20, 20).0).collect();
        let lag = |l: usize| {
            let (mut s, mut n) = (0.0, 0.0);
            for k in 0..frames.len() - l {
                s += (&frames[k] * &frames[k + l]).sum();
                n += 400.0;
            }
            s / n
        };
        // 16 000 samples per lag but strongly correlated in time: tolerance 0.1
        let v0 = lag(0);
        assert!((v0 - 1.0).abs() < 0.1, "variance {v0}");
        for l in [1usize, 3] {
            let got = lag(l) / v0;
            assert!((got - a.powi(l as i32)).abs() < 0.1, "lag {l}: {got}");
        }
        // the first frame alone has unit variance (stationary start)
        let f0 = (&frames[0] * &frames[0]).sum() / 400.0;
        assert!((f0 - 1.0).abs() < 0.2, "frame 0 variance {f0}");
        // independent of the order frames are made in
        assert_eq!(noise_fields(&o, 1, 7, 20, 20).0, frames[7]);
        assert_eq!(memory_lags(0.5), 10);
        assert_eq!(memory_lags(0.9), 66);
    }
}
