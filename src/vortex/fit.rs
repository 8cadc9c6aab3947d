//! A Lamb-Oseen fit to the vorticity of one core.
//!
//! Owns: `fit`, the weighted least-squares fit of
//! `omega(x, y) = Gamma / (pi rc^2) exp(-((x - x0)^2 + (y - y0)^2) / rc^2)`
//! (the Lamb-Oseen vortex: Saffman 1992, *Vortex Dynamics* §1.3) to the
//! nodes of a core, and the uncertainty of its four parameters.
//!
//! Method: Levenberg-Marquardt (Marquardt 1963, common practice) with
//! weights `1 / sigma_k^2` from the nodes' omega uncertainties (unit
//! weights where those are unknown). Uncertainty: the sandwich covariance
//! `H^-1 (J^T W C W J) H^-1`, `H = J^T W J`, with `C` the omega error
//! covariance including the neighbour correlation (`corr`), so correlated
//! node errors are not counted as independent information. When the
//! weighted residual exceeds what the uncertainties explain
//! (`chi2 / (n - 4) > 1`, e.g. neighbouring vortices or a core that is not
//! Lamb-Oseen), the covariance is scaled by that ratio (the Birge ratio,
//! common practice). Without known uncertainties the covariance is the
//! residual scatter's.
//!
//! Why fit: the thresholded region holds only the inner part of the core
//! (`|Gamma2| > 2/pi` ends near `r = 1.1 rc` for a Lamb-Oseen vortex,
//! measured on our grids), so the region's circulation is about 70 % of the
//! total; the fit extrapolates to the whole vortex, under the model.
//!
//! Returns `None` with fewer than 6 nodes, a singular system, no
//! convergence in 100 iterations, a radius outside `[0.1, 20]` times the
//! region's equivalent radius, or parameters the nodes do not determine: a
//! covariance that is not positive on its diagonal, or a standard
//! uncertainty of `Gamma` or `rc` as large as the value itself. Such a fit
//! (a core one row of nodes high, where `y0` trades against `Gamma`) has a
//! near-singular `H`; its numbers are rounding, and the same core reduced in
//! another grouping (threads, shards) could fit or not: one rule rejects it
//! everywhere.

use nalgebra::{Matrix4, Vector4};

use super::corr::OmegaCorrelation;

/// A fitted Lamb-Oseen core, SI, with standard uncertainties.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LambOseen {
    pub x: f64,
    pub y: f64,
    pub gamma: f64,
    pub rc: f64,
    pub x_unc: f64,
    pub y_unc: f64,
    pub gamma_unc: f64,
    pub rc_unc: f64,
    /// `chi2 / (n - 4)` with the diagonal weights (about 1 for a good fit).
    pub chi2_red: f64,
}

/// The data of one fit: node positions, omega and its uncertainty.
pub(crate) struct FitData<'a> {
    /// Row-major node indices (sorted), grid `nx` wide.
    pub nodes: &'a [usize],
    pub nx: usize,
    pub xy: &'a [(f64, f64)],
    pub omega: &'a [f64],
    pub sig: &'a [f64],
}

/// Model value and its gradient in (x0, y0, gamma, rc) at `(x, y)`.
fn model(p: &Vector4<f64>, x: f64, y: f64) -> (f64, Vector4<f64>) {
    let (x0, y0, g, rc) = (p[0], p[1], p[2], p[3]);
    let (dx, dy) = (x - x0, y - y0);
    let r2 = dx * dx + dy * dy;
    let rc2 = rc * rc;
    let e = (-r2 / rc2).exp();
    let a = g / (std::f64::consts::PI * rc2);
    let m = a * e;
    let grad = Vector4::new(
        m * 2.0 * dx / rc2,
        m * 2.0 * dy / rc2,
        e / (std::f64::consts::PI * rc2),
        m * (-2.0 / rc + 2.0 * r2 / (rc2 * rc)),
    );
    (m, grad)
}

