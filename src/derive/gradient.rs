//! The velocity-gradient tensor of one snapshot for one scheme, with the
//! propagated variance and the truncation estimate of every component.
//!
//! Owns: applying a scheme's derivative stencils at every node (the fast
//! path for interior nodes, the fallback chain for edge and mask nodes),
//! propagating per-vector uncertainty through the stencil actually applied
//! (composed with the smoother), and the truncation estimate.
//! Does not own: the stencils (`stencil`), the quantities built from the
//! tensor (`quantities`).
//!
//! Components: `a = du/dx, b = du/dy, c = dv/dx, d = dv/dy`, in 1/s.
//!
//! Values: the derivative stencil applied to the (smoothed) velocity.
//! Uncertainty: the derivative stencil composed with the smoother's
//! equivalent stencil (`Stencil::after`), propagated with GUM eq. 13 and the
//! error-correlation model; never through the two pieces separately. Near
//! an edge or mask, where the smoother's stencil is cut, the smoother at
//! each node the derivative uses is the operator `stencil::cut` returns,
//! the same one that made the smoothed values there.
//!
//! Truncation (bias) estimate: a local polynomial of degree 5 is fitted by
//! least squares around the node (9 nodes along the axis for a 1-D stencil,
//! 7 x 7 for a 2-D one such as circulation or a smoothed composite; wider
//! when the stencil reaches farther). For a stencil T approximating d/dx,
//! `bias = T[p] - dp/dx(0)`: the stencil's error on the fitted polynomial.
//! It is exact for polynomial fields up to degree 5 and is itself a linear
//! stencil of the data, so its noise variance `bvar` is known and the
//! caller can remove it (`quantities::debias`). Where fewer nodes than the
//! fit needs carry values, the degree drops to 3; below that the estimate
//! is NaN.

use std::cell::RefCell;
use std::collections::hash_map::DefaultHasher;
use std::collections::HashMap;
use std::hash::{Hash, Hasher};
use std::rc::Rc;

use super::cache::{cached, corr_fingerprint, fingerprint, pooled, Shared};

use ndarray::Array2;

use crate::stencil::correlation::Correlation;
use crate::stencil::cut::{cut, Cut};
use crate::stencil::derivatives::{chain, Axis, DiffScheme};
use crate::stencil::lsq::PolyFit;
use crate::stencil::{Stencil, Tap};

/// One scheme's gradient tensor: `[a, b, c, d]` each.
#[derive(Debug, Clone)]
pub struct Grad {
    pub val: [Array2<f64>; 4],
    /// Propagated variance of each component.
    pub var: [Array2<f64>; 4],
    /// Signed truncation estimate (NaN where none could be made); empty
    /// arrays (shape (0, 0)) when truncation is not estimated.
    pub bias: [Array2<f64>; 4],
    /// Noise variance of the truncation estimate (empty likewise).
    pub bvar: [Array2<f64>; 4],
    /// Nodes where the x or the y stencil is a fallback, not the scheme's own.
    pub fallback: usize,
}

impl Grad {
    /// Whether the truncation slots hold an estimate (else they are empty).
    pub fn has_truncation(&self) -> bool {
        !self.bias[0].is_empty()
    }
}

/// What every scheme's pass reads.
pub struct Inputs<'a> {
    /// Nodes with a value.
    pub ok: &'a Array2<bool>,
    /// The velocity the derivatives are taken of (smoothed when smoothing).
    pub us: &'a Array2<f64>,
    pub vs: &'a Array2<f64>,
    /// The velocity as measured (the truncation fit uses it).
    pub u: &'a Array2<f64>,
    pub v: &'a Array2<f64>,
    /// Per-vector standard uncertainties.
    pub sig_u: &'a Array2<f64>,
    pub sig_v: &'a Array2<f64>,
    pub corr: Correlation,
    /// The smoother's equivalent stencil (normalised to unit sum), if any.
    pub smoother: Option<&'a Stencil>,
    /// How the smoother is cut at edges and masks (`stencil::cut`).
    pub smoother_cut: Cut,
    /// Counts of "not plain" nodes (no value, or an uncertainty other than
    /// `sig_ref`) as a summed-area table of shape (ny+1, nx+1).
    pub not_plain: &'a Array2<u32>,
    /// Which components `[a, b, c, d]` the quantities need; the others are
    /// left NaN (b and c, for the vorticity, always).
    pub need: [bool; 4],
    /// Counts of nodes without a value, as a summed-area table like
    /// `not_plain`.
    pub not_ok: &'a Array2<u32>,
    /// The uncertainty of plain nodes (u, v).
    pub sig_ref: (f64, f64),
    pub dx: f64,
    pub dy: f64,
    pub truncation: bool,
}

