//! The spatial correlation of the vorticity errors, and the variance of a
//! weighted sum of vorticity values (a circulation, a centroid).
//!
//! Owns: `OmegaCorrelation`. Does not own: the stencils (`stencil`), the
//! per-vector noise model (`derive`).
//!
//! Model (GUM, JCGM 100:2008, eq. 13; the stencil propagation of
//! docs/uncertainty.md): omega = Sx v - Sy u with `Sx`, `Sy` the run's
//! first-derivative stencils composed after its smoother. With per-vector
//! errors of equal size in u and v and the run's velocity error correlation
//! `rho_v` (`stencil::correlation`), the covariance of the omega errors at
//! two nodes `d` apart is proportional to
//! `R(d) = sum_{S in Sx, Sy} sum_a sum_b w_a w_b rho_v(d + b - a)`, and the
//! correlation is `R(d) / R(0)`. Neighbouring omega values share velocity
//! taps, so `R` is far from a delta: for central differences `R(0, 2) =
//! -R(0, 0) / 2` and an area sum of omega telescopes into a boundary sum
//! (its variance grows with the perimeter, not the area). Neglecting this
//! would overstate a core's circulation uncertainty several times.
//!
//! What is neglected (docs/vortices.md): the spatial correlation of the
//! turbulent (and phase-jitter) scatter within a bin, which is in each
//! node's `omega_mean_unc` but whose correlation has no model here (it is
//! treated as if it correlated like the noise); the systematic (truncation)
//! part of `omega_mean_unc`, treated the same way; and, when the run
//! estimates the window overlap per frame, the overlap itself (its velocity
//! errors are then taken as independent; give `[uncertainty]
//! neighbour_correlation` to carry it).

use crate::derive::{self, Scheme};
use crate::field::Grid;
use crate::stencil::correlation::Correlation;
use crate::stencil::derivatives::{stencil, Axis, DiffScheme};
use crate::stencil::Stencil;

/// Correlation of the omega errors at node lags `(dj, di)`.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct OmegaCorrelation {
    /// `(dj, di, rho)` for every lag with a nonzero correlation, (0, 0, 1)
    /// included.
    pub lags: Vec<(i32, i32, f64)>,
    /// The model in plain words.
    pub description: String,
}

impl OmegaCorrelation {
    /// Independent omega errors (the sum of node variances).
    pub(crate) fn independent() -> Self {
        OmegaCorrelation {
            lags: vec![(0, 0, 1.0)],
            description: "omega errors taken as independent between nodes".into(),
        }
    }

    /// The correlation made by the stencils `sx` (d/dx, on v) and `sy`
    /// (d/dy, on u) from velocity errors correlated as `vel`.
    pub(crate) fn from_stencils(sx: &Stencil, sy: &Stencil, vel: Correlation) -> Self {
        let reach = |s: &Stencil| {
            let (a, b) = s.reach();
            a.max(b) as i32
        };
        let vr = match vel {
            Correlation::Independent => 0,
            Correlation::Adjacent(_) => 1,
            Correlation::Window(c) => (1.0 / (1.0 - c)).ceil() as i32,
        };
        let big = 2 * reach(sx).max(reach(sy)) + vr;
        let r = |dj: i32, di: i32| -> f64 {
            let mut t = 0.0;
            for s in [sx, sy] {
                for a in &s.taps {
                    for b in &s.taps {
                        t += a.w * b.w * vel.rho(dj + b.dj - a.dj, di + b.di - a.di);
                    }
                }
            }
            t
        };
        let r0 = r(0, 0);
        let mut lags = Vec::new();
        for dj in -big..=big {
            for di in -big..=big {
                let rho = if r0 > 0.0 { r(dj, di) / r0 } else { 0.0 };
                if (dj, di) == (0, 0) || rho.abs() > 1e-12 {
                    lags.push((dj, di, if (dj, di) == (0, 0) { 1.0 } else { rho }));
                }
            }
        }
        OmegaCorrelation {
            lags,
            description: String::new(),
        }
    }

