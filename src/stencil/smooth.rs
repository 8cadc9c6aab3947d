//! Smoothers: Gaussian and 2-D local least-squares (Savitzky-Golay) as
//! stencils, and the robust DCT penalized least squares of `stencil::pls`
//! seen through its equivalent kernel.
//!
//! Owns: building smoothing stencils, applying a smoother to one component
//! of a field, and the linear stencil a smoother is equivalent to (so that
//! derivatives compose with it and uncertainty propagates through the
//! composite). Does not own: when smoothing runs (the plan and `derive`).
//!
//! # Edges and gaps
//!
//! At a node where every tap lands on a node with a value, the output is
//! the stencil exactly (`equivalent_stencil` describes these nodes).
//! Elsewhere the smoother applies the operator `cut::cut` returns for its
//! rule (`Smoother::cut_rule`): Gaussian renormalised, Savitzky-Golay
//! refitted on the nodes left, PLS folded at the grid's edge. Values and
//! uncertainties go through that one function, so they describe the same
//! operator.
//!
//! Nodes without a value (`valid` false) come out NaN: smoothing does not
//! fill. `Smoother::None` returns its input unchanged, NaN or not.

use ndarray::Array2;

use super::cut::{cut, reproduced_degree, Cut};
use super::pls::Pls;
use super::{Stencil, Tap};

/// The smoother the plan chose, resolved.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum Smoother {
    /// No smoothing (the default).
    #[default]
    None,
    /// A linear, normalised smoothing stencil (Gaussian, Savitzky-Golay)
    /// and the kernel it was built from (for the record).
    Linear(Stencil, Kernel),
    /// DCT penalized least squares (Garcia 2010): `s` fixed, or chosen by
    /// GCV per frame and component when `None`; `robust` adds bisquare
    /// weights against outliers.
    Pls {
        /// The smoothing parameter (`[smoothing] s`); `None`: chosen by
        /// GCV.
        s: Option<f64>,
        /// Bisquare weights against outliers (`[smoothing] robust`).
        robust: bool,
    },
}

/// The kernel a linear smoother was built from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Kernel {
    /// Gaussian of standard deviation `sigma`, in grid pitches.
    Gaussian {
        /// `[smoothing] sigma`, grid pitches.
        sigma: f64,
    },
    /// 2-D Savitzky-Golay: a polynomial of total degree `order` fitted over
    /// (2 `half_width` + 1)² nodes.
    SavitzkyGolay {
        /// `[smoothing] half_width`, nodes.
        half_width: usize,
        /// `[smoothing] order`, the total degree.
        order: usize,
    },
    /// Any other linear stencil (built in code, not from a pipeline).
    Custom,
}

impl Smoother {
    /// A Gaussian smoother of `sigma` grid pitches (`gaussian`).
    pub fn gaussian(sigma: f64) -> Smoother {
        Smoother::Linear(gaussian(sigma), Kernel::Gaussian { sigma })
    }
    /// A 2-D Savitzky-Golay smoother (`savitzky_golay`).
    pub fn savitzky_golay(half_width: usize, order: usize) -> Smoother {
        Smoother::Linear(
            savitzky_golay(half_width, order),
            Kernel::SavitzkyGolay { half_width, order },
        )
    }
}

/// In the manifest: `{"method": "none"}`; a linear stencil by its kernel
/// (`"gaussian"` with `sigma`, `"savitzky-golay"` with `half_width` and
/// `order`, or `"stencil"`), extent and noise factor (`"half_width_x",
/// "half_width_y", "taps", "noise_factor"`); PLS as
/// `{"method": "pls", "s": null (chosen by GCV) or s, "robust"}`.
impl serde::Serialize for Smoother {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        let mut m = ser.serialize_map(None)?;
        match self {
            Smoother::None => m.serialize_entry("method", "none")?,
            Smoother::Linear(st, kernel) => {
                let (rj, ri) = st.reach();
                match *kernel {
                    Kernel::Gaussian { sigma } => {
                        m.serialize_entry("method", "gaussian")?;
                        m.serialize_entry("sigma", &sigma)?;
                    }
                    Kernel::SavitzkyGolay { half_width, order } => {
                        m.serialize_entry("method", "savitzky-golay")?;
                        m.serialize_entry("half_width", &half_width)?;
                        m.serialize_entry("order", &order)?;
                    }
                    Kernel::Custom => m.serialize_entry("method", "stencil")?,
                }
                m.serialize_entry("half_width_x", &ri)?;
                m.serialize_entry("half_width_y", &rj)?;
                m.serialize_entry("taps", &st.taps.len())?;
                m.serialize_entry("noise_factor", &st.noise_factor())?;
            }
            Smoother::Pls { s, robust } => {
                m.serialize_entry("method", "pls")?;
                m.serialize_entry("s", s)?;
                m.serialize_entry("robust", robust)?;
            }
        }
        m.end()
    }
}

