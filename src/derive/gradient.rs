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
//! caller can remove it (`quantities::debias`). At a grid edge the window
//! slides inward and keeps its size (`inward_shift`), so a one-sided stencil
//! is checked by a one-sided fit of the full degree; a mask inside the grid
//! only removes its nodes from the window. Where fewer nodes than the fit
//! needs carry values, the degree drops to 3; below that the estimate is
//! NaN.
//!
//! Known limit (docs/uncertainty.md, miss 8): in a vortex core resolved by
//! under 2 spacings the degree-5 fit on 9 nodes sees only 0.6-0.7 of a
//! central stencil's truncation and 0.2-0.3 of a fourth-order one's.

use ndarray::Array2;

use super::ops::{bias_stencil, window, AxisOp, OpSpec, Shared};
use super::workspace::Workspace;
use crate::stencil::correlation::Correlation;
use crate::stencil::cut::{cut, Cut};
use crate::stencil::derivatives::{Axis, DiffScheme};
use crate::stencil::Stencil;

/// One scheme's gradient tensor: `[a, b, c, d]` each.
#[derive(Debug, Clone)]
pub(crate) struct Grad {
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
    pub(crate) fn has_truncation(&self) -> bool {
        !self.bias[0].is_empty()
    }

    /// Gives the tensor's buffers back to the workspace for later frames.
    pub(crate) fn recycle(self, ws: &mut Workspace) {
        ws.give_back(
            self.val
                .into_iter()
                .chain(self.var)
                .chain(self.bias)
                .chain(self.bvar),
        );
    }
}

/// What every scheme's pass reads.
pub(crate) struct Inputs<'a> {
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
pub(crate) fn summed_area(bad: &Array2<bool>) -> Array2<u32> {
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

/// The gradient tensor of `scheme` at every node.
pub(crate) fn gradient(ws: &mut Workspace, scheme: DiffScheme, inp: &Inputs) -> Grad {
    let (ny, nx) = inp.ok.dim();
    let mut out = Slots::new(ws, ny * nx, inp.truncation);
    let spec = |axis| OpSpec {
        scheme,
        axis,
        dx: inp.dx,
        dy: inp.dy,
        smoother: inp.smoother,
        corr: inp.corr,
        truncation: inp.truncation,
        nx,
    };
    let ops = [ws.axis_op(&spec(Axis::X)), ws.axis_op(&spec(Axis::Y))];
    let ops = [&*ops[0], &*ops[1]];
    let flat = FlatInputs::new(inp);
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
                let pair = Pair {
                    su,
                    sv,
                    nu: inp.need[su],
                    nv: inp.need[sv],
                };
                if box_plain(inp.not_plain, j, i, op.box_r) {
                    out.plain_box(op, &flat, k, pair);
                } else if box_plain(inp.not_ok, j, i, op.box_r) {
                    out.full_box(op, &flat, k, pair);
                } else {
                    fell_back |= out.cut_box(ws, op, inp, (j, i), pair);
                }
            }
            out.fallback += fell_back as usize;
        }
    }
    out.finish(ny, nx)
}

/// The two component slots one axis fills at a node (x: a and c, y: b and
/// d) and whether the quantities need each.
#[derive(Clone, Copy)]
struct Pair {
    su: usize,
    sv: usize,
    nu: bool,
    nv: bool,
}

/// The inputs as flat row-major slices, for the fast paths.
struct FlatInputs<'a> {
    us: &'a [f64],
    vs: &'a [f64],
    u: &'a [f64],
    v: &'a [f64],
    sig_u: &'a [f64],
    sig_v: &'a [f64],
    /// Variances of plain nodes' u and v.
    ru2: f64,
    rv2: f64,
}

impl<'a> FlatInputs<'a> {
    fn new(inp: &'a Inputs) -> Self {
        let flat = |a: &'a Array2<f64>| a.as_slice().expect("standard layout");
        FlatInputs {
            us: flat(inp.us),
            vs: flat(inp.vs),
            u: flat(inp.u),
            v: flat(inp.v),
            sig_u: flat(inp.sig_u),
            sig_v: flat(inp.sig_v),
            ru2: inp.sig_ref.0 * inp.sig_ref.0,
            rv2: inp.sig_ref.1 * inp.sig_ref.1,
        }
    }
}

/// The tensor being built: `[a, b, c, d]` of values, variances, truncation
/// estimates and their noise variances, as flat buffers of the workspace.
struct Slots {
    val: [Vec<f64>; 4],
    var: [Vec<f64>; 4],
    bias: [Vec<f64>; 4],
    bvar: [Vec<f64>; 4],
    fallback: usize,
}

