//! The random error of the vectors of one snapshot, estimated from the data:
//! its level (`estimate`) and its spatial correlation (`estimate_overlap`).
//!
//! Owns: both estimators. Does not own: how they are used (`derive`).
//!
//! # Level
//!
//! The residual at the centre of a least-squares cubic fitted to
//! five consecutive vectors along a row or a column is
//! `r = (3/35) (f-2 - 4 f-1 + 6 f0 - 4 f1 + f2)` (derived from the
//! Savitzky-Golay smoothing weights (-3, 12, 17, 12, -3)/35), proportional to
//! the fourth difference `D4 = f-2 - 4 f-1 + 6 f0 - 4 f1 + f2`. A smooth flow
//! contributes `h^4 f''''` to it, which is small wherever the flow is
//! resolved; white noise of standard deviation `sigma` contributes variance
//! `70 sigma^2` (the fit's degrees of freedom: 1 + 16 + 36 + 16 + 1), or
//! `K sigma^2` with `K = sum_a sum_b w_a w_b rho(d_ab)` for correlated errors
//! (the correlation model in use: given, or `estimate_overlap`'s, so the
//! level and the correlation describe the same errors). Every row and
//! column position whose five vectors are all valid measurements (status 0)
//! gives one value per component; the estimate is robust against the few
//! large residuals at vortex cores and remaining outliers through the
//! median absolute value: `sigma = 1.4826 median(|D4|) / sqrt(K)` (1.4826 =
//! 1/Phi^-1(3/4), the MAD consistency constant for Gaussian errors, common
//! practice).
//!
//! # Correlation (`estimate_overlap`)
//!
//! Vectors from overlapping interrogation windows have correlated errors
//! (Sciacchitano & Wieneke 2016, from memory); a top-hat window overlapping
//! by the fraction `c` gives `rho(d) = max(0, 1 - (1 - c)|d|)` per axis
//! (derived; `Correlation::Window`). `c` is estimated from the data. The
//! high-pass residual `e = f0 - sum_k s_k f_k` of the 11-node least-squares
//! quartic (Savitzky-Golay weights `s = (18, -45, -10, 60, 120, 143, 120,
//! 60, -10, -45, 18)/429`, Savitzky & Golay 1964) removes the flow up to its
//! quintic terms and keeps most of the noise. Its autocorrelation at lags
//! 1 to 4 along a row (or column) is, for the window model,
//! `R(L; c) = C(L)/C(0)` with `C(L) = sum_a sum_b w_a w_b rho(L + a - b)`,
//! `w = delta - s` (GUM eq. 13 applied to a pair of residuals, derived).
//! The measured lag correlations use the robust estimator of Gnanadesikan
//! & Kettenring (1972, from memory), `R = (S+^2 - S-^2)/(S+^2 + S-^2)` with
//! `S+-` the median absolute values of `e_k + e_k+L` and `e_k - e_k+L`, so
//! a vortex core or an outlier does not dominate. Over the grid c = 0,
//! 0.025, ..., 0.9 the misfit `sum_L (R_measured - R(L; c))^2` is computed,
//! and the smallest c whose misfit is within `PARSIMONY / pairs` of the
//! least (the sampling noise of four lag correlations) is taken: `R(L; c)`
//! is not monotonic in c above 0.5, and a flow that leaks into the
//! residual (a vortex core on a small grid) can otherwise make white noise
//! look like strong overlap. The 9-node quadratic residual and lags 1-3
//! were tried first: on a 32 x 32 grid with a core of 3 pitches they read
//! white noise as c = 0.775 in 3 of 100 frames; this choice did not in
//! 100 (numpy prototype, recorded in the commit). The grid keeps the
//! number of distinct models in a run small (the stencil caches key on the
//! model). Both components and both axes are pooled; at most about
//! `MAX_PAIRS` pairs per lag are used (every k-th, a fixed deterministic
//! subsample). A field without measurable residual (below 1e-9 of the
//! largest velocity) gives `None`. Checked by Monte Carlo on box-filtered
//! noise (tests below).
//!
//! Edge behaviour: replaced, filled and masked vectors never enter (they are
//! smooth by construction and would bias the estimate low). With fewer than
//! `MIN_SAMPLES` values the level is `None`; with fewer than `MIN_PAIRS`
//! residual pairs per lag the correlation is `None`.

use ndarray::Array2;

use crate::field::{Field, VALID};
use crate::stencil::correlation::Correlation;
use crate::stencil::{Stencil, Tap};