impl Smoother {
    /// The smoother in plain words, for `curlew check` and the report.
    pub(crate) fn describe(&self) -> String {
        use crate::describe::num;
        match self {
            Smoother::None => "none".into(),
            Smoother::Linear(st, kernel) => {
                let (rj, ri) = st.reach();
                let name = match *kernel {
                    Kernel::Gaussian { sigma } => {
                        format!("Gaussian, sigma {} pitches, ", num(sigma, 3))
                    }
                    Kernel::SavitzkyGolay { half_width, order } => {
                        format!("Savitzky-Golay of degree {order}, half width {half_width}, ")
                    }
                    Kernel::Custom => String::new(),
                };
                format!(
                    "{name}linear stencil over {} x {} nodes (noise factor {})",
                    2 * ri + 1,
                    2 * rj + 1,
                    num(st.noise_factor(), 3)
                )
            }
            Smoother::Pls { s, robust } => {
                let s = match s {
                    Some(s) => format!("s = {}", num(*s, 3)),
                    None => "s chosen per frame by generalized cross-validation".into(),
                };
                let r = if *robust { ", robust weights" } else { "" };
                format!("penalized least squares, {s}{r}")
            }
        }
    }

    /// The smoothed copy of `a`; `valid` marks nodes that carry a value.
    pub(crate) fn apply(&self, a: &Array2<f64>, valid: &Array2<bool>) -> Array2<f64> {
        self.apply_with_s(a, valid).0
    }

    /// As `apply`, also returning the PLS smoothing parameter used (given
    /// or chosen by GCV); `None` for the other smoothers. With GCV, build
    /// the stencil of this frame with `pls_kernel(s)`.
    pub(crate) fn apply_with_s(
        &self,
        a: &Array2<f64>,
        valid: &Array2<bool>,
    ) -> (Array2<f64>, Option<f64>) {
        let ok = |ix: (usize, usize)| valid[ix] && a[ix].is_finite();
        match self {
            Smoother::None => (a.clone(), None),
            Smoother::Linear(st, _) => (apply_linear(st, a, valid), None),
            Smoother::Pls { s, robust } => {
                let (ny, nx) = a.dim();
                let known: Vec<bool> = (0..ny * nx).map(|k| ok((k / nx, k % nx))).collect();
                let y: Vec<f64> = (0..ny * nx)
                    .map(|k| if known[k] { a[(k / nx, k % nx)] } else { 0.0 })
                    .collect();
                let nk = known.iter().filter(|&&k| k).count();
                let mean = y.iter().sum::<f64>() / nk.max(1) as f64;
                let z0: Vec<f64> = (0..ny * nx)
                    .map(|k| if known[k] { y[k] } else { mean })
                    .collect();
                let out = Pls::new(ny, nx).smooth(&y, &known, &z0, *s, *robust);
                let z = Array2::from_shape_fn((ny, nx), |(j, i)| {
                    if known[j * nx + i] {
                        out.z[j * nx + i]
                    } else {
                        f64::NAN
                    }
                });
                (z, Some(out.s))
            }
        }
    }

    /// How this smoother continues where its stencil is cut (`cut`).
    pub fn cut_rule(&self) -> Cut {
        match self {
            Smoother::Linear(st, _) if st.taps.iter().any(|t| t.w < 0.0) => Cut::Refit {
                degree: reproduced_degree(st),
            },
            Smoother::Pls { .. } => Cut::Reflect,
            _ => Cut::Renormalise,
        }
    }

    /// This smoother with every per-frame choice made: PLS without `s` gets
    /// the generalised cross-validation choice for the frame's `u` and `v`
    /// (`valid`: nodes with a value in both), one `s` for both components
    /// (joint GCV, `Pls::gcv_s_joint`; with gaps, the geometric mean of the
    /// two weighted choices), rounded to 1/16 decade (`quantise_s`: at most
    /// 7.5 % from the optimum, whose GCV curve is flat there, and a few
    /// distinct operators per run for the stencil caches). Others are
    /// returned as they are.
    pub(crate) fn for_frame(
        &self,
        u: &Array2<f64>,
        v: &Array2<f64>,
        valid: &Array2<bool>,
    ) -> Smoother {
        let Smoother::Pls { s: None, robust } = *self else {
            return self.clone();
        };
        let (ny, nx) = u.dim();
        let known =
            |a: &Array2<f64>, k: usize| valid[(k / nx, k % nx)] && a[(k / nx, k % nx)].is_finite();
        let full = (0..ny * nx).all(|k| known(u, k) && known(v, k));
        let s = if full && !robust {
            let yu: Vec<f64> = u.iter().copied().collect();
            let yv: Vec<f64> = v.iter().copied().collect();
            Pls::new(ny, nx).gcv_s_joint(&[&yu, &yv])
        } else {
            let su = self.apply_with_s(u, valid).1.unwrap_or(f64::NAN);
            let sv = self.apply_with_s(v, valid).1.unwrap_or(f64::NAN);
            (su * sv).sqrt()
        };
        Smoother::Pls {
            s: Some(quantise_s(s)),
            robust,
        }
    }

