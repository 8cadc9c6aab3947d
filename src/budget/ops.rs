//! The per-frame fields of the budget: seven linear functionals of the
//! velocity, each one composite stencil on u and one on v.
//!
//! Owns: which stencils make each field (`Ops`), evaluating them on a
//! frame, and their noise Gram matrices (the covariance of the fields for
//! independent unit errors in u or in v). Does not own: accumulation over
//! frames (`acc`) or the terms (`terms`).
//!
//! Fields, in order (`F_*`): u, v, omega = Dx v - Dy u, d omega/dx,
//! d omega/dy, laplacian(omega), the in-plane divergence Dx u + Dy v, and
//! the divergence of the vorticity flux Dx(u omega) + Dy(v omega), whose bin
//! mean and covariances give the turbulent term and its uncertainty.
//! `D` is the first-derivative stencil of the chosen scheme, `L` the
//! five-point Laplacian (`stencil::second`), composed with `Stencil::after`:
//! d omega/dx = Dx∘Dx on v - Dx∘Dy on u, laplacian(omega) = L∘Dx on v -
//! L∘Dy on u. The values are computed in stages (omega, then its
//! derivatives) which equals applying the composites, because the stencils
//! are linear and a NaN at any tap makes the result NaN (tested).
//! When a smoother runs before the derivatives, the Gram matrices are
//! those of the composites after the smoother's equivalent stencil, so the
//! noise correlation the smoother makes is carried.
//!
//! Edges and gaps: a field is NaN wherever one of its composite's taps
//! falls outside the grid or on a node without a value; no narrower
//! fallback stencil is used (a budget mixing stencils of different
//! truncation would not close cleanly). With central differences the
//! outermost two rows and columns carry no budget.

use ndarray::Array2;

use crate::stencil::derivatives::{stencil as first, Axis, DiffScheme};
use crate::stencil::second::laplacian;
use crate::stencil::Stencil;

pub(crate) const F_U: usize = 0;
pub(crate) const F_V: usize = 1;
pub(crate) const F_W: usize = 2;
pub(crate) const F_WX: usize = 3;
pub(crate) const F_WY: usize = 4;
pub(crate) const F_LAP: usize = 5;
pub(crate) const F_DIV: usize = 6;
/// The divergence of the instantaneous vorticity flux, `Dx(u w) + Dy(v w)`
/// (not linear: its stencils are empty and its noise Gram entries 0).
pub(crate) const F_Q: usize = 7;
/// Number of per-frame fields.
pub(crate) const NF: usize = 8;

/// Index of the pair (a, b), a <= b, in the packed upper triangle of a
/// symmetric NF x NF matrix.
#[inline]
pub(crate) fn tri(a: usize, b: usize) -> usize {
    let (a, b) = if a <= b { (a, b) } else { (b, a) };
    a * NF - a * (a + 1) / 2 + b
}
/// Length of the packed upper triangle.
pub const NT: usize = NF * (NF + 1) / 2;

/// The stencils of the budget on one grid.
#[derive(Debug, Clone)]
pub struct Ops {
    pub dx: Stencil,
    pub dy: Stencil,
    pub lap: Stencil,
    /// Per field, the composite stencil on u and on v.
    pub on_u: Vec<Stencil>,
    pub on_v: Vec<Stencil>,
    /// Noise Gram matrices (packed): `sum_k w_a,k w_b,k` over the taps of
    /// the composites on u (`gram_u`) and on v (`gram_v`).
    pub gram_u: [f64; NT],
    pub gram_v: [f64; NT],
}

impl Ops {
    /// The stencils of `scheme` on pitches `dx`, `dy`, after `smoother`
    /// (its equivalent stencil; `None`: no smoothing).
    pub(crate) fn new(scheme: DiffScheme, dx: f64, dy: f64, smoother: Option<&Stencil>) -> Ops {
        let ddx = first(scheme, Axis::X, dx);
        let ddy = first(scheme, Axis::Y, dy);
        let lap = laplacian(dx, dy);
        let id = Stencil::identity();
        let none = Stencil::default();
        let neg = |s: &Stencil| s.scaled(-1.0);
        let on_u = vec![
            id.clone(),
            none.clone(),
            neg(&ddy),
            neg(&ddx.after(&ddy)),
            neg(&ddy.after(&ddy)),
            neg(&lap.after(&ddy)),
            ddx.clone(),
            Stencil::default(),
        ];
        let on_v = vec![
            none,
            id,
            ddx.clone(),
            ddx.after(&ddx),
            ddy.after(&ddx),
            lap.after(&ddx),
            ddy.clone(),
            Stencil::default(),
        ];
        let smooth = |v: &[Stencil]| -> Vec<Stencil> {
            match smoother {
                Some(s) => v.iter().map(|x| x.after(s)).collect(),
                None => v.to_vec(),
            }
        };
        let (gram_u, gram_v) = (gram(&smooth(&on_u)), gram(&smooth(&on_v)));
        Ops {
            dx: ddx,
            dy: ddy,
            lap,
            on_u,
            on_v,
            gram_u,
            gram_v,
        }
    }

