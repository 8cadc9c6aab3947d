//! The uncertainty of an area integral of budget terms: the variance of a
//! linear functional of the velocity samples.
//!
//! Owns: `Weights` (a weight map over the velocity nodes), `Noise` (the
//! per-node velocity variances a slice was made from) and the variance of
//! a weight map. Does not own: which functional a term is (`vortex::budget`
//! builds them from `terms::jacobians` and the `ops` stencils).
//!
//! Method (GUM, JCGM 100:2008, eq. 13, linear propagation): every field of
//! the budget is a composite stencil on u and on v (`ops`), and every term
//! at a node is, to first order, a linear combination of fields with the
//! mean fields as coefficients (`terms::jacobians`: advection `U dW/dx + V
//! dW/dy` varies as `dU Wx + dV Wy + U dWx + V dWy`). The area integral of a
//! term over a region is therefore, to first order, one linear functional
//! `sum_j wu_j u_j + wv_j v_j` of the velocity samples: scattering each
//! node's stencil weights, times its coefficient and `dA`, into one map
//! makes the weights of neighbouring nodes cancel where the discrete
//! operators telescope (an area integral of a Laplacian keeps only a band
//! along the boundary). Its variance is
//! `sum_a sum_b rho(a - b) [wu_a wu_b su_a su_b + wv_a wv_b sv_a sv_b +
//! 2 wu_a wv_b (c_a + c_b) / 2]` with `rho` the velocity error
//! correlation (`stencil::correlation`; `Independent` keeps only a = b) and
//! `c` the u-v covariance of a node (the cross term between two nodes is
//! modelled as `rho` times the mean of their two covariances, which is
//! exact for independent nodes). The same map for a sum of terms (the
//! residual) gives the sum's variance with the terms' correlation carried.
//!
//! Smoothing: when a smoother ran before the derivatives, the weights are
//! carried back through its equivalent stencil onto the raw velocities
//! (`after`), and `Noise` holds the raw-equivalent variances (the smoothed
//! variance over the smoother's squared noise factor, as `acc::push` does),
//! so the smoother's correlation is carried as the Gram matrices of `ops`
//! carry it at one node.
//!
//! Edges: `add` refuses (returns false) a stencil with a tap outside the
//! grid (the caller then reports NaN, as the per-node terms are NaN there);
//! `after` drops smoother taps that fall outside the grid (the smoother's
//! own edge rule is not modelled, as in `ops`). A NaN variance on a node
//! with a nonzero weight makes the variance NaN; nodes whose weights cancel
//! exactly are not visited.
//! Neglected: second-order terms (products of two errors; they matter only
//! where a term's relative uncertainty approaches 1), and any spatial
//! correlation of the velocity errors beyond `rho` (in phase bins, the
//! turbulent scatter's own correlation; docs/vortices.md).

use super::ops::{Ops, NF};
use crate::field::Grid;
use crate::stencil::correlation::Correlation;
use crate::stencil::Stencil;

/// The per-node velocity variances (m²/s²) a slice's fields were made from,
/// row-major: raw-equivalent (before any smoother).
#[derive(Debug, Clone, PartialEq)]
pub struct Noise {
    pub var_u: Vec<f64>,
    pub var_v: Vec<f64>,
    /// Covariance of u and v at a node.
    pub cov_uv: Vec<f64>,
}

/// A linear functional `sum_j wu_j u_j + wv_j v_j` of the velocities of one
/// grid (row-major weights).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Weights {
    pub nx: usize,
    pub ny: usize,
    pub u: Vec<f64>,
    pub v: Vec<f64>,
}

impl Weights {
    pub(crate) fn new(g: &Grid) -> Self {
        Weights {
            nx: g.nx,
            ny: g.ny,
            u: vec![0.0; g.len()],
            v: vec![0.0; g.len()],
        }
    }

    /// Adds `c` times stencil `s` applied at node `k` to the weights on v
    /// (`on_v`) or on u. False (nothing added) when a tap leaves the grid.
    pub(crate) fn add(&mut self, s: &Stencil, on_v: bool, k: usize, c: f64) -> bool {
        let (j, i) = ((k / self.nx) as i64, (k % self.nx) as i64);
        let inside = |dj: i32, di: i32| {
            let (jj, ii) = (j + dj as i64, i + di as i64);
            jj >= 0 && ii >= 0 && (jj as usize) < self.ny && (ii as usize) < self.nx
        };
        if !s.taps.iter().all(|t| inside(t.dj, t.di)) {
            return false;
        }
        let nx = self.nx;
        let w = if on_v { &mut self.v } else { &mut self.u };
        for t in &s.taps {
            let n = (j + t.dj as i64) as usize * nx + (i + t.di as i64) as usize;
            w[n] += c * t.w;
        }
        true
    }

