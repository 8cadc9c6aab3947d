//! First-derivative stencils and their fallback chains at edges and masks.
//!
//! Owns: the differentiation schemes as `Stencil`s (with the 1/h of the grid
//! pitch in the weights) and the ordered list of narrower stencils a node
//! falls back to when the scheme's own stencil does not fit.
//! Does not own: which scheme a run uses (the plan) or the choice per node
//! of `auto` (`derive`).
//!
//! Schemes along one axis, pitch h (Raffel et al. 2018, from memory;
//! truncation and noise factors derived, docs/methods.md):
//!
//! | scheme | weights (x h) | truncation | noise factor |
//! |---|---|---|---|
//! | central | (f1 - f-1)/2 | h^2 f'''/6 | 0.707 |
//! | Richardson | (f-2 - 8f-1 + 8f1 - f2)/12 | -h^4 f^(5)/30 | 0.950 |
//! | least squares, window 5, order 1 | (2f2 + f1 - f-1 - 2f-2)/10 | 17 h^2 f'''/30 | 0.316 |
//! | least squares, window w, order p | Savitzky-Golay (`lsq`) | O(h^(p+1)) or O(h^(p+2)) | |
//! | circulation, 8 points | central in x, (1,2,1)/4 across | h^2 (f_xxx/6 + f_xyy/4) | 0.433 |
//! | forward/backward, 2nd order | (-3f0 + 4f1 - f2)/2 | h^2 f'''/3 | 2.55 |
//! | forward/backward, 1st order | f1 - f0 | h f''/2 | 1.414 |
//!
//! The circulation estimate `omega = Gamma/(4 h^2)` around the 3 x 3 box
//! with the trapezoidal rule is, term by term, the central difference of v
//! in x weighted (1, 2, 1)/4 over the three rows, minus the same for u in
//! y; so it is a pair of derivative stencils like every other scheme, and
//! its vorticity noise factor sqrt(2 * 3/16) = 0.612 (docs/methods.md).
//!
//! Edge and mask treatment: a node uses the first stencil of its scheme's
//! chain whose taps all land on nodes that carry a value. Chains narrow
//! step by step: the scheme itself; for least squares the same fit over
//! windows two nodes narrower; then central; then the 2nd-order one-sided
//! stencils (forward, then backward); then the 1st-order one-sided ones.
//! A node where none fits (an isolated node or a one-node-wide strip) gets
//! no derivative: NaN, never a guess.

use super::lsq::savgol_derivative;
use super::{Stencil, Tap};

/// A fixed differentiation scheme (in the manifest: `{"name": "central"}`,
/// `{"name": "least-squares", "window": 5, "order": 1}`, …).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(tag = "name", rename_all = "kebab-case")]
pub enum DiffScheme {
    /// `central`: (f1 − f−1)/(2h), truncation h² f‴/6, noise factor 0.707.
    Central,
    /// `richardson`: (f−2 − 8f−1 + 8f1 − f2)/(12h), fourth order, noise
    /// factor 0.950.
    Richardson,
    /// Local least-squares polynomial (Savitzky-Golay) of `order` over
    /// `window` nodes; window 5, order 1 is the 4-point stencil.
    LeastSquares {
        /// Nodes in the fit, odd (`[derivatives] window`, default 5).
        window: usize,
        /// Polynomial order (`[derivatives] order`, default 1).
        order: u32,
    },
    /// `circulation`: ω = Γ/(4h²) around the 3 × 3 box (trapezoidal
    /// rule), vorticity noise factor 0.612.
    Circulation,
}

impl DiffScheme {
    /// Short name, as in the pipeline file.
    pub(crate) fn name(&self) -> &'static str {
        match self {
            DiffScheme::Central => "central",
            DiffScheme::Richardson => "richardson",
            DiffScheme::LeastSquares { .. } => "least-squares",
            DiffScheme::Circulation => "circulation",
        }
    }

    /// Whether this scheme's truncation is measured against the reference
    /// scheme (least squares) rather than by the degree-5 fit of
    /// `derive::gradient`: true for the fourth-order scheme, whose leading
    /// error is of the fit's own order, so that where a core spans few
    /// nodes the fit misses most of it (`derive::choice::against_reference`).
    pub(crate) fn truncation_from_reference(&self) -> bool {
        matches!(self, DiffScheme::Richardson)
    }

    /// The scheme in plain words: "central differences", "least squares,
    /// window 5, order 1", …
    pub(crate) fn describe(&self) -> String {
        match self {
            DiffScheme::Central => "central differences".into(),
            DiffScheme::Richardson => "fourth-order central differences (Richardson)".into(),
            DiffScheme::LeastSquares { window, order } => {
                format!("least squares, window {window}, order {order}")
            }
            DiffScheme::Circulation => "circulation around the 3 x 3 box".into(),
        }
    }
}