    /// The linear stencil that this smoother is (or, for PLS with a given s,
    /// its equivalent interior kernel, `pls_kernel(s)`), for composing with
    /// derivatives and propagating uncertainty; `None` for no smoothing and
    /// for PLS with s chosen by GCV (s differs per frame: use
    /// `apply_with_s` and `pls_kernel`, or `pls_noise_factor`).
    pub(crate) fn equivalent_stencil(&self) -> Option<Stencil> {
        match self {
            Smoother::None => None,
            Smoother::Linear(s, _) => Some(s.clone()),
            Smoother::Pls { s: Some(s), .. } => Some(pls_kernel(*s)),
            Smoother::Pls { s: None, .. } => None,
        }
    }
}

/// `s` rounded to the nearest 1/16 decade (see `Smoother::for_frame`).
pub(crate) fn quantise_s(s: f64) -> f64 {
    10f64.powf((16.0 * s.log10()).round() / 16.0)
}

/// Applies a linear stencil, cut by `cut` where it does not fit.
fn apply_linear(st: &Stencil, a: &Array2<f64>, valid: &Array2<bool>) -> Array2<f64> {
    let ok = Array2::from_shape_fn(a.dim(), |ix| valid[ix] && a[ix].is_finite());
    let rule = Smoother::Linear(st.clone(), Kernel::Custom).cut_rule();
    Array2::from_shape_fn(a.dim(), |(j, i)| {
        if !ok[[j, i]] {
            f64::NAN
        } else if st.fits(j, i, &ok) {
            st.apply_at(a, j, i)
        } else {
            cut(st, rule, &ok, j, i).map_or(f64::NAN, |c| c.apply_at(a, j, i))
        }
    })
}

/// The Gaussian smoothing stencil of standard deviation `sigma_pitches`
/// (in grid pitches, the same along x and y), truncated at 4 sigma on a
/// square support of radius `r = floor(4 sigma + 0.5)` and normalised to
/// sum 1; separable, `w = g(dj) g(di)` with `g(d) = exp(-d^2/(2 sigma^2))/sum`.
/// The same kernel as scipy.ndimage.gaussian_filter with its default
/// `truncate = 4.0`. `sigma_pitches <= 0` gives the identity.
pub(crate) fn gaussian(sigma_pitches: f64) -> Stencil {
    if sigma_pitches.is_nan() || sigma_pitches <= 0.0 {
        return identity();
    }
    let r = (4.0 * sigma_pitches + 0.5) as i32;
    let g: Vec<f64> = (-r..=r)
        .map(|d| (-(d * d) as f64 / (2.0 * sigma_pitches * sigma_pitches)).exp())
        .collect();
    let sum: f64 = g.iter().sum();
    let mut taps = Vec::with_capacity(g.len() * g.len());
    for (a, gj) in (-r..=r).zip(&g) {
        for (b, gi) in (-r..=r).zip(&g) {
            taps.push(Tap {
                dj: a,
                di: b,
                w: gj * gi / (sum * sum),
            });
        }
    }
    Stencil::new(taps)
}

fn identity() -> Stencil {
    Stencil::new(vec![Tap {
        dj: 0,
        di: 0,
        w: 1.0,
    }])
}