impl Slots {
    /// NaN-filled buffers of `n` nodes. Without a truncation estimate the
    /// truncation slots are empty (shape (0, 0)): nothing reads them then
    /// (`Grad::has_truncation`).
    fn new(ws: &mut Workspace, n: usize, truncation: bool) -> Self {
        let mut nan = || ws.buffer(n);
        let val = [nan(), nan(), nan(), nan()];
        let var = [nan(), nan(), nan(), nan()];
        let mut nb = || if truncation { nan() } else { Vec::new() };
        let bias = [nb(), nb(), nb(), nb()];
        let bvar = [nb(), nb(), nb(), nb()];
        Slots {
            val,
            var,
            bias,
            bvar,
            fallback: 0,
        }
    }

    /// Fast path: every node of the operator's box has a value and the
    /// plain uncertainty, so one flat stencil and one gain serve.
    #[inline]
    fn plain_box(&mut self, op: &AxisOp, f: &FlatInputs, k: usize, p: Pair) {
        let Pair { su, sv, nu, nv } = p;
        (self.val[su][k], self.val[sv][k]) = op.flat_d.apply_uv(f.us, f.vs, k, nu, nv);
        let g0 = op.comp[0].1;
        if nu {
            self.var[su][k] = g0 * f.ru2;
        }
        if nv {
            self.var[sv][k] = g0 * f.rv2;
        }
        if let (Some(fb), Some(b0)) = (&op.flat_b, &op.bias[0]) {
            let bg = b0.1;
            (self.bias[su][k], self.bias[sv][k]) = fb.apply_uv(f.u, f.v, k, nu, nv);
            if nu {
                self.bvar[su][k] = bg * f.ru2;
            }
            if nv {
                self.bvar[sv][k] = bg * f.rv2;
            }
        }
    }

    /// Every node of the box has a value, so the scheme's own stencil, its
    /// composite and its truncation stencil all fit (what `cut_box` would
    /// find), but the uncertainties differ from node to node.
    #[inline]
    fn full_box(&mut self, op: &AxisOp, f: &FlatInputs, k: usize, p: Pair) {
        let Pair { su, sv, nu, nv } = p;
        (self.val[su][k], self.val[sv][k]) = op.flat_d.apply_uv(f.us, f.vs, k, nu, nv);
        if nu {
            self.var[su][k] = op.var_d.at(f.sig_u, k);
        }
        if nv {
            self.var[sv][k] = op.var_d.at(f.sig_v, k);
        }
        if let (Some(fb), Some(vb)) = (&op.flat_b, &op.var_b) {
            (self.bias[su][k], self.bias[sv][k]) = fb.apply_uv(f.u, f.v, k, nu, nv);
            if nu {
                self.bvar[su][k] = vb.at(f.sig_u, k);
            }
            if nv {
                self.bvar[sv][k] = vb.at(f.sig_v, k);
            }
        }
    }

    /// A box cut by an edge or a mask: the first stencil of the fallback
    /// chain that fits, the composite with the smoother actually applied
    /// there, and a truncation fit on the nodes that carry values. Returns
    /// whether the stencil is a fallback (or none fits).
    fn cut_box(
        &mut self,
        ws: &mut Workspace,
        op: &AxisOp,
        inp: &Inputs,
        (j, i): (usize, usize),
        p: Pair,
    ) -> bool {
        let Pair { su, sv, nu, nv } = p;
        let Some(c) = op.chain.iter().position(|s| s.fits(j, i, inp.ok)) else {
            return true;
        };
        let d = &op.chain[c];
        let k = k_of(inp, j, i);
        if nu {
            self.val[su][k] = d.apply_at(inp.us, j, i);
        }
        if nv {
            self.val[sv][k] = d.apply_at(inp.vs, j, i);
        }
        // The stencil actually applied, composed with the smoother.
        let comp: Option<Shared> = if op.comp[c].0.fits(j, i, inp.ok) {
            Some(op.comp[c].clone())
        } else {
            let key = pattern(inp.ok, j, i, op.comp_box[c]).map(|m| (op.fp_comp[c], m));
            ws.stencil(key, || effective_composite(d, inp, j, i), &inp.corr)
        };
        if let Some(cs) = &comp {
            let (s, gain) = (&cs.0, cs.1);
            if nu {
                self.var[su][k] = inp.corr.variance_at(s, gain, inp.sig_u, j, i);
            }
            if nv {
                self.var[sv][k] = inp.corr.variance_at(s, gain, inp.sig_v, j, i);
            }
        }
        if inp.truncation {
            let comp_s = comp.as_ref().map_or(&op.comp[c].0, |cs| &cs.0);
            self.cut_truncation(ws, op, inp, (j, i), c, comp_s, p);
        }
        c > 0
    }

