//! The one rule for a smoothing stencil cut by the grid's edge or a mask.
//!
//! Owns: `Cut` (how a smoother continues where some of its taps land on
//! nodes without a value) and `cut`, which returns the operator actually
//! applied at such a node. Every user of a smoother near an edge or a mask
//! goes through `cut`: the smoothed values (`smooth::Smoother::apply`), their
//! uncertainty (`derive`), the composites of derivative and smoother and the
//! truncation fits built on them (`derive::gradient`). So a smoothed value
//! and its uncertainty always describe the same operator (issue 11 item 10;
//! before, Savitzky-Golay kept the raw value where its kernel was cut while
//! the uncertainty used the cut kernel renormalised).
//! Does not own: derivative fallbacks (`derivatives::chain`, a separate
//! choice of narrower stencils).
//!
//! # The rules
//!
//! - `Renormalise` (kernels without negative weights: Gaussian): the weights
//!   on nodes with a value, divided by their sum, i.e. the kernel-weighted
//!   local mean (a weighted least-squares fit of degree 0; common practice).
//!   A constant passes unchanged.
//! - `Refit { degree }` (kernels with negative weights that are local
//!   polynomial fits: Savitzky-Golay): the least-squares polynomial of total
//!   degree `degree` fitted to the nodes of the kernel's support that carry
//!   a value, evaluated at the node (Savitzky & Golay 1964; the same fit the
//!   kernel is in the interior). Where those nodes do not determine the fit
//!   the degree drops by one until they do. Polynomials up to the degree
//!   used pass unchanged.
//! - `Reflect` (DCT penalized least squares): taps beyond the grid's edge
//!   fold back by half-sample symmetry (`-1 - j`, `2 n - 1 - j`), the even
//!   extension the DCT-II solver works on, so at edges of a grid without
//!   masks this is the solver's operator (to the kernel's truncation, 1e-6);
//!   taps on masked nodes are then dropped and the rest renormalised to unit
//!   sum (an approximation: the weighted solver's operator next to a mask
//!   is not a simple function of the interior kernel).
//!
//! At a node where the whole kernel fits, `cut` returns the kernel itself.
//! `None` where no tap has a value (the node gets no smoothed value).

use ndarray::Array2;

use super::lsq::PolyFit;
use super::{Stencil, Tap};

/// How a smoothing stencil continues where it is cut (module docs).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Cut {
    Renormalise,
    Refit { degree: u32 },
    Reflect,
}

#[inline]
fn inside(ok: &Array2<bool>, jj: i64, ii: i64) -> bool {
    let (ny, nx) = ok.dim();
    jj >= 0 && ii >= 0 && (jj as usize) < ny && (ii as usize) < nx && ok[[jj as usize, ii as usize]]
}

/// Folds an index into `0..n` by half-sample symmetry (repeatedly, for
/// kernels wider than the grid).
fn fold(mut k: i64, n: i64) -> i64 {
    loop {
        if k < 0 {
            k = -1 - k;
        } else if k >= n {
            k = 2 * n - 1 - k;
        } else {
            return k;
        }
    }
}

/// `s` restricted to the nodes with a value around `(j, i)`, renormalised
/// to unit sum; `None` when none has a value or the sum vanishes.
fn renormalised(taps: Vec<Tap>) -> Option<Stencil> {
    let sum: f64 = taps.iter().map(|t| t.w).sum();
    if taps.is_empty() || sum.abs() < 1e-12 {
        return None;
    }
    Some(Stencil::new(taps).scaled(1.0 / sum))
}

/// The operator the smoothing stencil `s` with rule `rule` applies at node
/// `(j, i)` of a grid whose nodes with a value are `ok` (module docs).
pub(crate) fn cut(
    s: &Stencil,
    rule: Cut,
    ok: &Array2<bool>,
    j: usize,
    i: usize,
) -> Option<Stencil> {
    if s.fits(j, i, ok) {
        return Some(s.clone());
    }
    let (j, i) = (j as i64, i as i64);
    match rule {
        Cut::Renormalise => renormalised(
            s.taps
                .iter()
                .filter(|t| inside(ok, j + t.dj as i64, i + t.di as i64))
                .copied()
                .collect(),
        ),
        Cut::Reflect => {
            let (ny, nx) = ok.dim();
            let taps = s
                .taps
                .iter()
                .map(|t| {
                    let jj = fold(j + t.dj as i64, ny as i64);
                    let ii = fold(i + t.di as i64, nx as i64);
                    Tap {
                        dj: (jj - j) as i32,
                        di: (ii - i) as i32,
                        w: t.w,
                    }
                })
                .filter(|t| inside(ok, j + t.dj as i64, i + t.di as i64))
                .collect();
            renormalised(taps)
        }
        Cut::Refit { degree } => {
            let offsets: Vec<(i32, i32)> = s
                .taps
                .iter()
                .filter(|t| inside(ok, j + t.dj as i64, i + t.di as i64))
                .map(|t| (t.dj, t.di))
                .collect();
            if offsets.is_empty() {
                return None;
            }
            (0..=degree)
                .rev()
                .find_map(|d| PolyFit::new(offsets.clone(), d).map(|f| f.value_at(0, 0)))
        }
    }
}