    /// The correlation of a run's omega errors: its derivative scheme
    /// (`auto`: its first candidate, for want of the per-node map), after
    /// its smoother, with its velocity error correlation when given.
    pub(crate) fn for_run(d: &derive::Params, g: &Grid) -> Self {
        let scheme = match d.scheme {
            Scheme::Fixed(s) => s,
            Scheme::Auto => d.candidates.first().copied().unwrap_or(DiffScheme::Central),
        };
        let smooth = d.smoother.equivalent_stencil();
        let comp = |s: Stencil| smooth.as_ref().map_or(s.clone(), |m| s.after(m));
        let sx = comp(stencil(scheme, Axis::X, g.dx));
        let sy = comp(stencil(scheme, Axis::Y, g.dy));
        let (vel, how) = if d.correlation_from_data {
            (
                Correlation::Independent,
                "velocity errors independent (the overlap estimated per frame is not carried)"
                    .to_string(),
            )
        } else {
            (d.correlation, d.correlation.describe())
        };
        let mut c = Self::from_stencils(&sx, &sy, vel);
        c.description = format!(
            "omega errors correlated between nodes as the {} stencils{} imply, {how}",
            scheme.name(),
            if smooth.is_some() {
                " after the smoother"
            } else {
                ""
            }
        );
        c
    }

    /// `Var(sum_k c_k omega_k)` over the row-major `nodes` (sorted) of a
    /// grid `nx` wide, with `sig[k]` the standard uncertainty of node
    /// `nodes[k]` and `c[k]` its weight. NaN if any `sig` is NaN.
    pub(crate) fn variance(&self, nodes: &[usize], c: &[f64], sig: &[f64], nx: usize) -> f64 {
        let mut v = 0.0;
        self.pairs(nodes, nx, |a, b, rho| {
            v += c[a] * sig[a] * c[b] * sig[b] * rho
        });
        v
    }

    /// Calls `f(a, b, rho)` for every ordered pair of positions in `nodes`
    /// (sorted, row-major, grid `nx` wide) whose lag has a nonzero
    /// correlation `rho` (the pair (a, a) included, with rho = 1).
    pub(crate) fn pairs(&self, nodes: &[usize], nx: usize, mut f: impl FnMut(usize, usize, f64)) {
        for (a, &na) in nodes.iter().enumerate() {
            let (ja, ia) = ((na / nx) as i64, (na % nx) as i64);
            for &(dj, di, rho) in &self.lags {
                let (jb, ib) = (ja + dj as i64, ia + di as i64);
                if jb < 0 || ib < 0 || ib >= nx as i64 {
                    continue;
                }
                if let Ok(b) = nodes.binary_search(&(jb as usize * nx + ib as usize)) {
                    f(a, b, rho);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stencil::derivatives::central;
    use crate::testutil::assert_close;

    #[test]
    fn central_differences_anticorrelate_at_two_steps() {
        // Derived: omega = (v[i+1]-v[i-1])/2h - (u[j+1]-u[j-1])/2h with
        // independent unit errors: R(0,0) = 4/(4h^2) = 1/h^2; R(0,+-2) and
        // R(+-2,0) = -1/(4h^2), so rho = -1/4; nothing else.
        let h = 1e-3;
        let c = OmegaCorrelation::from_stencils(
            &central(Axis::X, h),
            &central(Axis::Y, h),
            Correlation::Independent,
        );
        let mut lags = c.lags.clone();
        lags.sort_by_key(|a| (a.0, a.1));
        let want = [
            (-2, 0, -0.25),
            (0, -2, -0.25),
            (0, 0, 1.0),
            (0, 2, -0.25),
            (2, 0, -0.25),
        ];
        assert_eq!(lags.len(), want.len(), "{lags:?}");
        for (g, w) in lags.iter().zip(want) {
            assert_eq!((g.0, g.1), (w.0, w.1));
            assert_close(g.2, w.2, 1e-12, 0.0, "rho");
        }
    }

    #[test]
    fn area_sum_of_central_vorticity_telescopes_to_the_boundary() {
        // Derived by hand: over a 5 x 5 block (i = 2..6) the sum of
        // (v[i+1] - v[i-1]) / 2h keeps v7 + v6 - v2 - v1: 4 unit variances
        // per row / (4 h^2), 5 rows, and the same for u: Var = 10 / h^2,
        // against 25 / h^2 for independent nodes (Var(omega) = 1 / h^2).
        let h = 1.0;
        let c = OmegaCorrelation::from_stencils(
            &central(Axis::X, h),
            &central(Axis::Y, h),
            Correlation::Independent,
        );
        let nx = 9;
        let nodes: Vec<usize> = (2..7)
            .flat_map(|j| (2..7).map(move |i| j * nx + i))
            .collect();
        let one = vec![1.0; nodes.len()];
        // Unit node sigma in the correlation form, times Var(omega) = 1/h^2.
        let var = c.variance(&nodes, &one, &one, nx) * (1.0 / (h * h));
        assert_close(var, 10.0, 1e-12, 0.0, "telescoped variance");
    }
}
