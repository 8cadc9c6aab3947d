//! The correlation of the errors of nearby vectors, and the propagation of
//! per-vector uncertainty through a stencil.
//!
//! Owns: `Correlation` (the error-correlation model) and `variance_at`.
//! Does not own: where the per-vector uncertainties come from (`derive`).
//!
//! Model (docs/methods.md; Sciacchitano & Wieneke 2016, from memory): PIV vectors
//! come from overlapping interrogation windows, so neighbouring errors are
//! correlated. A top-hat window of width `W` grid steps averaging white
//! noise gives, per axis, `rho(d) = max(0, 1 - d/W)` (derived), and for a
//! square window the product over the two axes (the overlap area over the
//! window area, derived). A window overlap fraction `c` (0.5 for 50 %)
//! means `W = 1/(1 - c)` steps, so the adjacent correlation is `c` itself:
//! `neighbour_correlation = c` and `window_overlap = c` describe the same
//! model. `Adjacent(c)` is the alternative that correlates only the four
//! nearest neighbours (coefficient `c`) and nothing farther.
//!
//! Propagation (GUM, JCGM 100:2008, eq. 13): for `y = sum_k w_k x_k`,
//! `u(y)^2 = sum_a sum_b w_a w_b rho(d_ab) u_a u_b`.

use ndarray::Array2;

use super::Stencil;

/// The error-correlation model between vectors of one component. In the
/// manifest: `{"model": "independent"}`, `{"model": "window", "overlap":
/// 0.5}` or `{"model": "adjacent", "coefficient": 0.3}`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Correlation {
    /// Independent errors.
    Independent,
    /// Top-hat interrogation windows overlapping by the fraction `c` in
    /// [0, 1): `rho(dj, di) = max(0, 1-(1-c)|dj|) * max(0, 1-(1-c)|di|)`.
    Window(f64),
    /// Only the four nearest neighbours correlate, with coefficient `c`.
    Adjacent(f64),
}

impl serde::Serialize for Correlation {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = s.serialize_map(None)?;
        match *self {
            Correlation::Independent => m.serialize_entry("model", "independent")?,
            Correlation::Window(c) => {
                m.serialize_entry("model", "window")?;
                m.serialize_entry("overlap", &c)?;
            }
            Correlation::Adjacent(c) => {
                m.serialize_entry("model", "adjacent")?;
                m.serialize_entry("coefficient", &c)?;
            }
        }
        m.end()
    }
}

impl Correlation {
    /// The model in plain words, for `curlew check` and the report.
    pub(crate) fn describe(&self) -> String {
        use crate::describe::{num, percent};
        match *self {
            Correlation::Independent => "errors independent between vectors".into(),
            Correlation::Window(c) => format!(
                "errors correlated as interrogation windows overlapping by {}",
                percent(c)
            ),
            Correlation::Adjacent(c) => format!(
                "errors of adjacent vectors correlated with coefficient {}",
                num(c, 3)
            ),
        }
    }

    /// The correlation coefficient of two vectors `(dj, di)` grid steps apart.
    #[inline]
    pub(crate) fn rho(&self, dj: i32, di: i32) -> f64 {
        match *self {
            Correlation::Independent => f64::from(dj == 0 && di == 0),
            Correlation::Window(c) => {
                let k = 1.0 - c;
                let f = |d: i32| (1.0 - k * d.unsigned_abs() as f64).max(0.0);
                f(dj) * f(di)
            }
            Correlation::Adjacent(c) => match dj.unsigned_abs() + di.unsigned_abs() {
                0 => 1.0,
                1 => c,
                _ => 0.0,
            },
        }
    }

    pub(crate) fn is_independent(&self) -> bool {
        match *self {
            Correlation::Independent => true,
            Correlation::Window(c) | Correlation::Adjacent(c) => c == 0.0,
        }
    }

    /// `sum_a sum_b w_a w_b rho(d_ab)`: the variance of the stencil's output
    /// for unit, uniform per-vector uncertainty. With independent errors this
    /// is the squared noise factor.
    pub(crate) fn gain(&self, s: &Stencil) -> f64 {
        if self.is_independent() {
            return s.taps.iter().map(|t| t.w * t.w).sum();
        }
        let mut v = 0.0;
        for a in &s.taps {
            for b in &s.taps {
                v += a.w * b.w * self.rho(a.dj - b.dj, a.di - b.di);
            }
        }
        v
    }