/// The fewest fourth differences an estimate is made from.
pub(crate) const MIN_SAMPLES: usize = 20;

const D4: [f64; 5] = [1.0, -4.0, 6.0, -4.0, 1.0];

/// The random error (m/s, one value for both components) of the valid
/// vectors of `field`, or `None` when too few runs of five valid vectors
/// exist.
pub(crate) fn estimate(field: &Field, corr: &Correlation) -> Option<f64> {
    let (ny, nx) = field.status.dim();
    let u = field.u.as_standard_layout();
    let v = field.v.as_standard_layout();
    let (u, v) = (u.as_slice().unwrap(), v.as_slice().unwrap());
    let valid: Vec<bool> = field
        .status
        .iter()
        .zip(u.iter().zip(v))
        .map(|(&s, (a, b))| s == VALID && a.is_finite() && b.is_finite())
        .collect();
    // |D4| as the bits of a non-negative double: they order as the values
    // do, so the median selection compares integers (crate::robust).
    let mut r: Vec<u64> = Vec::with_capacity(4 * ny * nx);
    let d4 = |a: &[f64], k: usize, step: usize| {
        (a[k] - 4.0 * a[k + step] + 6.0 * a[k + 2 * step] - 4.0 * a[k + 3 * step] + a[k + 4 * step])
            .abs()
            .to_bits()
    };
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            if i + 4 < nx && valid[k..k + 5].iter().all(|&b| b) {
                r.push(d4(u, k, 1));
                r.push(d4(v, k, 1));
            }
            if j + 4 < ny && (0..5).all(|m| valid[k + m * nx]) {
                r.push(d4(u, k, nx));
                r.push(d4(v, k, nx));
            }
        }
    }
    if r.len() < MIN_SAMPLES {
        return None;
    }
    let med = crate::robust::median_of_nonnegative_bits(&mut r);
    let d4 = Stencil::new(
        D4.iter()
            .enumerate()
            .map(|(k, &w)| Tap {
                dj: 0,
                di: k as i32 - 2,
                w,
            })
            .collect(),
    );
    Some(crate::robust::MAD_TO_SIGMA * med / corr.gain(&d4).sqrt())
}

/// The fewest residual pairs per lag a correlation estimate is made from.
pub(crate) const MIN_PAIRS: usize = 200;
/// About the most residual pairs per lag used (a fixed subsample beyond).
pub(crate) const MAX_PAIRS: usize = 40_000;
/// The grid of overlap fractions the estimate is chosen from.
const C_STEP: f64 = 0.025;
const C_MAX: f64 = 0.9;
/// The misfit tolerance of the choice, in units of 1/pairs (module docs).
const PARSIMONY: f64 = 10.0;
/// Savitzky-Golay 11-node quartic smoothing weights x 429.
const SG11: [f64; 11] = [
    18.0, -45.0, -10.0, 60.0, 120.0, 143.0, 120.0, 60.0, -10.0, -45.0, 18.0,
];
const HALF: usize = 5;
const LAGS: usize = 4;

/// The high-pass residual weights `delta - s` of the module docs.
fn residual_weights() -> [f64; 11] {
    let mut w = SG11.map(|s| -s / 429.0);
    w[HALF] += 1.0;
    w
}

/// `R(L; c)` for L = 1..=LAGS under the window model (module docs).
fn model_lags(c: f64) -> [f64; LAGS] {
    let w = residual_weights();
    let corr = Correlation::Window(c);
    let cov = |l: i32| -> f64 {
        let mut s = 0.0;
        for (a, wa) in w.iter().enumerate() {
            for (b, wb) in w.iter().enumerate() {
                s += wa * wb * corr.rho(0, l + a as i32 - b as i32);
            }
        }
        s
    };
    let c0 = cov(0);
    std::array::from_fn(|k| cov(k as i32 + 1) / c0)
}

/// The robust lag correlation of Gnanadesikan & Kettenring from the
/// absolute sums and differences (module docs); reorders its inputs.
fn robust_correlation(sum: &mut [f64], diff: &mut [f64]) -> f64 {
    let med = |a: &mut [f64]| {
        let m = a.len() / 2;
        *a.select_nth_unstable_by(m, f64::total_cmp).1
    };
    let (p, q) = (med(sum).powi(2), med(diff).powi(2));
    if p + q > 0.0 {
        (p - q) / (p + q)
    } else {
        0.0
    }
}

