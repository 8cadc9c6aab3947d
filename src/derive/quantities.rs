//! The quantities built from the velocity-gradient tensor, their propagated
//! uncertainty and their truncation estimate; and Graftieaux's Gamma1/Gamma2.
//!
//! Owns: the table of quantities (name, unit, formula), first-order
//! propagation for the nonlinear ones, the debiased truncation magnitude,
//! and the Gamma criteria. Does not own: the tensor (`gradient`).
//!
//! With `a = du/dx, b = du/dy, c = dv/dx, d = dv/dy`:
//!
//! | name | formula | unit |
//! |---|---|---|
//! | omega | c - b (out-of-plane vorticity) | 1/s |
//! | div | a + d (in-plane divergence; = -dw/dz for incompressible flow) | 1/s |
//! | exx, eyy, exy | a, d, (b + c)/2 (strain-rate components) | 1/s |
//! | lambda_ci | sqrt(max(0, ad - bc - (a+d)^2/4)) (Zhou et al. 1999) | 1/s |
//! | q | -bc - (a^2 + d^2)/2 (Hunt, Wray & Moin 1988) | 1/s^2 |
//! | stretching | -omega (a + d) (= omega dw/dz, incompressible) | 1/s^2 |
//! | gamma1, gamma2 | Graftieaux et al. 2001, see `gamma` | 1 |
//!
//! Uncertainty: every quantity `f(a, b, c, d)` is linearised,
//! `u(f)^2 = sum_x (df/dx)^2 u(x)^2` (GUM eq. 10, first order). The four
//! components are treated as uncorrelated: u and v errors are independent,
//! and for a stencil antisymmetric along its axis and symmetric across it
//! (every interior stencil) with uniform uncertainty and a symmetric
//! correlation model the covariance of `du/dx` and `du/dy` vanishes
//! (derived: reflecting x flips the sign of one and not of the other). At
//! one-sided edge stencils this is an approximation. For `lambda_ci` with
//! `D = ad - bc - (a+d)^2/4`, `u(lambda) = u(D) / (2 sqrt(max(D, 0) + u(D)/4))`:
//! the first-order `u(D)/(2 lambda)` where `D >> u(D)`, and `sqrt(u(D))`,
//! the half-width of `sqrt` over `[0, u(D)]`, at `D = 0` where the first
//! order fails. Gamma1 and Gamma2 are bounded indicators; they carry no
//! uncertainty (None).
//!
//! Truncation: the signed estimates of the components combine with the same
//! coefficients; the estimate's own noise variance `v_b` is removed from its
//! square, `bias = sqrt(max(0, b^2 - v_b))` (an unbiased estimate of the
//! squared systematic error, clipped at zero), so that pure noise does not
//! pose as a systematic error. The signed `b` and `v_b` are handed on too:
//! the truncation of a *mean* is the mean of the signed estimates (the
//! estimate is linear in the data), debiased by the statistics stage.
//!
//! Noise bias of nonlinear quantities (the mean of `f(x + e)` is not
//! `f(x)`): to second order `E[f(x + e)] - f(x) = 1/2 sum_k f_kk var_k` for
//! uncorrelated components (Taylor expansion; GUM eq. 14's second-order
//! terms, common practice). Where that is exact it is returned as the
//! quantity's `shift`, which the statistics subtract from the mean:
//! - q: `f_aa = f_dd = -1`, `f_bb = f_cc = 0`, so `shift = -(var_a + var_d)/2`
//!   (exact: q is quadratic; the cross term `-bc` has no bias because b and
//!   c come from different velocity components, whose errors are independent);
//! - stretching `-(c - b)(a + d)`: no second derivatives on the diagonal and
//!   uncorrelated components, so `shift = 0` (exact);
//! - linear quantities: `shift = 0`;
//! - lambda_ci (a square root of a clipped quadratic form) has no such
//!   closed form: its mean is biased upwards by noise (positive in pure
//!   noise) and `shift` is NaN; the statistics flag it instead.
//!
//! NaN: a NaN component gives NaN (never 0); `f64::max` is not used on
//! values that can be NaN.

use ndarray::Array2;

use super::gradient::Grad;

/// Every quantity the stage can make, in output order, with its unit.
pub(crate) const ALL: [(&str, &str); 10] = [
    ("omega", "1/s"),
    ("div", "1/s"),
    ("exx", "1/s"),
    ("eyy", "1/s"),
    ("exy", "1/s"),
    ("lambda_ci", "1/s"),
    ("q", "1/s^2"),
    ("stretching", "1/s^2"),
    ("gamma1", "1"),
    ("gamma2", "1"),
];