/// The 2-D Savitzky-Golay smoothing stencil: the value at the centre of
/// the least-squares fit of a polynomial of total degree <= `order` in
/// (x, y) over the square window of `(2 half_width + 1)^2` nodes (common
/// practice; the 2-D extension of Savitzky & Golay 1964). Weights are
/// `w = e0^T (A^T A)^-1 A^T`, A the monomials at the window offsets. It
/// reproduces every polynomial of degree <= `order` exactly and sums to 1;
/// an odd order gives the same weights as the even order below it (the
/// odd monomials vanish at the centre by symmetry).
///
/// Panics unless `half_width >= 1` and `order <= 2 half_width` (the plan
/// checks these before calling).
pub(crate) fn savitzky_golay(half_width: usize, order: usize) -> Stencil {
    assert!(
        half_width >= 1 && order <= 2 * half_width,
        "savitzky_golay: need half_width >= 1 and order <= 2 half_width"
    );
    let m = half_width as i32;
    let terms: Vec<(i32, i32)> = (0..=order as i32)
        .flat_map(|d| (0..=d).map(move |b| (d - b, b)))
        .collect();
    let nt = terms.len();
    let pts: Vec<(i32, i32)> = (-m..=m)
        .flat_map(|j| (-m..=m).map(move |i| (j, i)))
        .collect();
    let row = |&(j, i): &(i32, i32)| -> Vec<f64> {
        terms
            .iter()
            .map(|&(a, b)| (i as f64).powi(a) * (j as f64).powi(b))
            .collect()
    };
    let rows: Vec<Vec<f64>> = pts.iter().map(row).collect();
    // normal matrix A^T A and solve (A^T A) c = e0
    let mut ata = vec![vec![0.0; nt]; nt];
    for r in &rows {
        for p in 0..nt {
            for q in 0..nt {
                ata[p][q] += r[p] * r[q];
            }
        }
    }
    let mut e0 = vec![0.0; nt];
    e0[0] = 1.0;
    let c = solve(ata, e0);
    let taps = pts
        .iter()
        .zip(&rows)
        .map(|(&(dj, di), r)| Tap {
            dj,
            di,
            w: r.iter().zip(&c).map(|(a, b)| a * b).sum(),
        })
        .collect();
    Stencil::new(taps)
}

/// Gaussian elimination with partial pivoting (small dense systems).
fn solve(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Vec<f64> {
    let n = b.len();
    for col in 0..n {
        let p = (col..n)
            .max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))
            .unwrap();
        a.swap(col, p);
        b.swap(col, p);
        let (top, rest) = a.split_at_mut(col + 1);
        let pivot = &top[col];
        for (off, row) in rest.iter_mut().enumerate() {
            let f = row[col] / pivot[col];
            for (x, p) in row[col..].iter_mut().zip(&pivot[col..]) {
                *x -= f * p;
            }
            b[col + 1 + off] -= f * b[col];
        }
    }
    let mut x = vec![0.0; n];
    for r in (0..n).rev() {
        let s: f64 = (r + 1..n).map(|k| a[r][k] * x[k]).sum();
        x[r] = (b[r] - s) / a[r][r];
    }
    x
}

/// The interior kernel of DCT-PLS smoothing with parameter `s`: a unit
/// impulse at the centre of a grid of `(2R+1)^2` nodes, `R = ceil(24
/// s^(1/4)) + 4` (at most 256; the kernel decays over about s^(1/4)
/// pitches, so reflections from the grid ends are below 1e-6 of the peak),
/// smoothed with all weights 1; taps with |w| < 1e-6 of the peak are
/// dropped and the rest rescaled to sum exactly 1 (the truncation removes
/// less than 1e-5 of the sum). The kernel has small negative side lobes.
pub(crate) fn pls_kernel(s: f64) -> Stencil {
    if s.is_nan() || s <= 0.0 {
        return identity();
    }
    let r = ((24.0 * s.powf(0.25)).ceil() as usize + 4).min(256);
    let n = 2 * r + 1;
    let mut y = vec![0.0; n * n];
    y[r * n + r] = 1.0;
    let z = Pls::new(n, n).smooth_full(&y, s);
    let peak = z[r * n + r].abs();
    let mut taps: Vec<Tap> = Vec::new();
    for j in 0..n {
        for i in 0..n {
            let w = z[j * n + i];
            if w.abs() >= 1e-6 * peak {
                taps.push(Tap {
                    dj: j as i32 - r as i32,
                    di: i as i32 - r as i32,
                    w,
                });
            }
        }
    }
    let sum: f64 = taps.iter().map(|t| t.w).sum();
    taps.iter_mut().for_each(|t| t.w /= sum);
    Stencil::new(taps)
}

/// Factor by which DCT-PLS with parameter `s` scales the standard deviation
/// of white noise at interior nodes: `sqrt(sum w^2)` of `pls_kernel(s)`.
#[cfg(test)]
pub(crate) fn pls_noise_factor(s: f64) -> f64 {
    pls_kernel(s)
        .taps
        .iter()
        .map(|t| t.w * t.w)
        .sum::<f64>()
        .sqrt()
}

#[cfg(test)]
mod tests;
