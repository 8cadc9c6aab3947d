//! The terms of the budget per slice (phase bin or kept frame) and node,
//! with propagated standard uncertainties.
//! (Time-resolved slices have no turbulent term; their residual leaves it out.)
//!
//! Owns: turning `BudgetAcc` into `Budget`. Does not own: accumulation
//! (`acc`), stencils (`ops`), files (`reduce::outputs`).
//!
//! Terms (`TERMS`, as they appear in the equation; docs/budget.md):
//! `unsteady + advection = stretching + diffusion + turbulent + (what the
//! plane cannot see)`, so `residual = unsteady + advection - stretching -
//! diffusion - turbulent`.
//! - unsteady: phase runs, the periodic central difference of the bin means
//!   over phase, `(W[k+1] - W[k-1]) K f / 2` (K bins, f in Hz); time-resolved
//!   runs, `(w[n+1] - w[n-1]) / (t[n+1] - t[n-1])`.
//! - advection `U dW/dx + V dW/dy`; stretching `W dw/dz = -W (dU/dx + dV/dy)`;
//!   diffusion `nu lap(W)`; all from the same bin means (or frame values).
//! - turbulent `-(d/dx <u''w''> + d/dy <v''w''>)`, the co-moments of the
//!   bin (sample covariances), differentiated with the first-derivative
//!   stencil. Time-resolved slices have no such term (NaN).
//!
//! Uncertainty (GUM, JCGM 100:2008 §5.2, first-order propagation):
//! - phase runs: the covariance of the eight bin means is `C / (n (n-1))`
//!   (type A, from the scatter over the bin's frames: measurement noise,
//!   turbulence and the spatial correlation of both are in it, exactly, at
//!   one node); advection, stretching, diffusion and their sum in the
//!   residual use the full covariance (their correlation is carried). The
//!   turbulent term enters through its first-order influence per frame
//!   (`local`), so its correlation with the others is carried too. The
//!   unsteady term uses other bins (other frames): independent.
//!   Neglected: second-order terms (products of two errors), which matter
//!   only where a term's relative uncertainty approaches 1.
//! - time-resolved slices: `sigma_u² G_u + sigma_v² G_v`, the noise Gram
//!   matrices of the composite stencils (`ops`) times the node's velocity
//!   variances (taken as uniform over the stencil's reach).
//!
//! Nodes without two samples in the bin, or without every tap, get NaN.

use super::acc::{BinSums, BudgetAcc, Slice};
use super::integral::Noise;
use super::ops::{apply, tri, Ops, F_DIV, F_LAP, F_Q, F_U, F_V, F_W, F_WX, F_WY, NF, NT};
use crate::derive::quantities::clip0;
use crate::field::Grid;
use crate::stencil::Stencil;
use ndarray::Array2;

/// Term names, in column order.
pub(crate) const TERMS: [&str; 5] = [
    "unsteady",
    "advection",
    "stretching",
    "diffusion",
    "turbulent",
];

/// What a slice is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SliceKind {
    /// Phase bin `bin` centred on `centre_deg`.
    Bin { bin: usize, centre_deg: f64 },
    /// Frame `index` at `time_s`.
    Frame { index: u64, time_s: f64 },
}

/// The budget of one slice, per node (row-major).
#[derive(Debug, Clone)]
pub struct SliceBudget {
    pub kind: SliceKind,
    /// Samples per node (1 for a frame).
    pub n: Vec<f64>,
    pub u: Vec<f64>,
    pub v: Vec<f64>,
    pub omega: Vec<f64>,
    /// Per term (`TERMS` order): value and standard uncertainty.
    pub value: [Vec<f64>; 5],
    pub unc: [Vec<f64>; 5],
    pub residual: Vec<f64>,
    pub residual_unc: Vec<f64>,
    /// What the uncertainty of an area integral of the terms needs
    /// (`integral`); `None` for a slice without the inputs.
    pub lin: Option<Linear>,
}

/// The inputs of the linear propagation of a slice's area integrals
/// (`integral`, `vortex::budget`).
#[derive(Debug, Clone)]
pub struct Linear {
    /// Field means, node-major (`mean[k * NF + f]`): the point about which
    /// advection and stretching are linearised.
    pub mean: Vec<f64>,
    /// Velocity variances of the slice: a bin's, of its means (type A,
    /// `C_uu / (n (n - 1))`); a frame's, its noise.
    pub noise: Noise,
    /// The unsteady term's earlier and later slices' velocity variances and
    /// its factor: unsteady = factor (W_later - W_earlier).
    pub unsteady: Option<(Noise, Noise, f64)>,
}