/// The unit of a quantity name from `ALL`.
pub(crate) fn unit(name: &str) -> &'static str {
    ALL.iter().find(|(n, _)| *n == name).map_or("", |(_, u)| u)
}

/// `sqrt(max(0, b^2 - v_b))`; NaN in either stays NaN (`f64::max` would
/// turn it into 0: an unknown bias reported as none).
#[inline]
pub(crate) fn debias(b: f64, vb: f64) -> f64 {
    clip0(b * b - vb).sqrt()
}

/// `max(x, 0)` that keeps NaN (unknown stays unknown).
#[inline]
pub(crate) fn clip0(x: f64) -> f64 {
    if x < 0.0 {
        0.0
    } else {
        x
    }
}

/// One quantity at one node: what `at` gives.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Value {
    /// The value.
    pub val: f64,
    /// Propagated standard uncertainty (random part).
    pub unc: f64,
    /// Debiased truncation magnitude of this instantaneous value.
    pub bias: f64,
    /// Signed truncation estimate and its noise variance.
    pub b: f64,
    pub vb: f64,
    /// Expected shift of the value by noise (0 for linear quantities, NaN
    /// where no analytic form exists; see the module doc).
    pub shift: f64,
}

/// The tensor components at one node: values, variances, signed
/// truncation estimates and their noise variances.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Node {
    pub val: [f64; 4],
    pub var: [f64; 4],
    pub bias: [f64; 4],
    pub bvar: [f64; 4],
}

impl Node {
    #[inline]
    pub(crate) fn load(g: &Grad, j: usize, i: usize) -> Node {
        let get = |a: &[Array2<f64>; 4]| [a[0][[j, i]], a[1][[j, i]], a[2][[j, i]], a[3][[j, i]]];
        let (bias, bvar) = if g.has_truncation() {
            (get(&g.bias), get(&g.bvar))
        } else {
            ([f64::NAN; 4], [f64::NAN; 4])
        };
        Node {
            val: get(&g.val),
            var: get(&g.var),
            bias,
            bvar,
        }
    }
}

/// Four component slices (a, b, c, d).
type Slices4<'a> = [&'a [f64]; 4];