/// A stencil flattened to linear offsets for a row-major `(ny, nx)` array.
struct Flat {
    off: Vec<isize>,
    w: Vec<f64>,
}

impl Flat {
    fn new(s: &Stencil, nx: usize) -> Flat {
        Flat {
            off: s
                .taps
                .iter()
                .map(|t| t.dj as isize * nx as isize + t.di as isize)
                .collect(),
            w: s.taps.iter().map(|t| t.w).collect(),
        }
    }
    /// `sum_t w_t a[k + off_t]`, in tap order.
    #[inline(always)]
    fn apply1(&self, a: &[f64], k: usize) -> f64 {
        let mut s = 0.0;
        for (o, w) in self.off.iter().zip(&self.w) {
            s += w * a[(k as isize + o) as usize];
        }
        s
    }
    /// `apply1` to the u and v arrays (`nu`, `nv`: which are wanted; the
    /// other comes back NaN), both in one loop when both are.
    #[inline(always)]
    fn apply_uv(&self, a: &[f64], b: &[f64], k: usize, nu: bool, nv: bool) -> (f64, f64) {
        match (nu, nv) {
            (true, true) => self.apply2(a, b, k),
            (true, false) => (self.apply1(a, k), f64::NAN),
            (false, true) => (f64::NAN, self.apply1(b, k)),
            (false, false) => (f64::NAN, f64::NAN),
        }
    }
    /// `sum_t w_t a[k + off_t]` for two arrays at once, in tap order.
    #[inline(always)]
    fn apply2(&self, a: &[f64], b: &[f64], k: usize) -> (f64, f64) {
        let (mut s, mut t) = (0.0, 0.0);
        for (o, w) in self.off.iter().zip(&self.w) {
            let q = (k as isize + o) as usize;
            s += w * a[q];
            t += w * b[q];
        }
        (s, t)
    }
}

/// `Correlation::variance_at` of one stencil at nodes where it fits, with
/// the flat offsets and the pairs of taps that correlate precomputed: the
/// same sums in the same order (so bit-identical), without re-evaluating the
/// correlation model or checking bounds per tap.
struct FlatVar {
    off: Vec<isize>,
    w: Vec<f64>,
    /// `(a, b, rho_ab)` for every ordered pair with `rho_ab != 0`.
    pairs: Vec<(usize, usize, f64)>,
    gain: f64,
    independent: bool,
}

impl FlatVar {
    fn new(s: &Stencil, gain: f64, corr: &Correlation, nx: usize) -> FlatVar {
        let mut pairs = Vec::new();
        for (ia, a) in s.taps.iter().enumerate() {
            for (ib, b) in s.taps.iter().enumerate() {
                let r = corr.rho(a.dj - b.dj, a.di - b.di);
                if r != 0.0 {
                    pairs.push((ia, ib, r));
                }
            }
        }
        FlatVar {
            off: Flat::new(s, nx).off,
            w: s.taps.iter().map(|t| t.w).collect(),
            pairs,
            gain,
            independent: corr.is_independent(),
        }
    }

    /// The variance at flat index `k` (every tap inside the grid).
    #[inline]
    fn at(&self, sig: &[f64], k: usize) -> f64 {
        let at = |o: isize| sig[(k as isize + o) as usize];
        let s0 = sig[k];
        if self.off.iter().all(|&o| at(o) == s0) {
            return self.gain * s0 * s0;
        }
        if self.independent {
            return self
                .off
                .iter()
                .zip(&self.w)
                .map(|(&o, &w)| {
                    let e = w * at(o);
                    e * e
                })
                .sum();
        }
        let mut v = 0.0;
        for &(a, b, r) in &self.pairs {
            let ea = self.w[a] * at(self.off[a]);
            v += ea * self.w[b] * at(self.off[b]) * r;
        }
        v
    }
}