/// An axis of the grid.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Axis {
    /// Along i (columns), pitch dx.
    X,
    /// Along j (rows), pitch dy.
    Y,
}

/// Builds a stencil along `axis` from weights at offsets along it and,
/// optionally, across it: `(along, across, w)` with the weight in index
/// units, divided by the pitch `h`.
fn along(axis: Axis, h: f64, taps: &[(i32, i32, f64)]) -> Stencil {
    Stencil::new(
        taps.iter()
            .map(|&(a, c, w)| match axis {
                Axis::X => Tap {
                    dj: c,
                    di: a,
                    w: w / h,
                },
                Axis::Y => Tap {
                    dj: a,
                    di: c,
                    w: w / h,
                },
            })
            .collect(),
    )
}

pub(crate) fn central(axis: Axis, h: f64) -> Stencil {
    along(axis, h, &[(-1, 0, -0.5), (1, 0, 0.5)])
}

pub(crate) fn richardson(axis: Axis, h: f64) -> Stencil {
    let k = 1.0 / 12.0;
    along(
        axis,
        h,
        &[(-2, 0, k), (-1, 0, -8.0 * k), (1, 0, 8.0 * k), (2, 0, -k)],
    )
}

/// Savitzky-Golay derivative along `axis`; `None` for an impossible
/// window/order (see `lsq::savgol_derivative`).
pub(crate) fn least_squares(axis: Axis, h: f64, window: usize, order: u32) -> Option<Stencil> {
    let s = savgol_derivative(window, order)?;
    let t: Vec<(i32, i32, f64)> = s.taps.iter().map(|t| (t.di, 0, t.w)).collect();
    Some(along(axis, h, &t))
}

pub(crate) fn circulation(axis: Axis, h: f64) -> Stencil {
    let mut t = Vec::new();
    for (c, wc) in [(-1, 0.25), (0, 0.5), (1, 0.25)] {
        t.push((-1, c, -0.5 * wc));
        t.push((1, c, 0.5 * wc));
    }
    along(axis, h, &t)
}

/// Second-order one-sided difference looking towards `+axis` (`sign` = 1)
/// or `-axis` (`sign` = -1).
pub(crate) fn one_sided2(axis: Axis, h: f64, sign: i32) -> Stencil {
    let s = sign as f64;
    along(
        axis,
        h,
        &[
            (0, 0, -1.5 * s),
            (sign, 0, 2.0 * s),
            (2 * sign, 0, -0.5 * s),
        ],
    )
}

/// First-order one-sided difference towards `sign`.
pub(crate) fn one_sided1(axis: Axis, h: f64, sign: i32) -> Stencil {
    let s = sign as f64;
    along(axis, h, &[(0, 0, -s), (sign, 0, s)])
}

/// The scheme's own stencil along `axis`.
pub(crate) fn stencil(scheme: DiffScheme, axis: Axis, h: f64) -> Stencil {
    match scheme {
        DiffScheme::Central => central(axis, h),
        DiffScheme::Richardson => richardson(axis, h),
        DiffScheme::LeastSquares { window, order } => {
            least_squares(axis, h, window, order).expect("window and order checked by the plan")
        }
        DiffScheme::Circulation => circulation(axis, h),
    }
}

/// The fallback chain of `scheme` along `axis`, widest first (see the
/// module docs). Stencils that repeat an earlier one are left out.
pub(crate) fn chain(scheme: DiffScheme, axis: Axis, h: f64) -> Vec<Stencil> {
    let mut out = vec![stencil(scheme, axis, h)];
    if let DiffScheme::LeastSquares { window, order } = scheme {
        let mut w = window;
        while w > 3 {
            w -= 2;
            let o = order.min(w as u32 - 1);
            if let Some(s) = least_squares(axis, h, w, o) {
                out.push(s);
            }
        }
    }
    out.push(central(axis, h));
    out.push(one_sided2(axis, h, 1));
    out.push(one_sided2(axis, h, -1));
    out.push(one_sided1(axis, h, 1));
    out.push(one_sided1(axis, h, -1));
    let mut uniq: Vec<Stencil> = Vec::with_capacity(out.len());
    for s in out {
        if !uniq.iter().any(|u| approx_same(u, &s)) {
            uniq.push(s);
        }
    }
    uniq
}