    /// The eight fields of one frame, field-major (`out[f * nodes + k]`),
    /// NaN where a composite does not fit. `u`, `v` are NaN where the node
    /// carries no sample.
    pub(crate) fn eval(&self, u: &Array2<f64>, v: &Array2<f64>) -> Vec<f64> {
        let (ny, nx) = u.dim();
        let n = ny * nx;
        let mut out = vec![f64::NAN; NF * n];
        let w = Array2::from_shape_fn((ny, nx), |(j, i)| {
            apply(&self.dx, v, j, i) - apply(&self.dy, u, j, i)
        });
        let uw = u * &w;
        let vw = v * &w;
        for j in 0..ny {
            for i in 0..nx {
                let k = j * nx + i;
                out[F_U * n + k] = u[[j, i]];
                out[F_V * n + k] = v[[j, i]];
                out[F_W * n + k] = w[[j, i]];
                out[F_WX * n + k] = apply(&self.dx, &w, j, i);
                out[F_WY * n + k] = apply(&self.dy, &w, j, i);
                out[F_LAP * n + k] = apply(&self.lap, &w, j, i);
                out[F_DIV * n + k] = apply(&self.dx, u, j, i) + apply(&self.dy, v, j, i);
                out[F_Q * n + k] = apply(&self.dx, &uw, j, i) + apply(&self.dy, &vw, j, i);
            }
        }
        out
    }
}

/// `s` at (j, i), NaN when a tap falls outside the grid (NaN inputs
/// propagate by arithmetic).
pub(crate) fn apply(s: &Stencil, a: &Array2<f64>, j: usize, i: usize) -> f64 {
    let (ny, nx) = a.dim();
    let mut acc = 0.0;
    for t in &s.taps {
        let jj = j as i64 + t.dj as i64;
        let ii = i as i64 + t.di as i64;
        if jj < 0 || ii < 0 || jj as usize >= ny || ii as usize >= nx {
            return f64::NAN;
        }
        acc += t.w * a[[jj as usize, ii as usize]];
    }
    acc
}

/// Packed `sum_k w_a,k w_b,k` over shared offsets of each pair of stencils.
fn gram(s: &[Stencil]) -> [f64; NT] {
    let mut g = [0.0; NT];
    for a in 0..NF {
        for b in a..NF {
            g[tri(a, b)] = s[a]
                .taps
                .iter()
                .map(|ta| {
                    s[b].taps
                        .iter()
                        .filter(|tb| tb.dj == ta.dj && tb.di == ta.di)
                        .map(|tb| ta.w * tb.w)
                        .sum::<f64>()
                })
                .sum();
        }
    }
    g
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn staged_values_equal_the_composite_stencils_and_edges_are_nan() {
        let (dx, dy) = (0.01, 0.02);
        let ops = Ops::new(DiffScheme::Central, dx, dy, None);
        let u = Array2::from_shape_fn((9, 11), |(j, i)| ((i * 7 + j * 3) % 5) as f64 * 0.3);
        let v = Array2::from_shape_fn((9, 11), |(j, i)| ((i * 2 + j * 5) % 7) as f64 * 0.2);
        let out = ops.eval(&u, &v);
        let n = 99;
        for f in 0..F_Q {
            for (j, i) in [(2, 2), (4, 5), (6, 8)] {
                let want = apply(&ops.on_u[f], &u, j, i) + apply(&ops.on_v[f], &v, j, i);
                let got = out[f * n + j * 11 + i];
                assert!(
                    (got - want).abs() < 1e-9 * want.abs().max(1.0),
                    "{f}: {got} {want}"
                );
            }
        }
        assert!(out[F_LAP * n + 11 + 5].is_nan(), "row 1 has no laplacian");
        assert!(out[F_W * n + 11 + 5].is_finite(), "row 1 has omega");
    }

    #[test]
    fn gram_diagonal_is_the_squared_noise_factor() {
        let ops = Ops::new(DiffScheme::Central, 1.0, 1.0, None);
        for f in 0..NF {
            let nf2 = ops.on_u[f].noise_factor().powi(2);
            assert!((ops.gram_u[tri(f, f)] - nf2).abs() < 1e-12);
        }
        // omega = (v[i+1]-v[i-1])/2 - (u[j+1]-u[j-1])/2: variance 1/2 per unit sigma
        assert!((ops.gram_u[tri(F_W, F_W)] + ops.gram_v[tri(F_W, F_W)] - 1.0).abs() < 1e-12);
        // u at the node is not a tap of the central omega stencil
        assert_eq!(ops.gram_u[tri(F_U, F_W)], 0.0);
        assert_eq!(tri(NF - 1, NF - 1), NT - 1);
    }
}