/// The budget of a run.
#[derive(Debug, Clone)]
pub struct Budget {
    pub grid: Grid,
    pub slices: Vec<SliceBudget>,
    /// The stencils of the terms, the smoother before them and the
    /// viscosity (NaN when missing): what `integral` needs.
    pub ops: Ops,
    pub smoother: Option<Stencil>,
    pub nu: f64,
    /// Coverage factor of the significance test.
    pub k: f64,
    /// The frequency of the phase bins and its source (set by `reduce::budget::finish`).
    pub frequency: Option<super::freq::Frequency>,
    /// Phase bin of the term figure (`[budget] figure_bin`).
    pub figure_bin: Option<usize>,
    /// The plain-words reading (set by `reduce::budget::finish`).
    pub reading: Option<super::reading::Reading>,
    pub warnings: Vec<String>,
}

impl SliceBudget {
    fn empty(kind: SliceKind, nodes: usize) -> Self {
        let nan = || vec![f64::NAN; nodes];
        SliceBudget {
            kind,
            n: vec![0.0; nodes],
            u: nan(),
            v: nan(),
            omega: nan(),
            value: std::array::from_fn(|_| nan()),
            unc: std::array::from_fn(|_| nan()),
            residual: nan(),
            residual_unc: nan(),
            lin: None,
        }
    }

    /// Is the residual larger than `k` times its uncertainty at node `i`?
    pub(crate) fn significant(&self, i: usize, k: f64) -> bool {
        self.residual[i].abs() > k * self.residual_unc[i]
    }
}

/// `J^T S J` for a packed symmetric `S`.
fn quad(j: &[f64; NF], s: &[f64]) -> f64 {
    let mut q = 0.0;
    for a in 0..NF {
        for b in 0..NF {
            q += j[a] * j[b] * s[tri(a, b)];
        }
    }
    q
}

/// Advection, stretching, diffusion at a node from the field means `m` and
/// their covariance `s`: values, variances, the variance of the turbulent
/// term (`turb`: its first-order dependence on the frame values, below) and
/// the variance of the signed sum of the four in the residual.
///
/// The turbulent term `T = -sum_a w_a c_a` (c the co-moment at tap a) has,
/// per frame, the influence
/// `-(q - U dw/dx - V dw/dy - W_x u - W_y v - W div - DIV w)` to first order (the product rule applied to `Dx(u w)`, exact up
/// to the stencil's truncation), so its variance and its covariance with
/// the other terms follow from the same covariance matrix.
fn local(m: &[f64], s: &[f64], nu: f64, turb: bool) -> ([f64; 4], [f64; 4], f64) {
    let [ja, js, jd] = jacobians(m, nu);
    let mut jt = [0.0; NF];
    if turb {
        jt[F_Q] = -1.0;
        jt[F_WX] = m[F_U];
        jt[F_WY] = m[F_V];
        jt[F_U] = m[F_WX];
        jt[F_V] = m[F_WY];
        jt[F_DIV] = m[F_W];
        jt[F_W] = m[F_DIV];
    }
    let jr: [f64; NF] = std::array::from_fn(|f| ja[f] - js[f] - jd[f] - jt[f]);
    (
        [
            m[F_U] * m[F_WX] + m[F_V] * m[F_WY],
            -m[F_W] * m[F_DIV],
            nu * m[F_LAP],
            f64::NAN,
        ],
        [quad(&ja, s), quad(&js, s), quad(&jd, s), quad(&jt, s)],
        quad(&jr, s),
    )
}

/// The first-order dependence of advection, stretching and diffusion at a
/// node on its fields (`ops`), the means `m` as coefficients: advection
/// `U Wx + V Wy` varies as `dU Wx + dV Wy + U dWx + V dWy`, stretching
/// `-W DIV` as `-dW DIV - W dDIV`, diffusion `nu LAP` as `nu dLAP`.
pub(crate) fn jacobians(m: &[f64], nu: f64) -> [[f64; NF]; 3] {
    let mut ja = [0.0; NF];
    ja[F_U] = m[F_WX];
    ja[F_V] = m[F_WY];
    ja[F_WX] = m[F_U];
    ja[F_WY] = m[F_V];
    let mut js = [0.0; NF];
    js[F_W] = -m[F_DIV];
    js[F_DIV] = -m[F_W];
    let mut jd = [0.0; NF];
    jd[F_LAP] = nu;
    [ja, js, jd]
}

