//! Penalized least squares on a grid, solved in the DCT basis (Garcia 2010,
//! Comput. Stat. Data Anal. 54:1167; steps from memory, eigenvalues derived,
//! as in docs/methods.md). One solver serves smoothing (`Smoother::Pls`) and gap
//! filling (`fill::Method::Inpaint`).
//!
//! # Method
//!
//! The smooth `z` of data `y` (weights `w`, 0 at gaps) minimises
//! `||sqrt(w)(z - y)||^2 + s ||D z||^2` with D the second-difference
//! operator with reflecting ends. D^T D is diagonal in the DCT-II basis with
//! eigenvalues `L^2`, `L = sum_j (-2 + 2 cos(k_j pi / n_j))` (k_j = 0 ..
//! n_j - 1), so with all weights 1
//!
//! ```text
//! z = IDCT(G . DCT(y)),   G = 1 / (1 + s L^2)
//! ```
//!
//! and a constant passes unchanged (G = 1 at k = 0, the only nonzero
//! coefficient). With weights the solution is the fixed point of
//! `z <- IDCT(G . DCT(w (y - z) + z))`, iterated with over-relaxation 1.75
//! from a neighbour-mean start until the relative change is below 1e-6
//! (at most 200 iterations).
//!
//! `s` is chosen, when not given, by generalised cross-validation
//! `GCV(s) = (RSS/n_w) / (1 - tr(H)/n)^2`, `tr(H) = sum G`, searched over
//! log10 s in [-3, 10] (the leverage bounds 0.99 .. 1e-6 of Garcia's code,
//! from memory) by a coarse scan (step 0.25) and a golden-section refinement.
//! With all weights 1 the RSS is evaluated in the DCT domain (Parseval,
//! orthonormal transforms), so the search costs O(n) per trial; with gaps
//! it costs one inverse transform per trial, and `s` is re-chosen at
//! iterations 0, 1, 2, 4, 8, ... of the weighted iteration.
//!
//! Robust mode (bisquare weights against outliers): three outer passes; the
//! residuals `r = y - z` at weighted nodes are studentised by `1.4826 MAD`
//! and the leverage `h = (sqrt(1 + sqrt(1 + 16 s)) / (sqrt 2 sqrt(1 + 16 s)))^2`
//! (2-D), `u = |r| / (1.4826 MAD sqrt(1 - h))`, `w = (1 - (u/4.685)^2)^2` for
//! u < 4.685 else 0 (Garcia 2010, from memory).
//!
//! Inpainting keeps the known values: with `s` falling logarithmically from
//! 1e3 to 1e-6 over the iterations (Garcia's inpainting scheme, from memory;
//! relaxation 2 as there), then known nodes are restored exactly.
//!
//! NaN: callers pass weight 0 (and any finite value) where data is missing;
//! a grid with no weighted node returns NaN everywhere.

use std::sync::Arc;

use rustdct::{DctPlanner, TransformType2And3};

/// Orthonormal 2-D DCT-II / DCT-III on row-major `(ny, nx)` buffers.
pub(crate) struct Dct2d {
    pub nx: usize,
    pub ny: usize,
    row: Arc<dyn TransformType2And3<f64>>,
    col: Arc<dyn TransformType2And3<f64>>,
}

impl Dct2d {
    pub(crate) fn new(ny: usize, nx: usize) -> Self {
        let mut p = DctPlanner::new();
        Dct2d {
            nx,
            ny,
            row: p.plan_dct2(nx.max(1)),
            col: p.plan_dct2(ny.max(1)),
        }
    }

    fn each_line(&self, a: &mut [f64], inverse: bool) {
        let (ny, nx) = (self.ny, self.nx);
        let mut scratch = vec![0.0; self.row.get_scratch_len().max(self.col.get_scratch_len())];
        for r in a.chunks_exact_mut(nx) {
            line(&*self.row, r, &mut scratch, inverse);
        }
        let mut buf = vec![0.0; ny];
        for i in 0..nx {
            for j in 0..ny {
                buf[j] = a[j * nx + i];
            }
            line(&*self.col, &mut buf, &mut scratch, inverse);
            for j in 0..ny {
                a[j * nx + i] = buf[j];
            }
        }
    }
    /// In-place orthonormal DCT-II (scipy.fft.dctn(type=2, norm="ortho")).
    pub(crate) fn forward(&self, a: &mut [f64]) {
        self.each_line(a, false)
    }
    /// In-place orthonormal inverse (DCT-III).
    pub(crate) fn inverse(&self, a: &mut [f64]) {
        self.each_line(a, true)
    }
}

fn line(t: &dyn TransformType2And3<f64>, x: &mut [f64], scratch: &mut [f64], inverse: bool) {
    let n = x.len();
    let sc = (2.0 / n as f64).sqrt();
    let sq = std::f64::consts::SQRT_2;
    if inverse {
        x[0] *= sq;
        t.process_dct3_with_scratch(x, &mut scratch[..t.get_scratch_len()]);
        x.iter_mut().for_each(|v| *v *= sc);
    } else {
        t.process_dct2_with_scratch(x, &mut scratch[..t.get_scratch_len()]);
        x.iter_mut().for_each(|v| *v *= sc);
        x[0] /= sq;
    }
}