/// The overlap fraction `c` of the window correlation model estimated from
/// the valid vectors of `field` (module docs), on the grid 0, 0.025, ...,
/// 0.9; `None` with fewer than `MIN_PAIRS` residual pairs at some lag.
///
/// Steps: the high-pass residual along every row and column
/// (`residual_lines`), a check that there is noise to correlate
/// (`has_measurable_noise`), the robust correlation at lags 1..LAGS
/// (`lag_correlations`), the model fit (`best_overlap`).
pub(crate) fn estimate_overlap(field: &Field) -> Option<f64> {
    let lines = residual_lines(field);
    if !has_measurable_noise(&lines, field) {
        return None;
    }
    let (measured, n_pairs) = lag_correlations(&lines)?;
    best_overlap(&measured, n_pairs)
}

/// The residual (`residual_weights`, centred on each node) along x per
/// row and along y per column, for u and v; NaN where the residual's
/// reach leaves the grid or meets a vector that is not valid.
fn residual_lines(field: &Field) -> Vec<Vec<f64>> {
    let (ny, nx) = field.status.dim();
    let valid = Array2::from_shape_fn((ny, nx), |ix| {
        field.status[ix] == VALID && field.u[ix].is_finite() && field.v[ix].is_finite()
    });
    let w = residual_weights();
    let mut lines: Vec<Vec<f64>> = Vec::new();
    for a in [&field.u, &field.v] {
        for (len, n_lines, at) in [
            (
                nx,
                ny,
                &(|l: usize, k: usize| (l, k)) as &dyn Fn(usize, usize) -> (usize, usize),
            ),
            (ny, nx, &|l: usize, k: usize| (k, l)),
        ] {
            for l in 0..n_lines {
                let line: Vec<f64> = (0..len)
                    .map(|k| {
                        if k < HALF || k + HALF >= len {
                            return f64::NAN;
                        }
                        let mut s = 0.0;
                        for (t, wt) in w.iter().enumerate() {
                            let ix = at(l, k + t - HALF);
                            if !valid[ix] {
                                return f64::NAN;
                            }
                            s += wt * a[ix];
                        }
                        s
                    })
                    .collect();
                lines.push(line);
            }
        }
    }
    lines
}

/// Whether the residuals hold measurable noise: a synthetic field without
/// errors has residuals at rounding level (below 1e-9 of the largest
/// velocity), and there is nothing to correlate.
fn has_measurable_noise(lines: &[Vec<f64>], field: &Field) -> bool {
    let scale = lines
        .iter()
        .flatten()
        .filter(|x| x.is_finite())
        .fold(0.0f64, |m, x| m.max(x.abs()));
    let level = field
        .u
        .iter()
        .chain(field.v.iter())
        .filter(|x| x.is_finite())
        .fold(0.0f64, |m, x| m.max(x.abs()));
    scale > 1e-9 * level
}

/// The robust correlation (`robust_correlation`) of the residuals at lags
/// 1..=LAGS along the lines, from at most `MAX_PAIRS` pairs per lag taken
/// at an even stride, with the fewest pairs any lag had; `None` when a
/// lag has fewer than `MIN_PAIRS`.
fn lag_correlations(lines: &[Vec<f64>]) -> Option<([f64; LAGS], usize)> {
    let mut measured = [0.0; LAGS];
    let mut n_pairs = usize::MAX;
    for (m, lag) in measured.iter_mut().zip(1..=LAGS) {
        let total: usize = lines.iter().map(|l| l.len().saturating_sub(lag)).sum();
        let stride = (total / MAX_PAIRS).max(1);
        let (mut sum, mut diff) = (Vec::new(), Vec::new());
        let mut n = 0usize;
        for l in lines {
            for k in 0..l.len().saturating_sub(lag) {
                let (a, b) = (l[k], l[k + lag]);
                if a.is_finite() && b.is_finite() {
                    if n % stride == 0 {
                        sum.push((a + b).abs());
                        diff.push((a - b).abs());
                    }
                    n += 1;
                }
            }
        }
        if sum.len() < MIN_PAIRS {
            return None;
        }
        n_pairs = n_pairs.min(sum.len());
        *m = robust_correlation(&mut sum, &mut diff);
    }
    Some((measured, n_pairs))
}