/// Weighted sum of squares and normal equations at `p`.
fn normal(d: &FitData, w: &[f64], p: &Vector4<f64>) -> (f64, Matrix4<f64>, Vector4<f64>) {
    let (mut ss, mut h, mut b) = (0.0, Matrix4::zeros(), Vector4::zeros());
    for (k, &wk) in w.iter().enumerate() {
        let (m, j) = model(p, d.xy[k].0, d.xy[k].1);
        let r = d.omega[k] - m;
        ss += wk * r * r;
        h += wk * j * j.transpose();
        b += wk * r * j;
    }
    (ss, h, b)
}

/// Fits a Lamb-Oseen vortex from the start `p0 = (x0, y0, gamma, rc)`;
/// `r_eq` is the region's equivalent radius (for the sanity bounds).
pub(crate) fn fit(
    d: &FitData,
    p0: [f64; 4],
    r_eq: f64,
    corr: &OmegaCorrelation,
) -> Option<LambOseen> {
    let n = d.nodes.len();
    if n < 6 || p0.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let known = d.sig.iter().all(|s| s.is_finite() && *s > 0.0);
    let w: Vec<f64> = if known {
        d.sig.iter().map(|s| 1.0 / (s * s)).collect()
    } else {
        vec![1.0; n]
    };
    let (p, ss, h) = minimise(d, &w, Vector4::from(p0), r_eq)?;
    let rc = p[3].abs();
    if !(rc > 0.1 * r_eq && rc < 20.0 * r_eq) {
        return None;
    }
    let hinv = h.try_inverse()?;
    let dof = (n - 4) as f64;
    let chi2_red = ss / dof;
    let cov = if known {
        sandwich(d, &p, &hinv, corr) * chi2_red.max(1.0)
    } else {
        hinv * chi2_red
    };
    let var = [cov[(0, 0)], cov[(1, 1)], cov[(2, 2)], cov[(3, 3)]];
    if var.iter().any(|v| !(v.is_finite() && *v >= 0.0)) {
        return None;
    }
    let [x_unc, y_unc, gamma_unc, rc_unc] = var.map(f64::sqrt);
    if !(gamma_unc < p[2].abs() && rc_unc < rc) {
        return None;
    }
    Some(LambOseen {
        x: p[0],
        y: p[1],
        gamma: p[2],
        rc,
        x_unc,
        y_unc,
        gamma_unc,
        rc_unc,
        chi2_red,
    })
}

/// Levenberg-Marquardt from `p`: the parameters, the weighted sum of
/// squares and the normal matrix `H = J^T W J` at the minimum, or `None`
/// when a step cannot be solved or 100 iterations do not converge.
fn minimise(
    d: &FitData,
    w: &[f64],
    mut p: Vector4<f64>,
    r_eq: f64,
) -> Option<(Vector4<f64>, f64, Matrix4<f64>)> {
    let mut lambda = 1e-3;
    let (mut ss, mut h, mut b) = normal(d, w, &p);
    for _ in 0..100 {
        let mut a = h;
        for i in 0..4 {
            a[(i, i)] *= 1.0 + lambda;
        }
        let step = a.lu().solve(&b)?;
        let trial = p + step;
        let (ss2, h2, b2) = normal(d, w, &trial);
        if ss2.is_finite() && ss2 <= ss && trial[3] > 0.0 {
            // Stop on the step, not on the sum of squares: a relative
            // change of 1e-12 in `ss` leaves the parameters uncertain to
            // about 1e-6 of themselves, and the same core reduced in
            // another grouping of frames (threads, shards) would then give
            // other digits. Near the minimum the steps shrink
            // quadratically, so a step of 1e-13 of each parameter's scale
            // means the parameters are at rounding.
            let scale = [r_eq, r_eq, trial[2].abs(), trial[3]];
            let small = (0..4).all(|i| step[i].abs() <= 1e-13 * scale[i]);
            p = trial;
            (ss, h, b) = (ss2, h2, b2);
            lambda = (lambda * 0.3).max(1e-12);
            if small {
                return Some((p, ss, h));
            }
        } else {
            lambda *= 10.0;
            if lambda > 1e10 {
                return Some((p, ss, h));
            }
        }
    }
    None
}