/// The tensor's arrays as flat slices (row-major), for one pass over nodes.
pub(crate) struct Flat<'a> {
    val: [&'a [f64]; 4],
    var: [&'a [f64]; 4],
    /// The truncation slots, `None` when truncation is not estimated (they
    /// hold only NaN then, and are not read).
    bias: Option<(Slices4<'a>, Slices4<'a>)>,
}

impl<'a> Flat<'a> {
    pub(crate) fn new(g: &'a Grad, truncation: bool) -> Flat<'a> {
        let s =
            |a: &'a [Array2<f64>; 4]| a.each_ref().map(|x| x.as_slice().expect("standard layout"));
        Flat {
            val: s(&g.val),
            var: s(&g.var),
            bias: (truncation && g.has_truncation()).then(|| (s(&g.bias), s(&g.bvar))),
        }
    }
    #[inline]
    pub(crate) fn node(&self, k: usize) -> Node {
        let get = |a: &[&[f64]; 4]| [a[0][k], a[1][k], a[2][k], a[3][k]];
        let (bias, bvar) = match &self.bias {
            Some((b, v)) => (get(b), get(v)),
            None => ([f64::NAN; 4], [f64::NAN; 4]),
        };
        Node {
            val: get(&self.val),
            var: get(&self.var),
            bias,
            bvar,
        }
    }
}

/// Value, variance, signed bias and bias variance of a linear combination
/// `sum_k c_k x_k` of the tensor components at one node.
#[inline]
pub(crate) fn linear(n: &Node, c: [f64; 4]) -> (f64, f64, f64, f64) {
    let (mut val, mut var, mut b, mut vb) = (0.0, 0.0, 0.0, 0.0);
    for (k, &ck) in c.iter().enumerate() {
        if ck != 0.0 {
            val += ck * n.val[k];
            var += ck * ck * n.var[k];
            b += ck * n.bias[k];
            vb += ck * ck * n.bvar[k];
        }
    }
    (val, var, b, vb)
}

/// A quantity of the tensor, resolved from its name once per frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Kind {
    Omega,
    Div,
    Exx,
    Eyy,
    Exy,
    LambdaCi,
    Q,
    Stretching,
}

impl Kind {
    /// The kind of a tensor quantity from `ALL` (None for the Gammas).
    pub(crate) fn of(name: &str) -> Option<Kind> {
        Some(match name {
            "omega" => Kind::Omega,
            "div" => Kind::Div,
            "exx" => Kind::Exx,
            "eyy" => Kind::Eyy,
            "exy" => Kind::Exy,
            "lambda_ci" => Kind::LambdaCi,
            "q" => Kind::Q,
            "stretching" => Kind::Stretching,
            _ => return None,
        })
    }
}

/// Value, standard uncertainty, truncation (debiased and signed) and noise
/// shift of a quantity at one node.
#[inline]
pub(crate) fn at(kind: Kind, n: &Node) -> Value {
    let [a, b, c, d] = n.val;
    let lin = |val: f64, co: [f64; 4], shift: f64| {
        let (_, var, bb, vb) = linear(n, co);
        Value {
            val,
            unc: var.sqrt(),
            bias: debias(bb, vb),
            b: bb,
            vb,
            shift,
        }
    };
    match kind {
        Kind::Omega => lin(c - b, [0.0, -1.0, 1.0, 0.0], 0.0),
        Kind::Div => lin(a + d, [1.0, 0.0, 0.0, 1.0], 0.0),
        Kind::Exx => lin(a, [1.0, 0.0, 0.0, 0.0], 0.0),
        Kind::Eyy => lin(d, [0.0, 0.0, 0.0, 1.0], 0.0),
        Kind::Exy => lin(0.5 * (b + c), [0.0, 0.5, 0.5, 0.0], 0.0),
        Kind::Q => lin(
            -b * c - 0.5 * (a * a + d * d),
            [-a, -c, -b, -d],
            -0.5 * (n.var[0] + n.var[3]),
        ),
        Kind::Stretching => {
            let (om, dv) = (c - b, a + d);
            lin(-om * dv, [-om, dv, -dv, -om], 0.0)
        }
        Kind::LambdaCi => {
            let dd = a * d - b * c - 0.25 * (a + d) * (a + d);
            let v = lin(f64::NAN, [0.5 * (d - a), -c, -b, 0.5 * (a - d)], f64::NAN);
            let (ud, pos) = (v.unc, clip0(dd));
            let den = 2.0 * (pos + 0.25 * ud).sqrt();
            let lam = pos.sqrt();
            if den > 0.0 {
                Value {
                    val: lam,
                    unc: ud / den,
                    bias: v.bias / den,
                    b: v.b / den,
                    vb: v.vb / (den * den),
                    shift: f64::NAN,
                }
            } else if den == 0.0 {
                // D <= 0 with no uncertainty at all: exactly no swirl.
                Value {
                    val: lam,
                    unc: 0.0,
                    bias: 0.0,
                    b: 0.0,
                    vb: 0.0,
                    shift: f64::NAN,
                }
            } else {
                // NaN anywhere: unknown, never 0.
                Value {
                    val: lam,
                    unc: f64::NAN,
                    bias: f64::NAN,
                    b: f64::NAN,
                    vb: f64::NAN,
                    shift: f64::NAN,
                }
            }
        }
    }
}

/// Graftieaux, Michard & Grosjean 2001 (Meas. Sci. Technol. 12:1422, from
/// memory): at P, over the neighbours M in a disc of `radius` nodes,
/// `Gamma1 = (1/N) sum (PM x U_M)_z / (|PM| |U_M|)` and Gamma2 the same with
/// `U_M - U_P~`, `U_P~` the mean velocity over the disc (P included).
/// A disc, not a square, because the angles of its nodes are close to
/// uniform, which the criterion's threshold 2/pi assumes (radius 2 gives
/// 0.638 for a linear field with rotation = strain, 2/pi = 0.6366; a 5 x 5
/// square gives 0.613, derived). Neighbours without a value are left out;
/// a neighbour with zero (relative) velocity contributes 0 and counts.
/// NaN where fewer than half of the disc's neighbours have values.
/// `ok` marks nodes with values; `dx`, `dy` the pitch.
pub fn gamma(
    u: &Array2<f64>,
    v: &Array2<f64>,
    ok: &Array2<bool>,
    radius: usize,
    dx: f64,
    dy: f64,
) -> (Array2<f64>, Array2<f64>) {
    let (ny, nx) = ok.dim();
    let r = radius as i64;
    let disc: Vec<(i64, i64, f64, f64, f64)> = (-r..=r)
        .flat_map(|dj| (-r..=r).map(move |di| (dj, di)))
        .filter(|&(dj, di)| (dj, di) != (0, 0) && dj * dj + di * di <= r * r)
        .map(|(dj, di)| {
            let (px, py) = (di as f64 * dx, dj as f64 * dy);
            let n = (px * px + py * py).sqrt();
            (dj, di, px / n, py / n, n)
        })
        .collect();
    let mut g1 = Array2::from_elem((ny, nx), f64::NAN);
    let mut g2 = Array2::from_elem((ny, nx), f64::NAN);
    let mut nb: Vec<(f64, f64, f64, f64)> = Vec::with_capacity(disc.len());
    for j in 0..ny {
        for i in 0..nx {
            if !ok[[j, i]] {
                continue;
            }
            nb.clear();
            let (mut su, mut sv) = (u[[j, i]], v[[j, i]]);
            for &(dj, di, ex, ey, _) in &disc {
                let (jj, ii) = (j as i64 + dj, i as i64 + di);
                if jj < 0 || ii < 0 || jj >= ny as i64 || ii >= nx as i64 {
                    continue;
                }
                let (jj, ii) = (jj as usize, ii as usize);
                if ok[[jj, ii]] {
                    let (um, vm) = (u[[jj, ii]], v[[jj, ii]]);
                    su += um;
                    sv += vm;
                    nb.push((ex, ey, um, vm));
                }
            }
            if nb.is_empty() || 2 * nb.len() < disc.len() {
                continue;
            }
            let m = (nb.len() + 1) as f64;
            let (mu, mv) = (su / m, sv / m);
            // Velocities below 1e-9 of the largest in the disc are zero
            // (rounding would otherwise give them an arbitrary direction).
            let (mut top1, mut top2) = (0.0f64, 0.0f64);
            for &(_, _, um, vm) in &nb {
                top1 = top1.max(um * um + vm * vm);
                top2 = top2.max((um - mu) * (um - mu) + (vm - mv) * (vm - mv));
            }
            let term = |ex: f64, ey: f64, a: f64, b: f64, top: f64| {
                let n2 = a * a + b * b;
                if n2 > 1e-18 * top {
                    (ex * b - ey * a) / n2.sqrt()
                } else {
                    0.0
                }
            };
            let (mut s1, mut s2) = (0.0, 0.0);
            for &(ex, ey, um, vm) in &nb {
                s1 += term(ex, ey, um, vm, top1);
                s2 += term(ex, ey, um - mu, vm - mv, top2);
            }
            g1[[j, i]] = s1 / nb.len() as f64;
            g2[[j, i]] = s2 / nb.len() as f64;
        }
    }
    (g1, g2)
}

#[cfg(test)]
mod nan_tests {
    use super::*;

    #[test]
    fn unknown_stays_nan_and_q_carries_its_analytic_noise_shift() {
        // f64::max(NaN, 0) is 0: the old debias and lambda_ci reported an
        // unknown bias or swirl as 0 (issue #11 item 9).
        assert!(debias(f64::NAN, 1.0).is_nan());
        assert!(debias(1.0, f64::NAN).is_nan());
        assert!(clip0(f64::NAN).is_nan());
        assert_eq!(debias(1.0, 4.0), 0.0);
        let mut n = Node {
            val: [0.1, -1.0, 1.0, -0.1],
            var: [0.01, 0.02, 0.03, 0.04],
            bias: [f64::NAN; 4],
            bvar: [f64::NAN; 4],
        };
        for kind in [Kind::Omega, Kind::LambdaCi, Kind::Q] {
            let v = at(kind, &n);
            assert!(v.bias.is_nan() && v.b.is_nan(), "{kind:?}: {v:?}");
        }
        // q's shift: -(var_a + var_d)/2 (derived: E[a^2] = a^2 + var_a).
        assert_eq!(at(Kind::Q, &n).shift, -0.5 * (0.01 + 0.04));
        assert_eq!(at(Kind::Omega, &n).shift, 0.0);
        assert!(at(Kind::LambdaCi, &n).shift.is_nan());
        n.val[0] = f64::NAN;
        let l = at(Kind::LambdaCi, &n);
        assert!(l.val.is_nan() && l.unc.is_nan(), "{l:?}");
    }
}
