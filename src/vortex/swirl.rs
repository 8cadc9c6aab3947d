//! Swirling strength of a slice's own velocity, with its propagated
//! uncertainty, and the nodes where it is significant: the second core
//! criterion of `[vortices] criterion`.
//!
//! Owns: the central-difference gradient of a slice (a mean field, a
//! phase-bin mean or one frame) with the variances of its four components,
//! and the significance test. Does not own the swirling strength's formula
//! and its first-order uncertainty: that is `derive::quantities::at` with
//! `Kind::LambdaCi` (Zhou, Adrian, Balachandar & Kendall 1999, J. Fluid
//! Mech. 387:353), the one the per-frame `lambda_ci` column uses.
//!
//! Method: with `a = du/dx, b = du/dy, c = dv/dx, d = dv/dy` by second-order
//! central differences, `a = (u[i+1] - u[i-1]) / (2 dx)`, the variance of
//! `a` is `(s_u[i+1]² + s_u[i-1]²) / (4 dx²)` with `s_u` the slice's
//! velocity uncertainty (GUM, JCGM 100:2008, eq. 10). The two taps are two
//! pitches apart: under the top-hat window model of overlapping
//! interrogation windows (correlation `max(0, 1 - (1 - overlap) l)` at lag
//! `l`; Foucaut & Stanislas 2002) they are uncorrelated for overlaps up to
//! 50 %, so the sum is exact there and an underestimate above. The four
//! components are uncorrelated (different velocity components, or
//! different taps of one), as `quantities` states.
//!
//! Significance: a node swirls significantly when the interval
//! `lambda_ci ± k u(lambda_ci)` at the run's coverage excludes zero, i.e.
//! `lambda_ci > k u(lambda_ci)`, with `k` the two-sided normal quantile of
//! `[statistics] coverage` (1.96 for 0.95). Where the gradient's
//! discriminant is near zero the first-order uncertainty is replaced by
//! `quantities`' bounded form (`sqrt(u(D))` at `D = 0`), so a node with no
//! clear swirl does not pass. In pure noise the mean of `lambda_ci` is
//! positive (a square root of a clipped quadratic form), which is why a
//! threshold of zero finds cores everywhere and this test does not.
//!
//! Edge behaviour: a node without both neighbours in x and in y (the grid's
//! edge, a mask, a gap), or with a NaN velocity or uncertainty there, has
//! NaN swirl and never passes.

use crate::derive::quantities::{at, Kind, Node};
use crate::field::Grid;

/// The swirling strength (1/s) and its standard uncertainty at every node
/// of a slice (row-major over `g`; NaN where it cannot be made).
pub(crate) fn swirl(
    g: Grid,
    u: &[f64],
    v: &[f64],
    u_unc: &[f64],
    v_unc: &[f64],
) -> (Vec<f64>, Vec<f64>) {
    let n = g.len();
    let (mut lam, mut unc) = (vec![f64::NAN; n], vec![f64::NAN; n]);
    if g.nx < 3 || g.ny < 3 {
        return (lam, unc);
    }
    let (hx, hy) = (2.0 * g.dx, 2.0 * g.dy);
    for j in 1..g.ny - 1 {
        for i in 1..g.nx - 1 {
            let k = j * g.nx + i;
            let (e, w, no, so) = (k + 1, k - 1, k + g.nx, k - g.nx);
            let d = |f: &[f64], p: usize, m: usize, h: f64| (f[p] - f[m]) / h;
            let var = |s: &[f64], p: usize, m: usize, h: f64| (s[p] * s[p] + s[m] * s[m]) / (h * h);
            let node = Node {
                val: [
                    d(u, e, w, hx),
                    d(u, no, so, hy),
                    d(v, e, w, hx),
                    d(v, no, so, hy),
                ],
                var: [
                    var(u_unc, e, w, hx),
                    var(u_unc, no, so, hy),
                    var(v_unc, e, w, hx),
                    var(v_unc, no, so, hy),
                ],
                bias: [f64::NAN; 4],
                bvar: [f64::NAN; 4],
            };
            if node.val.iter().chain(&node.var).all(|x| x.is_finite()) {
                let r = at(Kind::LambdaCi, &node);
                (lam[k], unc[k]) = (r.val, r.unc);
            }
        }
    }
    (lam, unc)
}