/// One axis of one scheme, with everything precomputed for the interior.
struct AxisOp {
    axis: Axis,
    h: f64,
    chain: Vec<Stencil>,
    /// `chain[k]` composed with the smoother (or `chain[k]` itself), with
    /// its correlation gain.
    comp: Vec<Shared>,
    /// Half-widths of the box the composite depends on.
    comp_box: Vec<(i32, i32)>,
    /// Interior truncation stencil of `comp[k]` and its correlation gain.
    bias: Vec<Option<Shared>>,
    /// Cache fingerprints of `comp[k]` (slow paths).
    fp_comp: Vec<u64>,
    fp_bias: Vec<u64>,
    /// Half-widths (along y, along x) of the truncation fit window.
    fit_half: Vec<(i32, i32)>,
    flat_d: Flat,
    flat_b: Option<Flat>,
    /// Variance of `comp[0]` and of `bias[0]` where every node has a value
    /// (uncertainties not uniform).
    var_d: FlatVar,
    var_b: Option<FlatVar>,
    /// Half-widths of the box that must be plain for the fast path.
    box_r: (usize, usize),
}

const FIT_DEGREE: u32 = 5;
const FIT_DEGREE_LOW: u32 = 3;

/// Half-widths of the fit window for a stencil of the given reach.
fn fit_half(reach: (usize, usize)) -> (i32, i32) {
    let (ry, rx) = (reach.0 as i32, reach.1 as i32);
    match (ry, rx) {
        (0, r) => (0, (r + 2).max(4)),
        (r, 0) => ((r + 2).max(4), 0),
        (a, b) => ((a + 1).max(3), (b + 1).max(3)),
    }
}

/// Monomials of total degree <= `deg` that a window of half-widths `half`
/// can determine (no y terms in a one-row window).
fn terms(deg: u32, half: (i32, i32)) -> Vec<(u32, u32)> {
    crate::stencil::lsq::monomials(deg)
        .into_iter()
        .filter(|&(p, q)| (q == 0 || half.0 > 0) && (p == 0 || half.1 > 0))
        .collect()
}

/// `T[p] - dp/daxis(0)` as a stencil of the data, for the fit on `offsets`.
fn bias_stencil(
    t: &Stencil,
    axis: Axis,
    h: f64,
    offsets: Vec<(i32, i32)>,
    half: (i32, i32),
) -> Option<Stencil> {
    let n = offsets.len();
    for deg in [FIT_DEGREE, FIT_DEGREE_LOW] {
        let tm = terms(deg, half);
        if n < tm.len() + 2 {
            continue;
        }
        if let Some(fit) = PolyFit::with_terms(offsets.clone(), tm) {
            let (p, q) = match axis {
                Axis::X => (1, 0),
                Axis::Y => (0, 1),
            };
            let mut taps: Vec<Tap> = Vec::new();
            for tap in &t.taps {
                taps.extend(fit.value_at(tap.dj, tap.di).scaled(tap.w).taps);
            }
            let d = fit.coefficient(p, q)?.scaled(-1.0 / h);
            taps.extend(d.taps);
            return Some(Stencil::new(taps));
        }
    }
    None
}

fn window(half: (i32, i32)) -> Vec<(i32, i32)> {
    (-half.0..=half.0)
        .flat_map(|j| (-half.1..=half.1).map(move |i| (j, i)))
        .collect()
}

