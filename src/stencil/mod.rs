//! The one stencil type: a set of weights on a neighbourhood of grid nodes.
//!
//! Owns: `Stencil`, its application at a node, composition (a smoother
//! followed by a derivative is one stencil), and its noise factor.
//! Does not own: which stencil a stage uses (the plan decides).
//!
//! Convention: a stencil's weights act on node values, `out[j,i] =
//! sum_k w_k f[j + dj_k, i + di_k]`. Derivative stencils carry the 1/h of
//! the grid pitch in their weights, so `out` is in physical units.

pub mod smooth;

/// One weight at offset `(dj, di)` (rows are y, columns are x).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tap {
    pub dj: i32,
    pub di: i32,
    pub w: f64,
}

/// A linear stencil.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Stencil {
    pub taps: Vec<Tap>,
}

impl Stencil {
    pub fn new(taps: Vec<Tap>) -> Self {
        let mut s = Stencil { taps };
        s.normalise();
        s
    }

    /// Merges taps at the same offset and drops zero weights; sorted by (dj, di).
    pub fn normalise(&mut self) {
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
    pub fn reach(&self) -> (usize, usize) {
        self.taps.iter().fold((0, 0), |(a, b), t| {
            (
                a.max(t.dj.unsigned_abs() as usize),
                b.max(t.di.unsigned_abs() as usize),
            )
        })
    }

    /// Every weight multiplied by `k` (for example 1/h).
    pub fn scaled(&self, k: f64) -> Stencil {
        Stencil {
            taps: self.taps.iter().map(|t| Tap { w: t.w * k, ..*t }).collect(),
        }
    }

    /// `self` applied after `first`: the composite stencil of the two linear
    /// operators (a discrete convolution of the weights).
    pub fn after(&self, first: &Stencil) -> Stencil {
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