    /// The truncation estimate of chain stencil `c` (composite `comp_s`)
    /// at a node whose box is cut: the fit window restricted to the nodes
    /// with values.
    #[allow(clippy::too_many_arguments)]
    fn cut_truncation(
        &mut self,
        ws: &mut Workspace,
        op: &AxisOp,
        inp: &Inputs,
        (j, i): (usize, usize),
        c: usize,
        comp_s: &Stencil,
        p: Pair,
    ) {
        let Pair { su, sv, nu, nv } = p;
        let bias: Option<Shared> = match &op.bias[c] {
            Some(b) if b.0.fits(j, i, inp.ok) => Some(b.clone()),
            _ => {
                let fh = op.fit_half[c];
                let (sj, si) = inward_shift(inp.ok.dim(), (j, i), fh);
                let (cj, ci) = ((j as i32 + sj) as usize, (i as i32 + si) as usize);
                let fp = op.fp_bias[c] ^ shift_key(sj, si);
                let key = pattern(inp.ok, cj, ci, fh).map(|m| (fp, m));
                let make = || {
                    let offs: Vec<(i32, i32)> = window(fh)
                        .into_iter()
                        .map(|(dj, di)| (dj + sj, di + si))
                        .filter(|&(dj, di)| in_ok(inp.ok, j, i, dj, di))
                        .collect();
                    bias_stencil(comp_s, op.axis, op.h, offs, fh)
                };
                ws.stencil(key, make, &inp.corr)
            }
        };
        let k = k_of(inp, j, i);
        if let Some(bs) = &bias {
            let (b, bg) = (&bs.0, &bs.1);
            if nu {
                self.bias[su][k] = b.apply_at(inp.u, j, i);
                self.bvar[su][k] = inp.corr.variance_at(b, *bg, inp.sig_u, j, i);
            }
            if nv {
                self.bias[sv][k] = b.apply_at(inp.v, j, i);
                self.bvar[sv][k] = inp.corr.variance_at(b, *bg, inp.sig_v, j, i);
            }
        }
    }

    /// The filled buffers as the tensor's arrays.
    fn finish(self, ny: usize, nx: usize) -> Grad {
        let arr = |v: [Vec<f64>; 4]| {
            v.map(|x| {
                let sh = if x.is_empty() { (0, 0) } else { (ny, nx) };
                Array2::from_shape_vec(sh, x).expect("grid shape")
            })
        };
        Grad {
            val: arr(self.val),
            var: arr(self.var),
            bias: arr(self.bias),
            bvar: arr(self.bvar),
            fallback: self.fallback,
        }
    }
}

/// How far the truncation fit's window of half-widths `fh` moves from
/// node `(j, i)` towards the interior so that it lies inside a grid of
/// `dim` nodes (where the grid is that large): at a grid edge the fit keeps
/// its full size, one-sided, instead of losing the half beyond the edge.
/// A window cut by the edge held too few nodes for the degree-5 fit, and the
/// degree-3 fit on the half that was left missed most of a one-sided
/// stencil's truncation in a vortex core (measured on the demo wake: the
/// edge columns' mean vorticity off by 2-5 1/s against an estimate of
/// 0.4-0.9). Masks inside the grid do not move the window.
fn inward_shift(dim: (usize, usize), (j, i): (usize, usize), fh: (i32, i32)) -> (i32, i32) {
    let along = |n: usize, at: usize, h: i32| -> i32 {
        let (n, at) = (n as i32, at as i32);
        if 2 * h + 1 > n {
            0
        } else if at < h {
            h - at
        } else if at + h > n - 1 {
            n - 1 - h - at
        } else {
            0
        }
    };
    (along(dim.0, j, fh.0), along(dim.1, i, fh.1))
}

/// A cache-key term for a window shifted by `(sj, si)` (zero when not).
fn shift_key(sj: i32, si: i32) -> u64 {
    if (sj, si) == (0, 0) {
        return 0;
    }
    let z = ((sj as u32 as u64) << 32) | (si as u32 as u64);
    z.wrapping_mul(0x9E37_79B9_7F4A_7C15).rotate_left(17)
}

/// The row-major index of node `(j, i)`.
#[inline]
fn k_of(inp: &Inputs, j: usize, i: usize) -> usize {
    j * inp.ok.ncols() + i
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