/// Fills advection, stretching, diffusion, the turbulent uncertainty and
/// the residual of node `k`, given the unsteady value and variance and the
/// turbulent value (NaN in a frame's budget: no such term) already there.
fn close(out: &mut SliceBudget, k: usize, m: &[f64], s: &[f64], nu: f64, var_unst: f64) {
    let turb = out.value[4][k];
    let (val, vars, var_r) = local(m, s, nu, !turb.is_nan());
    out.u[k] = m[F_U];
    out.v[k] = m[F_V];
    out.omega[k] = m[F_W];
    for t in 0..3 {
        out.value[t + 1][k] = val[t];
        out.unc[t + 1][k] = clip0(vars[t]).sqrt();
    }
    if !turb.is_nan() {
        out.unc[4][k] = clip0(vars[3]).sqrt();
    }
    let turb = if turb.is_nan() { 0.0 } else { turb };
    out.residual[k] = out.value[0][k] + val[0] - val[1] - val[2] - turb;
    out.residual_unc[k] = clip0(var_unst + var_r).sqrt();
}

/// The finished budget. `nu` (m²/s) and `freq` (Hz) may be missing: the
/// terms that need them, and the residual, are then NaN.
pub(crate) fn finish(acc: &BudgetAcc, nu: Option<f64>, freq: Option<f64>) -> Budget {
    let nodes = acc.grid.len();
    let nu = nu.unwrap_or(f64::NAN);
    let mut slices = Vec::new();
    let kb = acc.bins.len();
    for (b, bin) in acc.bins.iter().enumerate() {
        let Some(bin) = bin else { continue };
        let kind = SliceKind::Bin {
            bin: b,
            centre_deg: (b as f64 + 0.5) * 360.0 / kb as f64,
        };
        let prev = acc.bins[(b + kb - 1) % kb].as_ref().filter(|_| kb >= 3);
        let next = acc.bins[(b + 1) % kb].as_ref().filter(|_| kb >= 3);
        let rate = freq.map_or(f64::NAN, |f| kb as f64 * f / 2.0);
        let mut s = phase_slice(acc, kind, bin, prev.zip(next), rate, nu);
        let gain = gain(acc);
        s.lin = Some(Linear {
            mean: bin.mean.clone(),
            noise: bin_noise(bin, gain),
            unsteady: prev
                .zip(next)
                .map(|(p, q)| (bin_noise(p, gain), bin_noise(q, gain), rate)),
        });
        slices.push(s);
    }
    for (i, s) in acc.slices.iter().enumerate() {
        if !acc.params.frames.contains(&s.index) {
            continue;
        }
        let prev = i.checked_sub(1).map(|p| &acc.slices[p]);
        let next = acc.slices.get(i + 1);
        let pair = prev
            .zip(next)
            .filter(|(p, q)| p.index + 1 == s.index && q.index == s.index + 1);
        let mut out = frame_slice(acc, s, pair, nu);
        let noise = |x: &Slice| Noise {
            var_u: x.var_u.clone(),
            var_v: x.var_v.clone(),
            cov_uv: vec![0.0; nodes],
        };
        out.lin = Some(Linear {
            mean: (0..nodes * NF)
                .map(|t| s.fields[(t % NF) * nodes + t / NF])
                .collect(),
            noise: noise(s),
            unsteady: pair.map(|(p, q)| (noise(p), noise(q), 1.0 / (q.time_s - p.time_s))),
        });
        slices.push(out);
    }
    let mut warnings = Vec::new();
    for &f in &acc.params.frames {
        if !acc.slices.iter().any(|s| s.index == f) {
            warnings.push(format!(
                "budget: frame {f} was not reduced (rejected or beyond the run); no budget for it"
            ));
        }
    }
    debug_assert!(slices.iter().all(|s| s.n.len() == nodes));
    Budget {
        grid: acc.grid,
        slices,
        ops: acc.ops.clone(),
        smoother: acc.smoother.clone(),
        nu,
        k: acc.params.k,
        frequency: None,
        figure_bin: acc.params.figure_bin,
        reading: None,
        warnings,
    }
}

/// The smoother's noise factor (1 without one): a smoothed variance over
/// its square is the raw-equivalent variance (`acc::push`).
fn gain(acc: &BudgetAcc) -> f64 {
    acc.smoother.as_ref().map_or(1.0, |s| s.noise_factor())
}