/// Bounds of the GCV search over log10 s.
const LOG_S_MIN: f64 = -3.0;
const LOG_S_MAX: f64 = 10.0;

/// The PLS solver for one grid shape.
pub(crate) struct Pls {
    pub dct: Dct2d,
    /// L^2 per DCT coefficient (row-major).
    lambda2: Vec<f64>,
}

/// What a smoothing call returns.
#[derive(Debug, Clone)]
pub(crate) struct Smoothed {
    pub z: Vec<f64>,
    /// The smoothing parameter used (given or chosen by GCV).
    pub s: f64,
}

impl Pls {
    pub(crate) fn new(ny: usize, nx: usize) -> Self {
        let mut lambda2 = Vec::with_capacity(nx * ny);
        for kj in 0..ny {
            let ly = -2.0 + 2.0 * (kj as f64 * std::f64::consts::PI / ny as f64).cos();
            for ki in 0..nx {
                let lx = -2.0 + 2.0 * (ki as f64 * std::f64::consts::PI / nx as f64).cos();
                lambda2.push((lx + ly) * (lx + ly));
            }
        }
        Pls {
            dct: Dct2d::new(ny, nx),
            lambda2,
        }
    }

    fn n(&self) -> usize {
        self.lambda2.len()
    }

    /// `G = 1/(1 + s L^2)` into `g`; returns tr(H) = sum G.
    fn gamma(&self, s: f64, g: &mut Vec<f64>) -> f64 {
        g.clear();
        g.extend(self.lambda2.iter().map(|l| 1.0 / (1.0 + s * l)));
        g.iter().sum()
    }

    /// GCV score of full-weight data with orthonormal coefficients `c`.
    fn gcv_full(&self, c: &[f64], s: f64) -> f64 {
        let n = self.n() as f64;
        let (mut rss, mut tr) = (0.0, 0.0);
        for (ci, l) in c.iter().zip(&self.lambda2) {
            let g = 1.0 / (1.0 + s * l);
            tr += g;
            rss += ((1.0 - g) * ci).powi(2);
        }
        (rss / n) / (1.0 - tr / n).powi(2)
    }

    /// Minimises `f(log10 s)`: coarse scan then golden section.
    fn search(f: impl Fn(f64) -> f64) -> f64 {
        let step = 0.25;
        let mut best = (f64::INFINITY, LOG_S_MIN);
        let mut t = LOG_S_MIN;
        while t <= LOG_S_MAX + 1e-9 {
            let v = f(t);
            if v < best.0 {
                best = (v, t);
            }
            t += step;
        }
        let (mut a, mut b) = (best.1 - step, best.1 + step);
        let r = 0.5 * (5f64.sqrt() - 1.0);
        let (mut c, mut d) = (b - r * (b - a), a + r * (b - a));
        let (mut fc, mut fd) = (f(c), f(d));
        while b - a > 1e-3 {
            if fc < fd {
                b = d;
                d = c;
                fd = fc;
                c = b - r * (b - a);
                fc = f(c);
            } else {
                a = c;
                c = d;
                fc = fd;
                d = a + r * (b - a);
                fd = f(d);
            }
        }
        10f64.powf(0.5 * (a + b))
    }

    /// GCV-chosen s for full-weight data `y`.
    pub(crate) fn gcv_s(&self, y: &[f64]) -> f64 {
        let mut c = y.to_vec();
        self.dct.forward(&mut c);
        Self::search(|t| self.gcv_full(&c, 10f64.powf(t)))
    }

    /// GCV-chosen s shared by several full-weight components (u and v):
    /// the sum of their GCV scores, i.e. the pooled residual over the
    /// pooled count (one smoothing for a vector field, as in Garcia 2010's
    /// multicomponent smoothing, from memory).
    pub(crate) fn gcv_s_joint(&self, ys: &[&[f64]]) -> f64 {
        let cs: Vec<Vec<f64>> = ys
            .iter()
            .map(|y| {
                let mut c = y.to_vec();
                self.dct.forward(&mut c);
                c
            })
            .collect();
        Self::search(|t| cs.iter().map(|c| self.gcv_full(c, 10f64.powf(t))).sum())
    }

    /// `IDCT(G(s) . DCT(y))`.
    pub(crate) fn smooth_full(&self, y: &[f64], s: f64) -> Vec<f64> {
        let mut c = y.to_vec();
        self.dct.forward(&mut c);
        for (ci, l) in c.iter_mut().zip(&self.lambda2) {
            *ci /= 1.0 + s * l;
        }
        self.dct.inverse(&mut c);
        c
    }