impl AxisOp {
    fn new(scheme: DiffScheme, axis: Axis, inp: &Inputs, nx: usize) -> AxisOp {
        let h = match axis {
            Axis::X => inp.dx,
            Axis::Y => inp.dy,
        };
        let chain = chain(scheme, axis, h);
        let comp: Vec<Stencil> = chain
            .iter()
            .map(|d| inp.smoother.map_or_else(|| d.clone(), |s| d.after(s)))
            .collect();
        let sr = inp.smoother.map_or((0, 0), |s| s.reach());
        let comp_box: Vec<(i32, i32)> = chain
            .iter()
            .map(|d| {
                let r = d.reach();
                ((r.0 + sr.0) as i32, (r.1 + sr.1) as i32)
            })
            .collect();
        // The fit window covers the box the composite depends on, so the
        // fit window's validity pattern determines the whole slow path.
        let fit_half: Vec<(i32, i32)> = comp_box
            .iter()
            .map(|&(a, b)| fit_half((a as usize, b as usize)))
            .collect();
        let bias: Vec<Option<Shared>> = comp
            .iter()
            .zip(&fit_half)
            .map(|(c, &fh)| {
                if !inp.truncation {
                    return None;
                }
                bias_stencil(c, axis, h, window(fh), fh).map(|b| {
                    let g = inp.corr.gain(&b);
                    Rc::new((b, g))
                })
            })
            .collect();
        // The cached entries hold correlation gains: the model is part of
        // every key.
        let ax = axis as u64;
        let cf = corr_fingerprint(&inp.corr);
        let sm_fp = inp.smoother.map_or(0, |s| fingerprint(0, s, &[]));
        let fp_comp = chain
            .iter()
            .map(|d| fingerprint(1, d, &[ax, sm_fp, cf]))
            .collect();
        let fp_bias = comp
            .iter()
            .zip(&fit_half)
            .map(|(c, fh)| fingerprint(2, c, &[ax, h.to_bits(), fh.0 as u64, fh.1 as u64, cf]))
            .collect();
        let flat_d = Flat::new(&chain[0], nx);
        let flat_b = bias[0].as_ref().map(|b| Flat::new(&b.0, nx));
        let mut r = chain[0].reach();
        for s in [Some(&comp[0]), bias[0].as_ref().map(|b| &b.0)]
            .into_iter()
            .flatten()
        {
            let q = s.reach();
            r = (r.0.max(q.0), r.1.max(q.1));
        }
        let comp: Vec<Shared> = comp
            .into_iter()
            .map(|c| {
                let g = inp.corr.gain(&c);
                Rc::new((c, g))
            })
            .collect();
        let var_d = FlatVar::new(&comp[0].0, comp[0].1, &inp.corr, nx);
        let var_b = bias[0]
            .as_ref()
            .map(|b| FlatVar::new(&b.0, b.1, &inp.corr, nx));
        AxisOp {
            axis,
            h,
            chain,
            comp,
            comp_box,
            bias,
            fp_comp,
            fp_bias,
            fit_half,
            flat_d,
            flat_b,
            var_d,
            var_b,
            box_r: r,
        }
    }
}

/// True when the box of half-widths `r` around `(j, i)` lies inside the grid
/// and holds no node that is not plain.
#[inline]
fn box_plain(sat: &Array2<u32>, j: usize, i: usize, r: (usize, usize)) -> bool {
    let (ny1, nx1) = sat.dim();
    if j < r.0 || i < r.1 || j + r.0 + 1 >= ny1 || i + r.1 + 1 >= nx1 {
        return false;
    }
    let (j0, j1, i0, i1) = (j - r.0, j + r.0 + 1, i - r.1, i + r.1 + 1);
    sat[[j1, i1]] + sat[[j0, i0]] == sat[[j0, i1]] + sat[[j1, i0]]
}

/// The summed-area table of `bad` (shape (ny+1, nx+1)).
pub fn summed_area(bad: &Array2<bool>) -> Array2<u32> {
    let (ny, nx) = bad.dim();
    let mut s = Array2::<u32>::zeros((ny + 1, nx + 1));
    for j in 0..ny {
        let mut row = 0u32;
        for i in 0..nx {
            row += bad[[j, i]] as u32;
            s[[j + 1, i + 1]] = s[[j, i + 1]] + row;
        }
    }
    s
}

/// A bit mask of which nodes in the box of half-widths `r` around `(j, i)`
/// carry values (out-of-grid nodes count as without), or `None` when the
/// box has more than 128 nodes.
fn pattern(ok: &Array2<bool>, j: usize, i: usize, r: (i32, i32)) -> Option<u128> {
    let n = ((2 * r.0 + 1) * (2 * r.1 + 1)) as usize;
    if n > 128 {
        return None;
    }
    let (ny, nx) = ok.dim();
    let mut m = 0u128;
    let mut bit = 0;
    for dj in -r.0..=r.0 {
        for di in -r.1..=r.1 {
            let (jj, ii) = (j as i64 + dj as i64, i as i64 + di as i64);
            if jj >= 0
                && ii >= 0
                && (jj as usize) < ny
                && (ii as usize) < nx
                && ok[[jj as usize, ii as usize]]
            {
                m |= 1 << bit;
            }
            bit += 1;
        }
    }
    Some(m)
}

thread_local! {
    /// The axis operators made so far on this thread: building one fits a
    /// polynomial per fallback stencil, which frames of one run share.
    static OPS: RefCell<HashMap<u64, Rc<AxisOp>>> = RefCell::new(HashMap::new());
}

