//! Sampling a node table at arbitrary points, and the difference of two
//! runs on a common grid with its significance.
//!
//! Bilinear interpolation (common practice; e.g. Press et al., Numerical
//! Recipes, 3rd ed., §3.6): for a point with fractional indices
//! (i0 + t, j0 + s), f = (1−t)(1−s) f00 + t(1−s) f10 + (1−t)s f01 + ts f11.
//! It reproduces fields linear in x and in y exactly (tested). Edge
//! behaviour: points outside the grid (beyond a 1e-9 pitch tolerance) and
//! points whose four corners include a NaN give NaN: nothing is
//! extrapolated and no gap is bridged.
//!
//! Uncertainties are interpolated with the same weights, i.e. as if the
//! errors of the four corners were fully correlated. That is the
//! conservative choice: independent corners would give sqrt(Σ w² u²) ≤ Σ w u.

use crate::field::{Grid, NodeTable};

/// The value of column `col` of `t` at (x, y) by bilinear interpolation.
pub(crate) fn sample(grid: &Grid, col: &[f64], x: f64, y: f64) -> f64 {
    let Some((i0, i1, tx)) = bracket((x - grid.x0) / grid.dx, grid.nx) else {
        return f64::NAN;
    };
    let Some((j0, j1, ty)) = bracket((y - grid.y0) / grid.dy, grid.ny) else {
        return f64::NAN;
    };
    let at = |j: usize, i: usize| col[j * grid.nx + i];
    let w = [
        ((1.0 - tx) * (1.0 - ty), at(j0, i0)),
        (tx * (1.0 - ty), at(j0, i1)),
        ((1.0 - tx) * ty, at(j1, i0)),
        (tx * ty, at(j1, i1)),
    ];
    let mut acc = 0.0;
    for (wk, fk) in w {
        if wk == 0.0 {
            continue;
        }
        if !fk.is_finite() {
            return f64::NAN;
        }
        acc += wk * fk;
    }
    acc
}

/// (lower index, upper index, fraction) of a fractional index on `n` nodes.
fn bracket(f: f64, n: usize) -> Option<(usize, usize, f64)> {
    const TOL: f64 = 1e-9;
    if n == 0 || !f.is_finite() || f < -TOL || f > (n - 1) as f64 + TOL {
        return None;
    }
    let f = f.clamp(0.0, (n - 1) as f64);
    let i0 = (f.floor() as usize).min(n.saturating_sub(2));
    let i1 = (i0 + 1).min(n - 1);
    let t = if i1 == i0 { 0.0 } else { f - i0 as f64 };
    Some((i0, i1, t))
}

/// The uncertainty column that goes with `q`: `<q>_unc`, or for a mean
/// `X_mean` the column `X_mean_unc` (the same rule, named for clarity).
pub(crate) fn uncertainty_column(q: &str) -> String {
    format!("{q}_unc")
}

/// The difference `b − a` of one quantity on `a`'s grid.
#[derive(Debug, Clone)]
pub(crate) struct Difference {
    pub grid: Grid,
    pub a: Vec<f64>,
    pub b: Vec<f64>,
    pub delta: Vec<f64>,
    /// Combined standard uncertainty sqrt(u_a² + u_b²); NaN when unknown.
    pub u_delta: Vec<f64>,
    /// |Δ| > k u_Δ (false where Δ or u_Δ is NaN).
    pub significant: Vec<bool>,
    /// Nodes where Δ and u_Δ are both finite.
    pub n_compared: usize,
    pub n_significant: usize,
    /// True when `b` was interpolated (its grid differs from `a`'s).
    pub interpolated: bool,
}