/// The sandwich covariance `H^-1 (J^T W C W J) H^-1` of the parameters `p`
/// with `C_ab = sig_a sig_b rho_ab` (the nodes' correlated omega errors),
/// so `J^T W C W J = sum J_a J_b^T rho_ab / (sig_a sig_b)`.
fn sandwich(
    d: &FitData,
    p: &Vector4<f64>,
    hinv: &Matrix4<f64>,
    corr: &OmegaCorrelation,
) -> Matrix4<f64> {
    let jac: Vec<Vector4<f64>> = (0..d.nodes.len())
        .map(|k| model(p, d.xy[k].0, d.xy[k].1).1)
        .collect();
    let mut meat = Matrix4::zeros();
    corr.pairs(d.nodes, d.nx, |a, bb, rho| {
        meat += jac[a] * jac[bb].transpose() * (rho / (d.sig[a] * d.sig[bb]));
    });
    hinv * meat * hinv
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::flows::lamb_oseen;
    use crate::testutil::assert_close;

    #[test]
    fn recovers_an_exact_lamb_oseen_core() {
        // Noise-free samples of the analytic vortex (Saffman 1992): the fit
        // must return its parameters from a start 30 % off.
        let (gamma, rc, x0, y0, h) = (2e-3, 4e-3, 0.3e-3, -0.2e-3, 1e-3);
        let nx = 21;
        let mut nodes = Vec::new();
        let (mut xy, mut om) = (Vec::new(), Vec::new());
        for j in 0..nx {
            for i in 0..nx {
                let (x, y) = ((i as f64 - 10.0) * h, (j as f64 - 10.0) * h);
                if x.hypot(y) < 1.1 * rc {
                    nodes.push(j * nx + i);
                    xy.push((x, y));
                    om.push(lamb_oseen(x, y, x0, y0, gamma, rc).omega);
                }
            }
        }
        let sig = vec![1.0; nodes.len()];
        let d = FitData {
            nodes: &nodes,
            nx,
            xy: &xy,
            omega: &om,
            sig: &sig,
        };
        let f = fit(
            &d,
            [0.0, 0.0, 1.3 * gamma, 0.7 * rc],
            4e-3,
            &OmegaCorrelation::independent(),
        )
        .expect("fit");
        assert_close(f.gamma, gamma, 0.0, 1e-8, "gamma");
        assert_close(f.rc, rc, 0.0, 1e-8, "rc");
        assert_close(f.x, x0, 1e-10, 0.0, "x0");
        assert_close(f.y, y0, 1e-10, 0.0, "y0");
    }

    #[test]
    fn a_core_one_row_high_is_not_fitted() {
        // Nodes of a single row of an exact Lamb-Oseen vortex (Saffman
        // 1992) centred between rows: along the row omega is
        // A exp(-dx^2 / rc^2) with A = Gamma / (pi rc^2) exp(-dy0^2 / rc^2),
        // so Gamma and y0 trade against each other and are not determined.
        // This is the demo's 6-node edge core that fitted in one grouping of
        // the frames and not in another; it must not fit in either.
        let (gamma, rc, h) = (2e-3, 4e-3, 1e-3);
        let nx = 11;
        let nodes: Vec<usize> = (2..9).collect();
        let xy: Vec<(f64, f64)> = nodes.iter().map(|&i| ((i as f64 - 5.0) * h, 0.0)).collect();
        let om: Vec<f64> = xy
            .iter()
            .map(|&(x, y)| lamb_oseen(x, y, 0.0, 0.4 * h, gamma, rc).omega)
            .collect();
        let sig = vec![1.0; nodes.len()];
        let d = FitData {
            nodes: &nodes,
            nx,
            xy: &xy,
            omega: &om,
            sig: &sig,
        };
        for p0 in [
            [0.0, 0.0, gamma, rc],
            [0.1 * h, 0.2 * h, 1.3 * gamma, 0.7 * rc],
        ] {
            assert_eq!(
                fit(&d, p0, 4e-3, &OmegaCorrelation::independent()),
                None,
                "{p0:?}"
            );
        }
    }
}