fn approx_same(a: &Stencil, b: &Stencil) -> bool {
    a.taps.len() == b.taps.len()
        && a.taps.iter().zip(&b.taps).all(|(p, q)| {
            p.dj == q.dj && p.di == q.di && (p.w - q.w).abs() <= 1e-12 * p.w.abs().max(q.w.abs())
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::assert_close;

    #[test]
    fn noise_factors_equal_the_methods_table() {
        // Raffel et al. 2018, textbook table (from memory); the derived
        // values are exact: sqrt(1/2), sqrt(130)/12, sqrt(10)/10, and for
        // vorticity x sqrt(2); circulation sqrt(3/8) (docs/methods.md).
        let h = 1.0;
        let c = central(Axis::X, h).noise_factor();
        let r = richardson(Axis::X, h).noise_factor();
        let l = least_squares(Axis::X, h, 5, 1).unwrap().noise_factor();
        let f = one_sided1(Axis::X, h, 1).noise_factor();
        let g = circulation(Axis::X, h).noise_factor();
        assert_close(c, 0.5f64.sqrt(), 1e-15, 0.0, "central");
        assert_close(r, 130f64.sqrt() / 12.0, 1e-15, 0.0, "richardson");
        assert_close(l, 0.1f64.sqrt(), 1e-15, 0.0, "least squares");
        assert_close(f, 2f64.sqrt(), 1e-15, 0.0, "forward");
        // The table's rounded values.
        for (got, table) in [(f, 1.414), (c, 0.707), (r, 0.950), (l, 0.316)] {
            assert_close(got, table, 5e-4, 0.0, "table value");
        }
        let s2 = 2f64.sqrt();
        for (got, table) in [
            (f * s2, 2.000),
            (c * s2, 1.000),
            (r * s2, 1.344),
            (l * s2, 0.447),
            (g * s2, 0.612),
        ] {
            assert_close(got, table, 5e-4, 0.0, "vorticity table value");
        }
    }

    #[test]
    fn every_chain_member_is_exact_for_quadratics_or_lines() {
        // Each stencil differentiates a linear function exactly (moment 1 =
        // 1/h, moment 0 = 0); all but the 1st-order one-sided ones also a
        // quadratic (moment 2 = 0). Common practice (Taylor expansion).
        for scheme in [
            DiffScheme::Central,
            DiffScheme::Richardson,
            DiffScheme::LeastSquares {
                window: 7,
                order: 3,
            },
            DiffScheme::Circulation,
        ] {
            let h = 0.5;
            let ch = chain(scheme, Axis::Y, h);
            assert!(ch.len() >= 5, "{scheme:?} chain has {} stencils", ch.len());
            for (k, s) in ch.iter().enumerate() {
                assert_close(s.moment(0, 0), 0.0, 1e-12, 0.0, "moment 0");
                assert_close(s.moment(0, 1), 1.0 / h, 1e-12, 0.0, "moment 1");
                assert_close(s.moment(1, 0), 0.0, 1e-12, 0.0, "cross moment");
                if k + 2 < ch.len() {
                    assert_close(s.moment(0, 2), 0.0, 1e-12, 0.0, "moment 2");
                }
            }
        }
    }

    #[test]
    fn truncation_coefficients_equal_the_taylor_moments() {
        // Leading truncation = moment(3)/3! h^2 f''' (common practice):
        // central 1/6, 4-point least squares 17/30 (docs/methods.md), one-sided
        // 2nd order -1/3 (derived); Richardson's moment 3 vanishes and its
        // moment 5 / 5! = -1/30 (derived).
        let m3 = |s: Stencil| s.moment(3, 0) / 6.0;
        assert_close(m3(central(Axis::X, 1.0)), 1.0 / 6.0, 1e-15, 0.0, "central");
        assert_close(
            m3(least_squares(Axis::X, 1.0, 5, 1).unwrap()),
            17.0 / 30.0,
            1e-14,
            0.0,
            "ls",
        );
        assert_close(
            m3(one_sided2(Axis::X, 1.0, 1)),
            -1.0 / 3.0,
            1e-15,
            0.0,
            "one-sided",
        );
        let r = richardson(Axis::X, 1.0);
        assert_close(r.moment(3, 0), 0.0, 1e-14, 0.0, "richardson m3");
        assert_close(
            r.moment(5, 0) / 120.0,
            -1.0 / 30.0,
            1e-14,
            0.0,
            "richardson m5",
        );
        let c = circulation(Axis::X, 1.0);
        assert_close(
            c.moment(1, 2) / 2.0,
            0.25,
            1e-15,
            0.0,
            "circulation cross term",
        );
    }
}
