//! Local polynomial least squares as stencils (Savitzky & Golay 1964).
//!
//! Owns: a small dense solver for the normal equations, the 1-D
//! Savitzky-Golay derivative weights of any window and order, and the 2-D
//! polynomial fit operator used to estimate truncation errors.
//! Does not own: which fit a stage uses.
//!
//! Method: fitting `p(s) = sum_m c_m phi_m(s)` to node values `f_k` at
//! offsets `s_k` by least squares gives `c = (A^T A)^-1 A^T f`, with
//! `A_km = phi_m(s_k)`. Every fitted quantity (a derivative at the centre, a
//! fitted value anywhere) is therefore a fixed linear combination of the
//! `f_k`: a stencil. Offsets are scaled by the window's half-width before
//! forming `A^T A`, which keeps the normal equations well conditioned for
//! the small windows used here (at most 9 x 9 nodes, degree 6).

use super::{Stencil, Tap};

/// Solves `M x = b` for a small dense symmetric positive definite `M`
/// (row-major, n x n) by Gaussian elimination with partial pivoting.
/// Returns `None` when `M` is singular to working precision (the fit is not
/// determined by the nodes available).
pub(crate) fn solve(m: &[f64], b: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut a = m.to_vec();
    let mut x = b.to_vec();
    let scale = a.iter().fold(0.0f64, |s, v| s.max(v.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return None;
    }
    for col in 0..n {
        let piv = (col..n)
            .max_by(|&p, &q| a[p * n + col].abs().total_cmp(&a[q * n + col].abs()))
            .unwrap();
        if a[piv * n + col].abs() <= 1e-12 * scale {
            return None;
        }
        if piv != col {
            for k in 0..n {
                a.swap(col * n + k, piv * n + k);
            }
            x.swap(col, piv);
        }
        let d = a[col * n + col];
        for r in col + 1..n {
            let f = a[r * n + col] / d;
            if f != 0.0 {
                for k in col..n {
                    a[r * n + k] -= f * a[col * n + k];
                }
                x[r] -= f * x[col];
            }
        }
    }
    for col in (0..n).rev() {
        let mut s = x[col];
        for k in col + 1..n {
            s -= a[col * n + k] * x[k];
        }
        x[col] = s / a[col * n + col];
    }
    Some(x)
}

/// Monomials `x^p y^q` of total degree `<= degree`, in order of degree,
/// then of decreasing `p`.
pub(crate) fn monomials(degree: u32) -> Vec<(u32, u32)> {
    let mut out = Vec::new();
    for d in 0..=degree {
        for q in 0..=d {
            out.push((d - q, q));
        }
    }
    out
}

/// A 2-D local polynomial fit: for node offsets `(dj, di)`, the row vectors
/// that map the node values to the fitted coefficients of `x^p y^q`
/// (x = di, y = dj in index units). `rows[m][k]` multiplies value `k`.
#[derive(Debug, Clone)]
pub(crate) struct PolyFit {
    pub offsets: Vec<(i32, i32)>,
    pub terms: Vec<(u32, u32)>,
    pub rows: Vec<Vec<f64>>,
}

impl PolyFit {
    /// The least-squares fit of total degree `degree` to the nodes at
    /// `offsets`; `None` when the nodes do not determine it.
    pub(crate) fn new(offsets: Vec<(i32, i32)>, degree: u32) -> Option<PolyFit> {
        PolyFit::with_terms(offsets, monomials(degree))
    }

    /// The least-squares fit of the monomials `terms` (`(p, q)` for
    /// `x^p y^q`); `None` when the nodes do not determine it.
    pub(crate) fn with_terms(offsets: Vec<(i32, i32)>, terms: Vec<(u32, u32)>) -> Option<PolyFit> {
        let nt = terms.len();
        if offsets.len() < nt {
            return None;
        }
        let half = offsets
            .iter()
            .fold(1i32, |m, &(dj, di)| m.max(dj.abs()).max(di.abs())) as f64;
        let phi = |dj: i32, di: i32| -> Vec<f64> {
            let (x, y) = (di as f64 / half, dj as f64 / half);
            terms
                .iter()
                .map(|&(p, q)| x.powi(p as i32) * y.powi(q as i32))
                .collect()
        };
        let a: Vec<Vec<f64>> = offsets.iter().map(|&(dj, di)| phi(dj, di)).collect();
        let mut ata = vec![0.0; nt * nt];
        for row in &a {
            for r in 0..nt {
                for c in 0..nt {
                    ata[r * nt + c] += row[r] * row[c];
                }
            }
        }
        // Inverse column by column; the fit rows are (A^T A)^-1 A^T.
        let mut inv = vec![0.0; nt * nt];
        for c in 0..nt {
            let mut e = vec![0.0; nt];
            e[c] = 1.0;
            let col = solve(&ata, &e, nt)?;
            for r in 0..nt {
                inv[r * nt + c] = col[r];
            }
        }
        let mut rows = vec![vec![0.0; offsets.len()]; nt];
        for (m, row) in rows.iter_mut().enumerate() {
            // Undo the coordinate scaling: coefficient of (x/half)^p (y/half)^q.
            let (p, q) = terms[m];
            let unscale = half.powi(-((p + q) as i32));
            for (k, ak) in a.iter().enumerate() {
                let s: f64 = (0..nt).map(|c| inv[m * nt + c] * ak[c]).sum();
                row[k] = s * unscale;
            }
        }
        Some(PolyFit {
            offsets,
            terms,
            rows,
        })
    }

    /// The stencil that gives the fitted coefficient of `x^p y^q`.
    pub(crate) fn coefficient(&self, p: u32, q: u32) -> Option<Stencil> {
        let m = self.terms.iter().position(|&t| t == (p, q))?;
        Some(self.stencil_of(&self.rows[m]))
    }

    /// The stencil that gives the fitted polynomial's value at `(dj, di)`.
    pub(crate) fn value_at(&self, dj: i32, di: i32) -> Stencil {
        let mut w = vec![0.0; self.offsets.len()];
        for (m, &(p, q)) in self.terms.iter().enumerate() {
            let phi = (di as f64).powi(p as i32) * (dj as f64).powi(q as i32);
            for (k, wk) in w.iter_mut().enumerate() {
                *wk += phi * self.rows[m][k];
            }
        }
        self.stencil_of(&w)
    }

    fn stencil_of(&self, w: &[f64]) -> Stencil {
        Stencil::new(
            self.offsets
                .iter()
                .zip(w)
                .map(|(&(dj, di), &w)| Tap { dj, di, w })
                .collect(),
        )
    }
}

/// Savitzky-Golay first-derivative weights along x: the derivative at the
/// centre of the least-squares polynomial of order `order` over `window`
/// nodes (odd, > order), in index units (divide by h). Taps at offsets
/// `-(window-1)/2 ..= (window-1)/2`. Equal to
/// `scipy.signal.savgol_coeffs(window, order, deriv=1, use="dot")`.
/// `None` when the window is even or not larger than the order.
pub(crate) fn savgol_derivative(window: usize, order: u32) -> Option<Stencil> {
    if window % 2 == 0 || window <= order as usize || order == 0 {
        return None;
    }
    let m = (window / 2) as i32;
    // A 1-D fit is the 2-D fit restricted to y = 0 with pure-x terms: build
    // it directly to keep the normal equations small.
    let offs: Vec<i32> = (-m..=m).collect();
    let nt = order as usize + 1;
    let half = m.max(1) as f64;
    let mut ata = vec![0.0; nt * nt];
    for &s in &offs {
        let x = s as f64 / half;
        for r in 0..nt {
            for c in 0..nt {
                ata[r * nt + c] += x.powi(r as i32) * x.powi(c as i32);
            }
        }
    }
    let mut e1 = vec![0.0; nt];
    e1[1] = 1.0;
    // Row 1 of (A^T A)^-1 (symmetric, so solve for the column).
    let r1 = solve(&ata, &e1, nt)?;
    let taps = offs
        .iter()
        .map(|&s| {
            let x = s as f64 / half;
            let w: f64 = (0..nt).map(|c| r1[c] * x.powi(c as i32)).sum::<f64>() / half;
            Tap { dj: 0, di: s, w }
        })
        .collect();
    Some(Stencil::new(taps))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::{assert_close, float, floats, reference};

    #[test]
    fn savgol_weights_equal_scipy_for_windows_5_and_7() {
        // Reference library: scipy.signal.savgol_coeffs(window, order,
        // deriv=1, use="dot") (tests/reference/savitzky_golay.py).
        let r = reference("savitzky_golay");
        let cases = r["derivative"].as_array().unwrap();
        assert_eq!(cases.len(), 6);
        for case in cases {
            let (w, o) = (
                &(float(&case["window"]) as usize),
                &(float(&case["order"]) as u32),
            );
            let want = floats(&case["weights"]);
            let st = savgol_derivative(*w, *o).unwrap();
            let m = (*w / 2) as i32;
            for (k, wk) in want.iter().enumerate() {
                let off = k as i32 - m;
                let got = st.taps.iter().find(|t| t.di == off).map_or(0.0, |t| t.w);
                assert_close(got, *wk, 1e-13, 0.0, &format!("savgol w{w} o{o} tap {off}"));
            }
        }
    }

    #[test]
    fn window_5_order_1_is_the_four_point_least_squares_stencil() {
        // Raffel et al. 2018 (from memory; docs/methods.md): (2f2 + f1 - f-1 - 2f-2)/(10h).
        let st = savgol_derivative(5, 1).unwrap();
        let w: Vec<(i32, f64)> = st.taps.iter().map(|t| (t.di, t.w)).collect();
        for ((o, got), want) in w.iter().zip([(-2, -0.2), (-1, -0.1), (1, 0.1), (2, 0.2)]) {
            assert_eq!(*o, want.0);
            assert_close(*got, want.1, 1e-15, 0.0, "4-point weight");
        }
    }

    #[test]
    fn polynomial_fit_reproduces_a_polynomial_of_its_degree() {
        let offs: Vec<(i32, i32)> = (-3..=3)
            .flat_map(|j| (-3..=3).map(move |i| (j, i)))
            .collect();
        let fit = PolyFit::new(offs.clone(), 5).unwrap();
        let f = |x: f64, y: f64| {
            1.0 + 2.0 * x - y + 0.3 * x * x * x - 0.05 * x.powi(5) + 0.1 * x * y * y
        };
        let vals: Vec<f64> = offs.iter().map(|&(j, i)| f(i as f64, j as f64)).collect();
        let apply = |s: &Stencil| -> f64 {
            s.taps
                .iter()
                .map(|t| t.w * vals[offs.iter().position(|&o| o == (t.dj, t.di)).unwrap()])
                .sum()
        };
        assert_close(
            apply(&fit.coefficient(1, 0).unwrap()),
            2.0,
            1e-11,
            0.0,
            "c_x",
        );
        assert_close(
            apply(&fit.coefficient(1, 2).unwrap()),
            0.1,
            1e-11,
            0.0,
            "c_xyy",
        );
        assert_close(
            apply(&fit.coefficient(5, 0).unwrap()),
            -0.05,
            1e-11,
            0.0,
            "c_x5",
        );
        assert_close(
            apply(&fit.value_at(0, 5)),
            f(5.0, 0.0),
            1e-9,
            0.0,
            "extrapolated value",
        );
    }

    #[test]
    fn underdetermined_fit_is_refused() {
        assert!(PolyFit::new(vec![(0, 0), (0, 1), (1, 0)], 2).is_none());
        assert!(PolyFit::new((0..6).map(|i| (0, i)).collect(), 2).is_none());
        assert!(savgol_derivative(4, 1).is_none());
        assert!(savgol_derivative(3, 3).is_none());
    }
}
