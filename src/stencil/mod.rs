//! The one stencil type: a set of weights on a neighbourhood of grid nodes.
//!
//! Owns: `Stencil`, its application at a node, composition (a smoother
//! followed by a derivative is one stencil), and its noise factor; and
//! the DCT penalized least squares solver (`pls`) that the smoothing spline
//! and the inpainting fill share.
//! Does not own: which stencil a stage uses (the plan decides).
//!
//! Convention: a stencil's weights act on node values, `out[j,i] =
//! sum_k w_k f[j + dj_k, i + di_k]`. Derivative stencils carry the 1/h of
//! the grid pitch in their weights, so `out` is in physical units.

pub(crate) mod correlation;
pub(crate) mod cut;
pub mod derivatives;
pub(crate) mod lsq;
pub(crate) mod pls;
pub(crate) mod second;
pub mod smooth;

use ndarray::Array2;

/// One weight at offset `(dj, di)` (rows are y, columns are x).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tap {
    /// Row offset (along y), in nodes.
    pub dj: i32,
    /// Column offset (along x), in nodes.
    pub di: i32,
    /// The weight; a derivative stencil's carries the 1/h of the pitch
    /// (1/m), a smoother's is dimensionless.
    pub w: f64,
}

/// A linear stencil.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Stencil {
    /// The weights; as the crate builds them, one per offset, sorted by
    /// (dj, di), no zeros.
    pub taps: Vec<Tap>,
}

impl Stencil {
    pub(crate) fn new(taps: Vec<Tap>) -> Self {
        let mut s = Stencil { taps };
        s.normalise();
        s
    }

    /// Merges taps at the same offset and drops zero weights; sorted by (dj, di).
    pub(crate) fn normalise(&mut self) {
        self.taps.sort_by_key(|t| (t.dj, t.di));
        let mut out: Vec<Tap> = Vec::with_capacity(self.taps.len());
        for t in self.taps.drain(..) {
            match out.last_mut() {
                Some(l) if l.dj == t.dj && l.di == t.di => l.w += t.w,
                _ => out.push(t),
            }
        }
        out.retain(|t| t.w != 0.0);
        self.taps = out;
    }

    /// Largest |dj| and |di| over the taps.
    pub(crate) fn reach(&self) -> (usize, usize) {
        self.taps.iter().fold((0, 0), |(a, b), t| {
            (
                a.max(t.dj.unsigned_abs() as usize),
                b.max(t.di.unsigned_abs() as usize),
            )
        })
    }

    /// Every weight multiplied by `k` (for example 1/h).
    pub(crate) fn scaled(&self, k: f64) -> Stencil {
        Stencil {
            taps: self.taps.iter().map(|t| Tap { w: t.w * k, ..*t }).collect(),
        }
    }

    /// A single tap of weight 1 at the origin (the identity operator).
    pub(crate) fn identity() -> Stencil {
        Stencil {
            taps: vec![Tap {
                dj: 0,
                di: 0,
                w: 1.0,
            }],
        }
    }

    /// The stencil moved by `(dj, di)`.
    pub(crate) fn shifted(&self, dj: i32, di: i32) -> Stencil {
        Stencil {
            taps: self
                .taps
                .iter()
                .map(|t| Tap {
                    dj: t.dj + dj,
                    di: t.di + di,
                    w: t.w,
                })
                .collect(),
        }
    }

    /// `sum_k a_k * self_k + b_k * other_k`: a linear combination, normalised.
    pub(crate) fn combine(&self, a: f64, other: &Stencil, b: f64) -> Stencil {
        let mut taps: Vec<Tap> = self.taps.iter().map(|t| Tap { w: a * t.w, ..*t }).collect();
        taps.extend(other.taps.iter().map(|t| Tap { w: b * t.w, ..*t }));
        Stencil::new(taps)
    }

    /// The noise factor `sqrt(sum w_k^2)`: the standard deviation of the
    /// stencil's output for independent unit-variance errors at its taps
    /// (GUM eq. 13 with rho = 0; docs/methods.md). 0 for an empty stencil.
    pub(crate) fn noise_factor(&self) -> f64 {
        self.taps.iter().map(|t| t.w * t.w).sum::<f64>().sqrt()
    }

    /// The moment `sum_k w_k di_k^p dj_k^q` (in index units). A derivative
    /// stencil in x with the 1/h in its weights has moment (1, 0) = 1/h and
    /// vanishing lower moments; its truncation follows from the higher ones.
    pub(crate) fn moment(&self, p: u32, q: u32) -> f64 {
        self.taps
            .iter()
            .map(|t| t.w * (t.di as f64).powi(p as i32) * (t.dj as f64).powi(q as i32))
            .sum()
    }

    /// True when every tap lands inside the `(ny, nx)` grid at node `(j, i)`
    /// and `ok` holds there.
    #[inline]
    pub(crate) fn fits(&self, j: usize, i: usize, ok: &Array2<bool>) -> bool {
        let (ny, nx) = ok.dim();
        self.taps.iter().all(|t| {
            let jj = j as i64 + t.dj as i64;
            let ii = i as i64 + t.di as i64;
            jj >= 0
                && ii >= 0
                && (jj as usize) < ny
                && (ii as usize) < nx
                && ok[[jj as usize, ii as usize]]
        })
    }

    /// `sum_k w_k a[j + dj_k, i + di_k]`. The caller makes sure the stencil
    /// fits (see `fits`); a tap outside the grid panics.
    #[inline]
    pub(crate) fn apply_at(&self, a: &Array2<f64>, j: usize, i: usize) -> f64 {
        self.taps
            .iter()
            .map(|t| {
                t.w * a[[
                    (j as i64 + t.dj as i64) as usize,
                    (i as i64 + t.di as i64) as usize,
                ]]
            })
            .sum()
    }

    /// `self` applied after `first`: the composite stencil of the two linear
    /// operators (a discrete convolution of the weights).
    pub(crate) fn after(&self, first: &Stencil) -> Stencil {
        let mut taps = Vec::with_capacity(self.taps.len() * first.taps.len());
        for a in &self.taps {
            for b in &first.taps {
                taps.push(Tap {
                    dj: a.dj + b.dj,
                    di: a.di + b.di,
                    w: a.w * b.w,
                });
            }
        }
        Stencil::new(taps)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn composition_of_two_central_differences_is_the_wide_second_difference() {
        let d = Stencil::new(vec![
            Tap {
                dj: 0,
                di: -1,
                w: -0.5,
            },
            Tap {
                dj: 0,
                di: 1,
                w: 0.5,
            },
        ]);
        let dd = d.after(&d);
        let w: Vec<(i32, f64)> = dd.taps.iter().map(|t| (t.di, t.w)).collect();
        assert_eq!(w, vec![(-2, 0.25), (0, -0.5), (2, 0.25)]);
    }
}