    /// Adds `sum_f c[f] field_f(k)` (the composite stencils of `ops`).
    pub(crate) fn add_fields(&mut self, ops: &Ops, k: usize, c: &[f64; NF]) -> bool {
        let mut ok = true;
        for (f, &cf) in c.iter().enumerate() {
            if cf != 0.0 {
                ok &= self.add(&ops.on_u[f], false, k, cf);
                ok &= self.add(&ops.on_v[f], true, k, cf);
            }
        }
        ok
    }

    /// The same functional on the velocities before `smoother` (its
    /// equivalent stencil): `raw[j + t] += w[j] s_t`; taps outside the grid
    /// are dropped.
    pub(crate) fn after(&self, smoother: &Stencil) -> Weights {
        let mut out = Weights {
            nx: self.nx,
            ny: self.ny,
            u: vec![0.0; self.u.len()],
            v: vec![0.0; self.v.len()],
        };
        for k in 0..self.u.len() {
            let (wu, wv) = (self.u[k], self.v[k]);
            if wu == 0.0 && wv == 0.0 {
                continue;
            }
            let (j, i) = ((k / self.nx) as i64, (k % self.nx) as i64);
            for t in &smoother.taps {
                let (jj, ii) = (j + t.dj as i64, i + t.di as i64);
                if jj < 0 || ii < 0 || jj as usize >= self.ny || ii as usize >= self.nx {
                    continue;
                }
                let n = jj as usize * self.nx + ii as usize;
                out.u[n] += wu * t.w;
                out.v[n] += wv * t.w;
            }
        }
        out
    }

    /// The variance of the functional for velocity errors of per-node
    /// variances `noise` correlated between nodes as `vel` (module docs).
    pub(crate) fn variance(&self, noise: &Noise, vel: Correlation) -> f64 {
        let lags = lags(vel);
        let (nx, ny) = (self.nx as i64, self.ny as i64);
        let su = |k: usize| noise.var_u[k].sqrt();
        let sv = |k: usize| noise.var_v[k].sqrt();
        let mut var = 0.0;
        for a in 0..self.u.len() {
            let (wua, wva) = (self.u[a], self.v[a]);
            if wua == 0.0 && wva == 0.0 {
                continue;
            }
            let (ja, ia) = ((a as i64) / nx, (a as i64) % nx);
            for &(dj, di, rho) in &lags {
                let (jb, ib) = (ja + dj as i64, ia + di as i64);
                if jb < 0 || ib < 0 || jb >= ny || ib >= nx {
                    continue;
                }
                let b = (jb * nx + ib) as usize;
                let (wub, wvb) = (self.u[b], self.v[b]);
                if wub == 0.0 && wvb == 0.0 {
                    continue;
                }
                let mut t = 0.0;
                if wua != 0.0 && wub != 0.0 {
                    t += wua * wub * su(a) * su(b);
                }
                if wva != 0.0 && wvb != 0.0 {
                    t += wva * wvb * sv(a) * sv(b);
                }
                if wua != 0.0 && wvb != 0.0 {
                    // both orders (a, b) and (b, a) are visited: 2 x / 2
                    t += wua * wvb * (noise.cov_uv[a] + noise.cov_uv[b]);
                }
                var += rho * t;
            }
        }
        var
    }
}

