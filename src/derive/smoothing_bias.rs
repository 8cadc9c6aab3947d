//! The smoothing bias of the velocity: what a smoother takes away from the
//! flow itself, estimated per frame so that the statistics carry it into
//! the uncertainty of the mean like the truncation of a derivative.
//!
//! # Method
//!
//! A linear smoother S changes the true field u by the bias `(S - I) u`.
//! The smoothed field `S u` is what the frame gives, so the estimate is the
//! same operator applied once more: `b = (S - I) (S u) = (S - I) u +
//! (S - I)^2 u`, which equals the bias to leading order in the smoother's
//! width (for a Gaussian of width sigma, `(S - I) ≈ (sigma^2 / 2) ∇²`, and
//! the second term is of order sigma^4 ∇⁴ u; for a Savitzky-Golay fit of
//! degree p both are of order h^(p+1) or higher). This is the deferred
//! correction argument of numerical analysis applied to a filter (common
//! practice; the same reasoning as Richardson's extrapolation).
//!
//! The estimate's own noise comes from the measurement noise through the
//! composite stencil `C = S∘S - S`: `var(b) = sum_ab c_a c_b rho_ab sig_a sig_b`
//! (GUM eq. 13 with the run's error-correlation model, `Correlation`).
//! `stats` averages the signed estimates over the frames and removes that
//! noise (`stats::systematic`), so where the flow is linear over the
//! smoother's support the bias part falls to zero, and where the smoother
//! flattens a peak it stays.
//!
//! # Edges and gaps
//!
//! The value is the smoother applied again, with its own edge rule
//! (`stencil::cut`), at every node with a value, so the one-sided bias a
//! cut smoother has next to an edge or a mask is estimated too. The noise
//! variance is exact where the composite stencil fits on nodes with a
//! value (`Stencil::fits`); elsewhere it is the interior gain times the
//! node's own variance (an approximation; the statistics use it only for a
//! node with a single sample, the scatter of the estimates over the frames
//! otherwise). Nodes without a value give NaN. PLS smoothing is treated
//! through its equivalent stencil for the noise and through the smoother
//! itself (same s) for the value.

use ndarray::Array2;

use crate::stencil::correlation::Correlation;
use crate::stencil::smooth::Smoother;
use crate::stencil::Stencil;

/// Signed per-node smoothing-bias estimates of u and v with the variance of
/// their noise: `[b_u, var(b_u), b_v, var(b_v)]` (m/s and (m/s)²; NaN where
/// no estimate is made, see the module doc).
pub(crate) fn estimate(
    smoother: &Smoother,
    stencil: &Stencil,
    ok: &Array2<bool>,
    smoothed: [&Array2<f64>; 2],
    sig: [&Array2<f64>; 2],
    corr: &Correlation,
) -> [Array2<f64>; 4] {
    let sh = ok.dim();
    let composite = stencil.after(stencil).combine(1.0, stencil, -1.0);
    let gain = corr.gain(&composite);
    let mut out: [Array2<f64>; 4] = std::array::from_fn(|_| Array2::from_elem(sh, f64::NAN));
    for c in 0..2 {
        let again = smoother.apply(smoothed[c], ok);
        for ((j, i), &o) in ok.indexed_iter() {
            let b = again[[j, i]] - smoothed[c][[j, i]];
            if !o || !b.is_finite() {
                continue;
            }
            out[2 * c][[j, i]] = b;
            out[2 * c + 1][[j, i]] = if composite.fits(j, i, ok) {
                corr.variance_at(&composite, gain, sig[c], j, i)
            } else {
                gain * sig[c][[j, i]].powi(2)
            };
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A Gaussian smoother's bias on a parabola u = x² (in index units) is
    /// exactly sigma² (the kernel's second moment: sum w di² = sigma² for the
    /// discrete normalised Gaussian, up to its truncation), and S(x²) - x²
    /// is the same constant, so the estimate equals the bias. On a linear
    /// field both are zero.
    #[test]
    fn parabola_and_plane() {
        let s = Smoother::gaussian(1.0);
        let st = s.equivalent_stencil().unwrap();
        let m2 = st.moment(2, 0);
        let (ny, nx) = (21, 25);
        let ok = Array2::from_elem((ny, nx), true);
        let para = Array2::from_shape_fn((ny, nx), |(_, i)| (i as f64).powi(2));
        let plane = Array2::from_shape_fn((ny, nx), |(j, i)| 0.3 * i as f64 - 0.2 * j as f64);
        let sig = Array2::from_elem((ny, nx), 0.01);
        let corr = Correlation::Independent;
        let sp = s.apply(&para, &ok);
        let spl = s.apply(&plane, &ok);
        let e = estimate(&s, &st, &ok, [&sp, &spl], [&sig, &sig], &corr);
        let (j, i) = (10, 12);
        // the bias of S on x² is sum w (i + di)² - i² = m2 (first moment 0)
        assert!((sp[[j, i]] - para[[j, i]] - m2).abs() < 1e-9);
        assert!((e[0][[j, i]] - m2).abs() < 1e-9, "{}", e[0][[j, i]]);
        assert!(e[2][[j, i]].abs() < 1e-12);
        // the estimate's noise: 0.01² times the composite's sum of squares
        let c = st.after(&st).combine(1.0, &st, -1.0);
        let want = 1e-4 * c.taps.iter().map(|t| t.w * t.w).sum::<f64>();
        assert!((e[1][[j, i]] - want).abs() < 1e-15);
        // at the corner: the cut smoother's own one-sided bias is estimated
        // too, less exactly (measured: 0.855 against a true bias of 1.000,
        // since the field smoothed once is no longer x² near the edge); the
        // noise comes from the interior gain
        let corner = s.apply(&sp, &ok)[[0, 0]] - sp[[0, 0]];
        assert_eq!(e[0][[0, 0]], corner);
        let truth = sp[[0, 0]] - para[[0, 0]];
        assert!(
            (corner / truth - 1.0).abs() < 0.2,
            "one-sided at the corner: {corner} vs {truth}"
        );
        assert!((e[1][[0, 0]] - want).abs() < 1e-15);
    }
}