/// Δ = b − a of column `q` on `a`'s grid; `b` is sampled bilinearly when
/// its grid differs. A node is significant when |Δ| > k·sqrt(u_a² + u_b²)
/// (common practice for comparing two independent measurements, e.g. the
/// normalised error of ISO 13528 §9.7 with a coverage factor k).
/// Returns None when `q` is missing from either table.
pub(crate) fn difference(a: &NodeTable, b: &NodeTable, q: &str, k: f64) -> Option<Difference> {
    let (qa, qb) = (a.get(q)?, b.get(q)?);
    let uq = uncertainty_column(q);
    let (ua, ub) = (a.get(&uq), b.get(&uq));
    let g = a.grid;
    let same = g.difference(&b.grid, 1e-6).is_none();
    let n = g.len();
    let (mut bv, mut bu) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for j in 0..g.ny {
        for i in 0..g.nx {
            let kk = j * g.nx + i;
            if same {
                bv.push(qb[kk]);
                bu.push(ub.map_or(f64::NAN, |u| u[kk]));
            } else {
                let (x, y) = (g.x(i), g.y(j));
                bv.push(sample(&b.grid, qb, x, y));
                bu.push(ub.map_or(f64::NAN, |u| sample(&b.grid, u, x, y)));
            }
        }
    }
    let mut d = Difference {
        grid: g,
        a: qa.to_vec(),
        b: bv,
        delta: vec![f64::NAN; n],
        u_delta: vec![f64::NAN; n],
        significant: vec![false; n],
        n_compared: 0,
        n_significant: 0,
        interpolated: !same,
    };
    for kk in 0..n {
        let delta = d.b[kk] - d.a[kk];
        let u = ua.map_or(f64::NAN, |u| u[kk]).hypot(bu[kk]);
        d.delta[kk] = delta;
        d.u_delta[kk] = u;
        if delta.is_finite() && u.is_finite() {
            d.n_compared += 1;
            if delta.abs() > k * u {
                d.significant[kk] = true;
                d.n_significant += 1;
            }
        }
    }
    Some(d)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testutil::assert_close;

    fn table(g: Grid, f: impl Fn(f64, f64) -> f64, unc: f64) -> NodeTable {
        let mut t = NodeTable::new(g);
        let mut v = Vec::new();
        for j in 0..g.ny {
            for i in 0..g.nx {
                v.push(f(g.x(i), g.y(j)));
            }
        }
        t.push("q", v);
        t.push("q_unc", vec![unc; g.len()]);
        t
    }

    #[test]
    fn bilinear_reproduces_a_bilinear_field_exactly() {
        // f = 1 + 2x − 3y + 5xy is reproduced exactly by bilinear
        // interpolation (a property of the method, common practice).
        let g = Grid {
            nx: 7,
            ny: 5,
            x0: 0.0,
            y0: 0.0,
            dx: 0.5,
            dy: 0.25,
        };
        let f = |x: f64, y: f64| 1.0 + 2.0 * x - 3.0 * y + 5.0 * x * y;
        let t = table(g, f, 0.0);
        let col = t.get("q").unwrap();
        for (x, y) in [(0.3, 0.1), (2.9, 0.99), (3.0, 1.0), (0.0, 0.0), (1.77, 0.5)] {
            assert_close(sample(&g, col, x, y), f(x, y), 1e-12, 1e-12, "bilinear");
        }
        assert!(sample(&g, col, 3.01, 0.5).is_nan(), "no extrapolation");
        assert!(sample(&g, col, -0.01, 0.5).is_nan());
    }

    #[test]
    fn difference_on_a_different_grid_interpolates() {
        let ga = Grid {
            nx: 9,
            ny: 6,
            x0: 0.0,
            y0: 0.0,
            dx: 1.0,
            dy: 1.0,
        };
        let gb = Grid {
            nx: 17,
            ny: 9,
            x0: -0.25,
            y0: 0.3,
            dx: 0.5,
            dy: 0.6,
        };
        let a = table(ga, |x, y| x + y, 1.0);
        let b = table(gb, |x, y| x + y + 0.5, 1.0);
        let d = difference(&a, &b, "q", 2.0).unwrap();
        assert!(d.interpolated);
        for (kk, dv) in d.delta.iter().enumerate() {
            let (x, y) = (ga.x(kk % ga.nx), ga.y(kk / ga.nx));
            if (0.3..=0.3 + 8.0 * 0.6).contains(&y) && x <= 7.75 {
                assert_close(*dv, 0.5, 1e-12, 0.0, "delta");
            }
        }
        // Δ = 0.5 against k·u = 2·sqrt(2): nothing is significant.
        assert_eq!(d.n_significant, 0);
        assert!(
            d.n_compared > 0 && d.n_compared < ga.len(),
            "{}",
            d.n_compared
        );
    }
}