/// The lags `(dj, di, rho)` of `vel` with a nonzero correlation, (0, 0, 1)
/// first.
fn lags(vel: Correlation) -> Vec<(i32, i32, f64)> {
    let r = match vel {
        Correlation::Independent => 0,
        Correlation::Adjacent(_) => 1,
        Correlation::Window(c) => (1.0 / (1.0 - c)).ceil() as i32,
    };
    let mut out = vec![(0, 0, 1.0)];
    for dj in -r..=r {
        for di in -r..=r {
            let rho = vel.rho(dj, di);
            if (dj, di) != (0, 0) && rho != 0.0 {
                out.push((dj, di, rho));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stencil::derivatives::DiffScheme;
    use crate::stencil::Tap;
    use crate::testutil::assert_close;

    fn grid(n: usize, h: f64) -> Grid {
        Grid {
            nx: n,
            ny: n,
            x0: 0.0,
            y0: 0.0,
            dx: h,
            dy: h,
        }
    }

    fn unit(n: usize) -> Noise {
        Noise {
            var_u: vec![1.0; n],
            var_v: vec![1.0; n],
            cov_uv: vec![0.0; n],
        }
    }

    #[test]
    fn area_sum_of_the_central_vorticity_keeps_a_boundary_band() {
        // Derived by hand (as corr.rs's check): over a 5 x 5 block the sum of
        // (v[i+1] - v[i-1]) / 2h keeps v at the two columns either side of
        // the block's edges: 4 unit variances per row / (4 h^2), 5 rows, and
        // the same for u: Var = 10 / h^2 (25 / h^2 for independent nodes).
        let g = grid(9, 1.0);
        let ops = Ops::new(DiffScheme::Central, 1.0, 1.0, None);
        let mut w = Weights::new(&g);
        let mut c = [0.0; NF];
        c[super::super::ops::F_W] = 1.0;
        for j in 2..7 {
            for i in 2..7 {
                assert!(w.add_fields(&ops, j * 9 + i, &c));
            }
        }
        let var = w.variance(&unit(81), Correlation::Independent);
        assert_close(var, 10.0, 1e-12, 0.0, "telescoped variance");
        // Interior weights cancel exactly: only 40 nonzero weights remain.
        let nz = w.u.iter().chain(&w.v).filter(|x| **x != 0.0).count();
        assert_eq!(nz, 20 + 20);
    }

    #[test]
    fn area_sum_of_the_laplacian_is_a_boundary_flux() {
        // Derived: the x part of the five-point Laplacian summed over columns i = a..b of
        // one row keeps f[a-1] - f[a] - f[b] + f[b+1] (x part) per row; on a
        // 1-D row of unit-variance independent values its variance is 4 / h^4
        // whatever the length, against 20 (n) / h^4 node by node.
        let g = grid(12, 1.0);
        let tap = |di, w| Tap { dj: 0, di, w };
        let xpart = Stencil::new(vec![tap(-1, 1.0), tap(0, -2.0), tap(1, 1.0)]);
        let mut w = Weights::new(&g);
        for i in 2..10 {
            assert!(w.add(&xpart, false, 5 * 12 + i, 1.0));
        }
        let var = w.variance(&unit(144), Correlation::Independent);
        assert_close(var, 4.0, 1e-12, 0.0, "boundary flux variance");
        // a tap outside the grid is refused
        assert!(!w.add(&xpart, false, 5 * 12, 1.0));
    }

    #[test]
    fn correlated_errors_follow_gum_eq_13() {
        // y = u_a + u_b for two adjacent nodes with rho = c: Var = 2 + 2c
        // (GUM JCGM 100:2008 eq. 13); with u-v covariance 0.3 at each node,
        // y = u_a + v_a has Var = 1 + 1 + 2 * 0.3.
        let g = grid(4, 1.0);
        let one = Stencil::identity();
        let mut w = Weights::new(&g);
        w.add(&one, false, 5, 1.0);
        w.add(&one, false, 6, 1.0);
        assert_close(
            w.variance(&unit(16), Correlation::Adjacent(0.4)),
            2.8,
            1e-12,
            0.0,
            "adjacent",
        );
        assert_close(
            w.variance(&unit(16), Correlation::Window(0.5)),
            3.0,
            1e-12,
            0.0,
            "window overlap 50 %: rho(0, 1) = 0.5",
        );
        let mut x = Weights::new(&g);
        x.add(&one, false, 5, 1.0);
        x.add(&one, true, 5, 1.0);
        let mut n = unit(16);
        n.cov_uv = vec![0.3; 16];
        assert_close(
            x.variance(&n, Correlation::Independent),
            2.6,
            1e-12,
            0.0,
            "u-v covariance",
        );
        n.var_u[5] = f64::NAN;
        assert!(x.variance(&n, Correlation::Independent).is_nan());
    }

    #[test]
    fn weights_after_a_smoother_equal_the_composite_stencil() {
        // Applying `s` after a smoother `m` at one node equals the composite
        // `s.after(m)` (Stencil::after, a convolution of the weights).
        let g = grid(9, 1.0);
        let ops = Ops::new(DiffScheme::Central, 1.0, 1.0, None);
        let m = Stencil::new(vec![
            Tap {
                dj: 0,
                di: -1,
                w: 0.25,
            },
            Tap {
                dj: 0,
                di: 0,
                w: 0.5,
            },
            Tap {
                dj: 0,
                di: 1,
                w: 0.25,
            },
        ]);
        let mut w = Weights::new(&g);
        assert!(w.add(&ops.dx, true, 40, 1.0));
        let raw = w.after(&m);
        let mut want = Weights::new(&g);
        assert!(want.add(&ops.dx.after(&m), true, 40, 1.0));
        for k in 0..81 {
            assert_close(raw.v[k], want.v[k], 1e-12, 1e-15, "composite");
        }
    }
}