/// The (cached) operator of `scheme` along `axis` for these inputs.
fn axis_op(scheme: DiffScheme, axis: Axis, inp: &Inputs, nx: usize) -> Rc<AxisOp> {
    let mut h = DefaultHasher::new();
    format!("{scheme:?}{axis:?}{:?}{}", inp.corr, inp.truncation).hash(&mut h);
    (inp.dx.to_bits(), inp.dy.to_bits(), nx).hash(&mut h);
    let sm = inp.smoother.map_or(0, |s| fingerprint(0, s, &[]));
    sm.hash(&mut h);
    let key = h.finish();
    OPS.with(|c| {
        if let Some(op) = c.borrow().get(&key) {
            return op.clone();
        }
        let op = Rc::new(AxisOp::new(scheme, axis, inp, nx));
        let mut c = c.borrow_mut();
        if c.len() > 64 {
            c.clear();
        }
        c.insert(key, op.clone());
        op
    })
}

/// The gradient tensor of `scheme` at every node.
pub fn gradient(scheme: DiffScheme, inp: &Inputs) -> Grad {
    let (ny, nx) = inp.ok.dim();
    let nan = || pooled(ny * nx);
    let mut val = [nan(), nan(), nan(), nan()];
    let mut var = [nan(), nan(), nan(), nan()];
    // Without a truncation estimate the truncation slots are empty (shape
    // (0, 0)): nothing reads them then (`Grad::has_truncation`).
    let nb = || if inp.truncation { nan() } else { Vec::new() };
    let mut bias_ = [nb(), nb(), nb(), nb()];
    let mut bvar = [nb(), nb(), nb(), nb()];
    let mut fallback = 0usize;
    let ops = [
        axis_op(scheme, Axis::X, inp, nx),
        axis_op(scheme, Axis::Y, inp, nx),
    ];
    let ops = [&*ops[0], &*ops[1]];
    let us = inp.us.as_slice().expect("standard layout");
    let vs = inp.vs.as_slice().expect("standard layout");
    let u = inp.u.as_slice().expect("standard layout");
    let v = inp.v.as_slice().expect("standard layout");
    let sig_u = inp.sig_u.as_slice().expect("standard layout");
    let sig_v = inp.sig_v.as_slice().expect("standard layout");
    let (ru2, rv2) = (inp.sig_ref.0 * inp.sig_ref.0, inp.sig_ref.1 * inp.sig_ref.1);
    let ok_s = inp.ok.as_slice().expect("standard layout");
    for j in 0..ny {
        for i in 0..nx {
            let k = j * nx + i;
            if !ok_s[k] {
                continue;
            }
            let mut fell_back = false;
            for (ax, op) in ops.iter().enumerate() {
                // Component slots: x -> (a, c), y -> (b, d).
                let (su, sv) = if ax == 0 { (0, 2) } else { (1, 3) };
                let (nu, nv) = (inp.need[su], inp.need[sv]);
                if box_plain(inp.not_plain, j, i, op.box_r) {
                    (val[su][k], val[sv][k]) = op.flat_d.apply_uv(us, vs, k, nu, nv);
                    let g0 = op.comp[0].1;
                    if nu {
                        var[su][k] = g0 * ru2;
                    }
                    if nv {
                        var[sv][k] = g0 * rv2;
                    }
                    if let (Some(fb), Some(b0)) = (&op.flat_b, &op.bias[0]) {
                        let bg = b0.1;
                        (bias_[su][k], bias_[sv][k]) = fb.apply_uv(u, v, k, nu, nv);
                        if nu {
                            bvar[su][k] = bg * ru2;
                        }
                        if nv {
                            bvar[sv][k] = bg * rv2;
                        }
                    }
                    continue;
                }
                if box_plain(inp.not_ok, j, i, op.box_r) {
                    // Every node of the box has a value, so the scheme's own
                    // stencil, its composite and its truncation stencil all
                    // fit (what the general path below would find), but the
                    // uncertainties differ from node to node.
                    (val[su][k], val[sv][k]) = op.flat_d.apply_uv(us, vs, k, nu, nv);
                    if nu {
                        var[su][k] = op.var_d.at(sig_u, k);
                    }
                    if nv {
                        var[sv][k] = op.var_d.at(sig_v, k);
                    }
                    if let (Some(fb), Some(vb)) = (&op.flat_b, &op.var_b) {
                        (bias_[su][k], bias_[sv][k]) = fb.apply_uv(u, v, k, nu, nv);
                        if nu {
                            bvar[su][k] = vb.at(sig_u, k);
                        }
                        if nv {
                            bvar[sv][k] = vb.at(sig_v, k);
                        }
                    }
                    continue;
                }
                let Some(c) = op.chain.iter().position(|s| s.fits(j, i, inp.ok)) else {
                    fell_back = true;
                    continue;
                };
                fell_back |= c > 0;
                let d = &op.chain[c];
                if nu {
                    val[su][k] = d.apply_at(inp.us, j, i);
                }
                if nv {
                    val[sv][k] = d.apply_at(inp.vs, j, i);
                }
                // The stencil actually applied, composed with the smoother.
                let comp: Option<Shared> = if op.comp[c].0.fits(j, i, inp.ok) {
                    Some(op.comp[c].clone())
                } else {
                    let key = pattern(inp.ok, j, i, op.comp_box[c]).map(|m| (op.fp_comp[c], m));
                    cached(key, || effective_composite(d, inp, j, i), &inp.corr)
                };
                if let Some(cs) = &comp {
                    let (s, gain) = (&cs.0, cs.1);
                    if nu {
                        var[su][k] = inp.corr.variance_at(s, gain, inp.sig_u, j, i);
                    }
                    if nv {
                        var[sv][k] = inp.corr.variance_at(s, gain, inp.sig_v, j, i);
                    }
                }
                if !inp.truncation {
                    continue;
                }
                let bias: Option<Shared> = match &op.bias[c] {
                    Some(b) if b.0.fits(j, i, inp.ok) => Some(b.clone()),
                    _ => {
                        let fh = op.fit_half[c];
                        let key = pattern(inp.ok, j, i, fh).map(|m| (op.fp_bias[c], m));
                        let comp_s = comp.as_ref().map_or(&op.comp[c].0, |cs| &cs.0);
                        let make = || {
                            let offs: Vec<(i32, i32)> = window(fh)
                                .into_iter()
                                .filter(|&(dj, di)| in_ok(inp.ok, j, i, dj, di))
                                .collect();
                            bias_stencil(comp_s, op.axis, op.h, offs, fh)
                        };
                        cached(key, make, &inp.corr)
                    }
                };
                if let Some(bs) = &bias {
                    let (b, bg) = (&bs.0, &bs.1);
                    if nu {
                        bias_[su][k] = b.apply_at(inp.u, j, i);
                        bvar[su][k] = inp.corr.variance_at(b, *bg, inp.sig_u, j, i);
                    }
                    if nv {
                        bias_[sv][k] = b.apply_at(inp.v, j, i);
                        bvar[sv][k] = inp.corr.variance_at(b, *bg, inp.sig_v, j, i);
                    }
                }
            }
            fallback += fell_back as usize;
        }
    }
    let arr = |v: [Vec<f64>; 4]| {
        v.map(|x| {
            let sh = if x.is_empty() { (0, 0) } else { (ny, nx) };
            Array2::from_shape_vec(sh, x).expect("grid shape")
        })
    };
    Grad {
        val: arr(val),
        var: arr(var),
        bias: arr(bias_),
        bvar: arr(bvar),
        fallback,
    }
}

#[inline]
fn in_ok(ok: &Array2<bool>, j: usize, i: usize, dj: i32, di: i32) -> bool {
    let (ny, nx) = ok.dim();
    let (jj, ii) = (j as i64 + dj as i64, i as i64 + di as i64);
    jj >= 0 && ii >= 0 && (jj as usize) < ny && (ii as usize) < nx && ok[[jj as usize, ii as usize]]
}

/// The derivative `d` applied to the smoothed field near an edge or mask:
/// `sum_t w_t S_restricted(node + t)`, moved to the node's frame. `None`
/// without a smoother is never asked for (the plain stencil fits).
fn effective_composite(d: &Stencil, inp: &Inputs, j: usize, i: usize) -> Option<Stencil> {
    let s = inp.smoother?;
    let mut taps = Vec::new();
    for t in &d.taps {
        let (jj, ii) = (
            (j as i64 + t.dj as i64) as usize,
            (i as i64 + t.di as i64) as usize,
        );
        let r = cut(s, inp.smoother_cut, inp.ok, jj, ii)?;
        taps.extend(r.shifted(t.dj, t.di).scaled(t.w).taps);
    }
    Some(Stencil::new(taps))
}