/// The raw-equivalent variances and u-v covariance of a bin's velocity
/// means per node (NaN below two samples).
fn bin_noise(b: &BinSums, gain: f64) -> Noise {
    let g2 = gain * gain;
    let at = |t: usize| -> Vec<f64> {
        (0..b.n.len())
            .map(|k| {
                let n = b.n[k];
                if n < 2.0 {
                    f64::NAN
                } else {
                    b.cm[k * NT + t] / (n * (n - 1.0)) / g2
                }
            })
            .collect()
    };
    Noise {
        var_u: at(tri(F_U, F_U)),
        var_v: at(tri(F_V, F_V)),
        cov_uv: at(tri(F_U, F_V)),
    }
}

/// A phase bin's budget; `nb` the neighbouring bins, `rate` = K f / 2.
fn phase_slice(
    acc: &BudgetAcc,
    kind: SliceKind,
    s: &BinSums,
    nb: Option<(&BinSums, &BinSums)>,
    rate: f64,
    nu: f64,
) -> SliceBudget {
    let g = acc.grid;
    let nodes = g.len();
    let mut out = SliceBudget::empty(kind, nodes);
    out.n.clone_from(&s.n);
    // co-moments <u''w''>, <v''w''>
    let mut cu = Array2::from_elem(g.shape(), f64::NAN);
    let mut cv = cu.clone();
    for k in 0..nodes {
        let n = s.n[k];
        if n < 2.0 {
            continue;
        }
        let c = &s.cm[k * NT..(k + 1) * NT];
        let (j, i) = (k / g.nx, k % g.nx);
        cu[[j, i]] = c[tri(F_U, F_W)] / (n - 1.0);
        cv[[j, i]] = c[tri(F_V, F_W)] / (n - 1.0);
    }
    for k in 0..nodes {
        let n = s.n[k];
        if n < 2.0 {
            continue;
        }
        let (j, i) = (k / g.nx, k % g.nx);
        let m = &s.mean[k * NF..(k + 1) * NF];
        let cov: Vec<f64> = s.cm[k * NT..(k + 1) * NT]
            .iter()
            .map(|c| c / (n * (n - 1.0)))
            .collect();
        let mut var_unst = f64::NAN;
        if let Some((p, q)) = nb {
            if p.n[k] >= 2.0 && q.n[k] >= 2.0 {
                let vw = |b: &BinSums| b.cm[k * NT + tri(F_W, F_W)] / (b.n[k] * (b.n[k] - 1.0));
                out.value[0][k] = (q.mean[k * NF + F_W] - p.mean[k * NF + F_W]) * rate;
                var_unst = rate * rate * (vw(p) + vw(q));
                out.unc[0][k] = var_unst.sqrt();
            }
        }
        out.value[4][k] = -(apply(&acc.ops.dx, &cu, j, i) + apply(&acc.ops.dy, &cv, j, i));
        close(&mut out, k, m, &cov, nu, var_unst);
    }
    out
}

/// A kept frame's budget; `pair` its neighbouring frames.
fn frame_slice(acc: &BudgetAcc, s: &Slice, pair: Option<(&Slice, &Slice)>, nu: f64) -> SliceBudget {
    let nodes = acc.grid.len();
    let kind = SliceKind::Frame {
        index: s.index,
        time_s: s.time_s,
    };
    let mut out = SliceBudget::empty(kind, nodes);
    let (gu, gv) = (&acc.ops.gram_u, &acc.ops.gram_v);
    let var_w =
        |x: &Slice, k: usize| x.var_u[k] * gu[tri(F_W, F_W)] + x.var_v[k] * gv[tri(F_W, F_W)];
    for k in 0..nodes {
        let m: [f64; NF] = std::array::from_fn(|f| s.fields[f * nodes + k]);
        if m.iter().any(|x| !x.is_finite()) {
            continue;
        }
        out.n[k] = 1.0;
        let cov: Vec<f64> = (0..NT)
            .map(|t| s.var_u[k] * gu[t] + s.var_v[k] * gv[t])
            .collect();
        let mut var_unst = f64::NAN;
        if let Some((p, q)) = pair {
            let dt = q.time_s - p.time_s;
            let (wp, wq) = (p.fields[F_W * nodes + k], q.fields[F_W * nodes + k]);
            out.value[0][k] = (wq - wp) / dt;
            var_unst = (var_w(p, k) + var_w(q, k)) / (dt * dt);
            out.unc[0][k] = var_unst.sqrt();
        }
        close(&mut out, k, &m, &cov, nu, var_unst);
    }
    out
}