    /// Smooths `y` where `known`; `s` given or chosen by GCV; `robust`
    /// down-weights outliers. `z0` is the starting guess (values at unknown
    /// nodes matter, e.g. a neighbour-mean fill); only used with gaps or
    /// robust weights.
    pub(crate) fn smooth(
        &self,
        y: &[f64],
        known: &[bool],
        z0: &[f64],
        s: Option<f64>,
        robust: bool,
    ) -> Smoothed {
        let n = self.n();
        let nk = known.iter().filter(|&&k| k).count();
        if nk == 0 {
            return Smoothed {
                z: vec![f64::NAN; n],
                s: s.unwrap_or(f64::NAN),
            };
        }
        let y: Vec<f64> = y
            .iter()
            .zip(known)
            .map(|(v, &k)| if k { *v } else { 0.0 })
            .collect();
        let w0: Vec<f64> = known.iter().map(|&k| k as u8 as f64).collect();
        if nk == n && !robust {
            let s = s.unwrap_or_else(|| self.gcv_s(&y));
            return Smoothed {
                z: self.smooth_full(&y, s),
                s,
            };
        }
        let mut w = w0.clone();
        let mut z = z0.to_vec();
        let mut s_cur = s.unwrap_or(1.0);
        let passes = if robust { 3 } else { 1 };
        for pass in 0..passes {
            let mut next_search = 0;
            for it in 0..200 {
                let mut c: Vec<f64> = (0..n).map(|k| w[k] * (y[k] - z[k]) + z[k]).collect();
                self.dct.forward(&mut c);
                if s.is_none() && it == next_search {
                    next_search = if it == 0 { 1 } else { 2 * it };
                    s_cur = Self::search(|t| self.gcv_weighted(&c, &y, &w, nk, 10f64.powf(t)));
                }
                let mut g = Vec::new();
                self.gamma(s_cur, &mut g);
                let mut zn = c;
                zn.iter_mut().zip(&g).for_each(|(a, b)| *a *= b);
                self.dct.inverse(&mut zn);
                let (mut dz, mut nz) = (0.0, 0.0);
                for k in 0..n {
                    let v = 1.75 * zn[k] - 0.75 * z[k];
                    dz += (v - z[k]).powi(2);
                    nz += v * v;
                    z[k] = v;
                }
                if dz <= 1e-12 * nz && it > 2 {
                    break;
                }
            }
            if robust && pass + 1 < passes {
                w = bisquare(&y, &z, &w0, s_cur);
            }
        }
        Smoothed { z, s: s_cur }
    }

    /// Weighted GCV for pseudo-data coefficients `c`.
    fn gcv_weighted(&self, c: &[f64], y: &[f64], w: &[f64], nk: usize, s: f64) -> f64 {
        let mut g = Vec::new();
        let tr = self.gamma(s, &mut g);
        let mut z: Vec<f64> = c.iter().zip(&g).map(|(a, b)| a * b).collect();
        self.dct.inverse(&mut z);
        let rss: f64 = (0..z.len()).map(|k| w[k] * (y[k] - z[k]).powi(2)).sum();
        let n = self.n() as f64;
        (rss / nk as f64) / (1.0 - tr / n).powi(2)
    }

    /// Fills the unknown nodes of `y` (known values are returned exactly),
    /// starting from `z0`, over `iterations` steps of falling s.
    pub(crate) fn inpaint(
        &self,
        y: &[f64],
        known: &[bool],
        z0: &[f64],
        iterations: usize,
    ) -> Vec<f64> {
        let n = self.n();
        let mut z = z0.to_vec();
        let it = iterations.max(2);
        let mut g = Vec::new();
        for step in 0..it {
            let t = 3.0 - 9.0 * step as f64 / (it - 1) as f64;
            self.gamma(10f64.powf(t), &mut g);
            let mut c: Vec<f64> = (0..n).map(|k| if known[k] { y[k] } else { z[k] }).collect();
            self.dct.forward(&mut c);
            c.iter_mut().zip(&g).for_each(|(a, b)| *a *= b);
            self.dct.inverse(&mut c);
            for k in 0..n {
                z[k] = 2.0 * c[k] - z[k];
            }
        }
        for k in 0..n {
            if known[k] {
                z[k] = y[k];
            }
        }
        z
    }
}

/// Bisquare robust weights (Garcia 2010, from memory; see module docs).
fn bisquare(y: &[f64], z: &[f64], w0: &[f64], s: f64) -> Vec<f64> {
    let mut r: Vec<f64> = (0..y.len())
        .filter(|&k| w0[k] > 0.0)
        .map(|k| y[k] - z[k])
        .collect();
    let (_, mad) = crate::robust::median_mad(&mut r);
    let h = (1.0 + 16.0 * s).sqrt();
    let h = ((1.0 + h).sqrt() / std::f64::consts::SQRT_2 / h).powi(2);
    let scale = crate::robust::MAD_TO_SIGMA * mad * (1.0 - h).max(1e-12).sqrt();
    (0..y.len())
        .map(|k| {
            if w0[k] == 0.0 {
                return 0.0;
            }
            if scale <= 0.0 {
                return 1.0;
            }
            let u = ((y[k] - z[k]) / scale).abs() / 4.685;
            if u < 1.0 {
                (1.0 - u * u).powi(2)
            } else {
                0.0
            }
        })
        .collect()
}

#[cfg(test)]
mod tests;
