//! Global velocity limits: a box or an ellipse in the u-v plane.
//!
//! # Method (common practice)
//!
//! A vector is rejected when (u, v) lies outside a region of the u-v plane
//! that holds every plausible velocity of the run. The region is a box
//! `[u_lo, u_hi] x [v_lo, v_hi]`, or the ellipse inscribed in that box:
//! `((u - uc)/au)^2 + ((v - vc)/av)^2 <= 1` with centre (uc, vc) the box
//! centre and half-axes (au, av) its half-widths. Points on the boundary
//! are inside.
//!
//! The box is either given (`Bounds::Given`, m/s after resolution; the
//! pipeline gives it in the input velocity unit) or taken from the run's own
//! robust statistics (`Bounds::Robust`): centre = the median of all valid
//! vectors of the run, half-width = `spread` robust standard deviations
//! (1.4826 MAD over all valid vectors and nodes, at least `floor`), per
//! component, from the ensemble pass. The robust statistics include the
//! spatial variation of the mean flow, so the limits are generous by
//! construction: they catch gross outliers, not subtle ones.

use super::EnsembleRef;

/// The shape of the accepted region.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Shape {
    Box,
    Ellipse,
}

/// Where the limits come from (in the manifest: `{"from": "given", "u":
/// [lo, hi], "v": [lo, hi]}` or `{"from": "robust", "spread", "floor"}`).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "from", rename_all = "lowercase")]
pub enum Bounds {
    /// `[lo, hi]` for u and for v, in m/s.
    Given { u: [f64; 2], v: [f64; 2] },
    /// Median +- `spread` robust standard deviations of the whole run
    /// (at least `floor` m/s), per component.
    Robust { spread: f64, floor: f64 },
}

/// Global limits, resolved.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Limits {
    pub shape: Shape,
    pub bounds: Bounds,
}

/// A region ready to test points against.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Region {
    pub shape: Shape,
    pub u: [f64; 2],
    pub v: [f64; 2],
}

impl Region {
    /// True when (u, v) is inside or on the boundary.
    #[inline]
    pub(crate) fn inside(&self, u: f64, v: f64) -> bool {
        match self.shape {
            Shape::Box => u >= self.u[0] && u <= self.u[1] && v >= self.v[0] && v <= self.v[1],
            Shape::Ellipse => {
                let (uc, au) = (0.5 * (self.u[0] + self.u[1]), 0.5 * (self.u[1] - self.u[0]));
                let (vc, av) = (0.5 * (self.v[0] + self.v[1]), 0.5 * (self.v[1] - self.v[0]));
                let a = (u - uc) / au;
                let b = (v - vc) / av;
                a * a + b * b <= 1.0
            }
        }
    }
}

impl Limits {
    /// The region for this run: given bounds as they are; robust bounds from
    /// `ens`, or `None` (no test) without it or when the run had no valid
    /// vector.
    pub(crate) fn resolve(&self, ens: Option<&EnsembleRef>) -> Option<Region> {
        match &self.bounds {
            Bounds::Given { u, v } => Some(Region {
                shape: self.shape,
                u: *u,
                v: *v,
            }),
            Bounds::Robust { spread, floor } => {
                let e = ens?;
                let (mu, su) = e.global_u;
                let (mv, sv) = e.global_v;
                if !(mu.is_finite() && mv.is_finite()) {
                    return None;
                }
                let hu = spread * su.max(*floor);
                let hv = spread * sv.max(*floor);
                Some(Region {
                    shape: self.shape,
                    u: [mu - hu, mu + hu],
                    v: [mv - hv, mv + hv],
                })
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn box_and_ellipse_membership() {
        let b = Region {
            shape: Shape::Box,
            u: [-1.0, 3.0],
            v: [0.0, 2.0],
        };
        assert!(b.inside(3.0, 2.0)); // corner is on the boundary
        assert!(!b.inside(3.0001, 1.0));
        let e = Region {
            shape: Shape::Ellipse,
            ..b
        };
        // centre (1, 1), half-axes (2, 1)
        assert!(e.inside(3.0, 1.0));
        assert!(!e.inside(3.0, 2.0)); // box corner is outside the ellipse
                                      // (1 + 2 cos t, 1 + sin t) at t = 0.7 is on it; 1 % further out is not
        let (c, s) = (0.7f64.cos(), 0.7f64.sin());
        assert!(e.inside(1.0 + 1.99 * c, 1.0 + 0.995 * s));
        assert!(!e.inside(1.0 + 2.02 * c, 1.0 + 1.01 * s));
    }
}