/// The overlap whose model lags (`model_lags`) fit the measured ones:
/// least squares over the grid 0, C_STEP, ..., C_MAX, then the smallest c
/// whose misfit is within the sampling noise of the best (PARSIMONY /
/// pairs: the variance of a lag correlation is about 1/pairs, four lags),
/// so that white noise next to a vortex is not read as strong overlap.
fn best_overlap(measured: &[f64; LAGS], n_pairs: usize) -> Option<f64> {
    let steps = (C_MAX / C_STEP).round() as usize;
    let cost: Vec<f64> = (0..=steps)
        .map(|k| {
            let r = model_lags(k as f64 * C_STEP);
            r.iter().zip(measured).map(|(a, b)| (a - b).powi(2)).sum()
        })
        .collect();
    let best = cost.iter().copied().fold(f64::INFINITY, f64::min);
    let tol = PARSIMONY / n_pairs as f64;
    let k = cost.iter().position(|&c| c <= best + tol)?;
    Some(k as f64 * C_STEP)
}

/// A cruder level for fields too small for `estimate`: `1.4826
/// median(|f_k+1 - f_k|) / sqrt(2)` over pairs of adjacent valid vectors
/// along rows and columns, both components (white errors and a flow that
/// changes little from node to node assumed; the flow's own differences
/// make it an overestimate). `None` without any such pair.
pub(crate) fn estimate_pairs(field: &Field) -> Option<f64> {
    let (ny, nx) = field.status.dim();
    let ok = |j: usize, i: usize| {
        field.status[[j, i]] == VALID && field.u[[j, i]].is_finite() && field.v[[j, i]].is_finite()
    };
    let mut d = Vec::new();
    for j in 0..ny {
        for i in 0..nx {
            if !ok(j, i) {
                continue;
            }
            for (jj, ii) in [(j, i + 1), (j + 1, i)] {
                if jj < ny && ii < nx && ok(jj, ii) {
                    d.push((field.u[[jj, ii]] - field.u[[j, i]]).abs());
                    d.push((field.v[[jj, ii]] - field.v[[j, i]]).abs());
                }
            }
        }
    }
    if d.is_empty() {
        return None;
    }
    let m = d.len() / 2;
    let med = *d.select_nth_unstable_by(m, f64::total_cmp).1;
    Some(1.482_602_218_505_602 * med / std::f64::consts::SQRT_2)
}

/// Sets the per-vector uncertainty of every filled vector from the fill's
/// weights (`fill` module docs; GUM, JCGM 100:2008, eq. 13):
/// `sig^2 = sum_a sum_b W_a W_b rho(d_ab) sig_a sig_b + max(0, delta^2 -
/// u(delta)^2)`, with `sig_a` the uncertainty of valid vector `a` (already
/// in `sig`), `rho` the frame's correlation model, `delta` the fill's
/// model-error estimate (the field's sigma at the node, set by `fill`) and
/// `u(delta)^2` its noise variance through its own stencil (the same
/// double sum); the floored difference is the usual debiasing of a squared
/// estimate. Unknown stays unknown: a filled node without a model-error
/// estimate gets NaN. Nodes without a value (`ok` false) and fields
/// without fill weights are left alone.
pub(crate) fn through_fill(
    field: &Field,
    ok: &Array2<bool>,
    corr: &Correlation,
    sig: [&mut Array2<f64>; 2],
) {
    let nx = field.status.dim().1;
    let [su, sv] = sig;
    let var = |w: &[(usize, f64)], s: &Array2<f64>| {
        let mut v = 0.0;
        for &(a, wa) in w {
            let ea = wa * s[[a / nx, a % nx]];
            for &(b, wb) in w {
                let r = corr.rho(
                    (b / nx) as i32 - (a / nx) as i32,
                    (b % nx) as i32 - (a % nx) as i32,
                );
                if r != 0.0 {
                    v += ea * wb * s[[b / nx, b % nx]] * r;
                }
            }
        }
        v
    };
    for rec in &field.fill_weights {
        let (j, i) = (rec.node / nx, rec.node % nx);
        if !ok[[j, i]] || field.status[[j, i]] == VALID {
            continue;
        }
        for (s, delta) in [
            (&mut *su, field.sigma_u[[j, i]]),
            (&mut *sv, field.sigma_v[[j, i]]),
        ] {
            let model = if rec.model.is_empty() || delta.is_nan() {
                f64::NAN
            } else {
                (delta * delta - var(&rec.model, s)).max(0.0)
            };
            let noise = var(&rec.weights, s);
            s[[j, i]] = if model.is_nan() {
                f64::NAN
            } else {
                (noise + model).sqrt()
            };
        }
    }
}

/// The correlation model of an overlap fraction: `Independent` for 0.
pub(crate) fn overlap_model(c: f64) -> Correlation {
    if c > 0.0 {
        Correlation::Window(c)
    } else {
        Correlation::Independent
    }
}

#[cfg(test)]
pub(crate) mod tests;