    /// The variance of `s` applied at node `(j, i)` when vector `n` has the
    /// standard uncertainty `sig[n]` (GUM eq. 13). `gain` is `self.gain(s)`,
    /// passed in so that a caller applying one stencil everywhere computes
    /// it once: when every tap has the same uncertainty the result is
    /// `gain * sig^2` (the fast path); otherwise the double sum. The stencil
    /// must fit at the node. NaN uncertainties propagate to NaN.
    #[inline]
    pub(crate) fn variance_at(
        &self,
        s: &Stencil,
        gain: f64,
        sig: &Array2<f64>,
        j: usize,
        i: usize,
    ) -> f64 {
        let at = |dj: i32, di: i32| {
            sig[[
                (j as i64 + dj as i64) as usize,
                (i as i64 + di as i64) as usize,
            ]]
        };
        let s0 = sig[[j, i]];
        if s.taps.iter().all(|t| at(t.dj, t.di) == s0) {
            return gain * s0 * s0;
        }
        if self.is_independent() {
            return s
                .taps
                .iter()
                .map(|t| {
                    let e = t.w * at(t.dj, t.di);
                    e * e
                })
                .sum();
        }
        let mut v = 0.0;
        for a in &s.taps {
            let ea = a.w * at(a.dj, a.di);
            for b in &s.taps {
                let r = self.rho(a.dj - b.dj, a.di - b.di);
                if r != 0.0 {
                    v += ea * b.w * at(b.dj, b.di) * r;
                }
            }
        }
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stencil::Tap;
    use crate::testutil::assert_close;

    #[test]
    fn top_hat_overlap_gives_the_methods_correlations() {
        // docs/methods.md (derived): 50 % overlap -> 0.5 and 0 at two steps;
        // 75 % overlap -> 0.75 and 0.5.
        let h = Correlation::Window(0.5);
        assert_close(h.rho(0, 1), 0.5, 1e-15, 0.0, "50% one step");
        assert_close(h.rho(0, 2), 0.0, 1e-15, 0.0, "50% two steps");
        assert_close(h.rho(1, 1), 0.25, 1e-15, 0.0, "50% diagonal (area overlap)");
        let q = Correlation::Window(0.75);
        assert_close(q.rho(1, 0), 0.75, 1e-15, 0.0, "75% one step");
        assert_close(q.rho(2, 0), 0.5, 1e-15, 0.0, "75% two steps");
        assert_eq!(Correlation::Adjacent(0.3).rho(1, 1), 0.0);
    }

    #[test]
    fn central_vorticity_with_overlap_matches_the_closed_form() {
        // docs/methods.md (derived): central-difference vorticity, uniform U,
        // Dx = Dy: U_omega = (U/Dx) sqrt(1 - rho(2 Dx)).
        for c in [0.0, 0.5, 0.75] {
            let corr = Correlation::Window(c);
            let h = 1e-3;
            let d = Stencil::new(vec![
                Tap {
                    dj: 0,
                    di: -1,
                    w: -0.5 / h,
                },
                Tap {
                    dj: 0,
                    di: 1,
                    w: 0.5 / h,
                },
            ]);
            let u = 0.02;
            let var_omega = 2.0 * corr.gain(&d) * u * u;
            let want = u / h * (1.0 - corr.rho(0, 2)).sqrt();
            assert_close(var_omega.sqrt(), want, 0.0, 1e-12, &format!("overlap {c}"));
        }
    }

    #[test]
    fn non_uniform_uncertainty_takes_the_double_sum() {
        let s = Stencil::new(vec![
            Tap {
                dj: 0,
                di: 0,
                w: 1.0,
            },
            Tap {
                dj: 0,
                di: 1,
                w: 1.0,
            },
        ]);
        let mut sig = Array2::from_elem((1, 2), 1.0);
        sig[[0, 1]] = 2.0;
        let c = Correlation::Window(0.5);
        // 1 + 4 + 2 * 0.5 * 1 * 2 = 7 (GUM eq. 13 by hand).
        assert_close(
            c.variance_at(&s, c.gain(&s), &sig, 0, 0),
            7.0,
            1e-14,
            0.0,
            "double sum",
        );
        assert_close(
            Correlation::Independent.variance_at(&s, 2.0, &sig, 0, 0),
            5.0,
            1e-14,
            0.0,
            "independent",
        );
    }
}