/// The highest even total degree `d <= 6` whose monomials `s` reproduces
/// at its centre (moment (0,0) = 1, every moment of order 1..=d zero): the
/// degree of the local fit a Savitzky-Golay kernel is.
pub(crate) fn reproduced_degree(s: &Stencil) -> u32 {
    let scale: f64 = s.taps.iter().map(|t| t.w.abs()).sum();
    let exact = |d: u32| {
        (0..=d).all(|p| {
            let m = s.moment(p, d - p);
            let want = if d == 0 { 1.0 } else { 0.0 };
            (m - want).abs()
                <= 1e-9
                    * scale.max(1.0)
                    * (1.0 + (s.reach().0.max(s.reach().1) as f64).powi(d as i32))
        })
    };
    let mut best = 0;
    for d in 1..=6 {
        if !exact(d) {
            break;
        }
        if d % 2 == 0 {
            best = d;
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stencil::smooth::{gaussian, pls_kernel, savitzky_golay};
    use crate::testutil::assert_close;

    #[test]
    fn savitzky_golay_cut_by_an_edge_is_the_one_sided_fit_and_keeps_quadratics() {
        // Savitzky & Golay 1964: the cut kernel is the least-squares
        // quadratic on the nodes left; it reproduces any quadratic.
        let sg = savitzky_golay(2, 2);
        assert_eq!(reproduced_degree(&sg), 2);
        let ok = Array2::from_elem((8, 8), true);
        let c = cut(&sg, Cut::Refit { degree: 2 }, &ok, 0, 1).unwrap();
        let f = |x: f64, y: f64| 1.0 + 0.5 * x - 0.3 * y + 0.2 * x * x - 0.1 * x * y + 0.05 * y * y;
        let a = Array2::from_shape_fn((8, 8), |(j, i)| f(i as f64, j as f64));
        assert_close(
            c.apply_at(&a, 0, 1),
            f(1.0, 0.0),
            1e-10,
            0.0,
            "quadratic at the edge",
        );
        assert!(c.taps.iter().all(|t| t.dj >= 0), "no tap beyond the edge");
        // The interior is the kernel itself.
        assert_eq!(cut(&sg, Cut::Refit { degree: 2 }, &ok, 4, 4).unwrap(), sg);
    }

    #[test]
    fn gaussian_cut_is_renormalised_and_pls_is_folded() {
        let g = gaussian(1.0);
        assert_eq!(reproduced_degree(&g), 0);
        let ok = Array2::from_elem((10, 10), true);
        let c = cut(&g, Cut::Renormalise, &ok, 0, 0).unwrap();
        let sum: f64 = c.taps.iter().map(|t| t.w).sum();
        assert_close(sum, 1.0, 1e-14, 0.0, "unit sum");
        // PLS on a full grid: the folded kernel applied at an edge node is
        // the solver's own output there (DCT-II even extension, derived).
        let s = 3.0;
        let k = pls_kernel(s);
        let (ny, nx) = (24, 26);
        let a = Array2::from_shape_fn((ny, nx), |(j, i)| ((j * 7 + i * 3) % 11) as f64 * 0.1);
        let y: Vec<f64> = a.iter().copied().collect();
        let z = crate::stencil::pls::Pls::new(ny, nx).smooth_full(&y, s);
        let full = Array2::from_elem((ny, nx), true);
        for (j, i) in [(0, 0), (0, 7), (5, 0), (23, 25), (12, 13)] {
            let c = cut(&k, Cut::Reflect, &full, j, i).unwrap();
            assert_close(
                c.apply_at(&a, j, i),
                z[j * nx + i],
                2e-5,
                0.0,
                &format!("({j},{i})"),
            );
        }
    }
}