/// Does the swirl at a node pass the significance test with coverage
/// factor `k` (see the module doc)? NaN never passes.
pub(crate) fn significant(lambda: f64, unc: f64, k: f64) -> bool {
    lambda > 0.0 && unc.is_finite() && lambda > k * unc
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid(n: usize, h: f64) -> Grid {
        Grid {
            nx: n,
            ny: n,
            x0: -h * (n / 2) as f64,
            y0: -h * (n / 2) as f64,
            dx: h,
            dy: h,
        }
    }

    #[test]
    fn solid_body_rotation_swirls_at_its_angular_velocity() {
        // u = -W y, v = W x: the gradient [[0, -W], [W, 0]] has eigenvalues
        // ±iW, so lambda_ci = W exactly (Zhou et al. 1999's definition), and
        // central differences are exact on a linear field.
        let (g, w) = (grid(7, 0.01), 3.0);
        let u: Vec<f64> = (0..g.len()).map(|k| -w * g.y(k / g.nx)).collect();
        let v: Vec<f64> = (0..g.len()).map(|k| w * g.x(k % g.nx)).collect();
        let s = vec![0.001; g.len()];
        let (lam, unc) = swirl(g, &u, &v, &s, &s);
        let c = 3 * 7 + 3;
        assert!((lam[c] - w).abs() < 1e-12, "{}", lam[c]);
        // u(D) with D = W², dD/db = -c = -W, dD/dc = -b = W, the others 0:
        // u(D)² = W² (var_b + var_c), var_b = var_c = 2 s² / (2h)²;
        // u(lambda) = u(D) / (2 sqrt(D + u(D)/4)) (quantities' form).
        let var_b = 2.0 * 1e-6 / (0.02f64 * 0.02);
        let ud = (w * w * 2.0 * var_b).sqrt();
        let want = ud / (2.0 * (w * w + 0.25 * ud).sqrt());
        assert!((unc[c] - want).abs() < 1e-12 * want, "{} {want}", unc[c]);
        assert!(significant(lam[c], unc[c], 1.96));
        // the edge has no central difference: NaN, never significant
        assert!(lam[0].is_nan() && !significant(lam[0], unc[0], 1.96));
    }

    #[test]
    fn pure_strain_has_no_swirl() {
        // u = S x, v = -S y: real eigenvalues ±S, lambda_ci = 0.
        let g = grid(5, 0.01);
        let u: Vec<f64> = (0..g.len()).map(|k| 2.0 * g.x(k % g.nx)).collect();
        let v: Vec<f64> = (0..g.len()).map(|k| -2.0 * g.y(k / g.nx)).collect();
        let s = vec![0.001; g.len()];
        let (lam, unc) = swirl(g, &u, &v, &s, &s);
        assert_eq!(lam[12], 0.0);
        assert!(!significant(lam[12], unc[12], 1.96));
    }
}

#[cfg(test)]
mod noise_tests {
    use super::*;
    use rand::Rng;
    use rand_distr::StandardNormal;

    fn noisy(
        r: &mut impl Rng,
        g: Grid,
        s: f64,
        f: impl Fn(f64, f64) -> (f64, f64),
    ) -> [Vec<f64>; 2] {
        let mut n = || s * r.sample::<f64, _>(StandardNormal);
        let (mut u, mut v) = (Vec::new(), Vec::new());
        for k in 0..g.len() {
            let (a, b) = f(g.x(k % g.nx), g.y(k / g.nx));
            u.push(a + n());
            v.push(b + n());
        }
        [u, v]
    }

    #[test]
    fn in_pure_noise_the_test_holds_its_level() {
        // Uniform stream plus white noise: no node swirls. A node passes
        // when the lower end of the 95 % interval is above zero, which a
        // calibrated test does for at most 2.5 % of the nodes (the upper
        // tail of a two-sided 95 % interval; normal distribution). Measured:
        // 2.2 % over 50 frames of 60 x 60 nodes, seed 5. (A threshold of
        // zero on lambda_ci itself passes 29 % of them.)
        let mut r = crate::testutil::rng(5);
        let g = Grid {
            nx: 60,
            ny: 60,
            x0: 0.0,
            y0: 0.0,
            dx: 1e-3,
            dy: 1e-3,
        };
        let s = 0.01;
        let (mut hit, mut positive, mut all) = (0usize, 0usize, 0usize);
        for _ in 0..50 {
            let [u, v] = noisy(&mut r, g, s, |_, _| (0.2, 0.0));
            let sig = vec![s; g.len()];
            let (l, un) = swirl(g, &u, &v, &sig, &sig);
            for k in (0..g.len()).filter(|&k| l[k].is_finite()) {
                all += 1;
                hit += usize::from(significant(l[k], un[k], 1.959963984540054));
                positive += usize::from(l[k] > 0.0);
            }
        }
        let rate = hit as f64 / all as f64;
        assert!(rate > 0.01 && rate <= 0.025, "{rate}");
        let naive = positive as f64 / all as f64;
        assert!(naive > 0.2, "{naive}");
    }

    #[test]
    fn a_noisy_lamb_oseen_core_swirls_significantly_at_its_centre() {
        // Lamb-Oseen vortex (Saffman 1992): Gamma 2e-3 m²/s, rc 5 mm, on a
        // 1 mm grid; at the centre lambda_ci = omega0 / 2 = Gamma / (2 pi
        // rc²) (solid-body core: the eigenvalues are ±i omega/2), and the
        // significant region is a connected disc about it.
        let mut r = crate::testutil::rng(8);
        let g = Grid {
            nx: 41,
            ny: 41,
            x0: -0.02,
            y0: -0.02,
            dx: 1e-3,
            dy: 1e-3,
        };
        let (gam, rc, s) = (2e-3, 5e-3, 0.002);
        let [u, v] = noisy(&mut r, g, s, |x, y| {
            let f = crate::synth::flows::lamb_oseen(x, y, 0.0, 0.0, gam, rc);
            (f.u, f.v)
        });
        let sig = vec![s; g.len()];
        let (l, un) = swirl(g, &u, &v, &sig, &sig);
        let c = 20 * 41 + 20;
        let want = gam / (2.0 * std::f64::consts::PI * rc * rc);
        assert!(
            (l[c] - want).abs() < 3.0 * un[c] + 0.02 * want,
            "{} {want} ± {}",
            l[c],
            un[c]
        );
        let inside = (0..g.len())
            .filter(|&k| (g.x(k % g.nx)).hypot(g.y(k / g.nx)) < 0.6 * rc)
            .filter(|&k| significant(l[k], un[k], 1.959963984540054))
            .count();
        let disc = (0..g.len())
            .filter(|&k| (g.x(k % g.nx)).hypot(g.y(k / g.nx)) < 0.6 * rc)
            .count();
        assert_eq!(
            inside, disc,
            "every node within 0.6 rc swirls significantly"
        );
    }
}
