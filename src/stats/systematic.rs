//! The systematic (truncation) parts of the uncertainty of a mean and of
//! one instantaneous value, per node, from the accumulated signed
//! truncation estimates: each debiased, then pooled over the node's 3 x 3
//! box (`pooled`).
//!
//! Owns: the debiased squares (`systematic_sq`, `systematic_inst_sq`) and
//! the pooling rule. Does not own: the estimates themselves (`derive`:
//! a stencil's truncation on a local degree-5 fit; a smoother's bias), or
//! how the parts combine with the random part (`table`).

use super::moments::Scalar;
use crate::derive::quantities::clip0;
use crate::field::{box_mean, Grid};

/// The squared systematic (truncation) part of the uncertainty of the mean
/// at node `k`, debiased and not yet clipped (it may be negative), `ratio`
/// = N_eff / N of the quantity there. For a derived quantity it is the
/// stencil's truncation; for u and v, when a smoother is set, the
/// smoother's own bias (`derive::smoothing_bias`), handled the same way.
///
/// The truncation of a mean is the mean of the per-frame truncations (the
/// estimate is linear in the data), so the signed estimates are averaged:
/// `b_mean`. Its noise is their scatter over the frames over the effective
/// number of them, `var(b_mean) = s_b^2 / (N_b ratio)` (measurement noise
/// and any real frame-to-frame change of the truncation alike); it is
/// removed from the square as for one frame, `D = b_mean^2 - var(b_mean)`,
/// an unbiased estimate of the squared systematic error (`systematic`
/// pools and clips it). One sample: the model variance of the estimate
/// replaces the scatter. A version-1 partial state (no signed sums): the
/// mean square of the per-frame estimates, as version 1 reported it. NaN
/// where no estimate was made.
fn systematic_sq(s: &Scalar, k: usize, ratio: f64) -> f64 {
    let nb = s.tb_n[k];
    if nb >= 2.0 {
        let s2 = s.tb_m2[k] / (nb - 1.0);
        let ne = (nb * ratio).clamp(1.0, nb);
        let m = s.tb_mean[k];
        m * m - s2 / ne
    } else if nb == 1.0 {
        let m = s.tb_mean[k];
        m * m - s.tb_var[k]
    } else if s.bias_n[k] > 0.0 {
        s.bias2[k] / s.bias_n[k]
    } else {
        f64::NAN
    }
}

/// Half-width, in nodes, of the neighbourhood over which `systematic`
/// pools the debiased squares: the 3 x 3 box. Chosen on the coverage study
/// (docs/uncertainty.md; k = 2 coverage / width ratio of `omega_mean_unc`,
/// raw least squares, measured side by side 2026-12-04): vortex far field
/// 0.853 / 0.68 with no pooling, 0.942 / 0.95 at half-width 1, 0.961 / 1.01
/// at 2, 0.977 / 1.13 at 3; uniform stream interior 0.985 / 1.11, 0.988 /
/// 1.17, 0.987 / 1.14, 0.985 / 1.12; and on the shipped demo against its
/// generated truth, where the wake's cores are only 1.25 pitches wide and a
/// wide box carries a core's truncation into its quiet neighbours: over the
/// nodes of |omega| below 5 % of the peak, median u / RMS error 0.87 with
/// no pooling, 1.06 at half-width 1 and 1.42 at 2 (u015; coverage 0.972,
/// 0.980, 0.983). The box mean alone (without the node's own value) left
/// the core of the 1.5-pitch vortex at 0.875.
const POOL_HALF: usize = 1;

/// The systematic part of the uncertainty of the mean at every node:
/// `B_k = sqrt(max(0, D_k, <D>_k))`, where `D` is `systematic_sq` and
/// `<D>_k` its mean over the known nodes of the (2 POOL_HALF + 1)^2 box
/// around node k (cut by the edges and masks).
///
/// Why pool: one node's `D` is the square of an estimate whose noise at the
/// mean is about 1.3 times the noise of the mean itself (least squares), so
/// a truncation of the size of the mean's noise is below what one node can
/// detect and `max(0, D)` is zero at most such nodes; the vortex far field
/// then covered 0.85 at k = 2 (docs/uncertainty.md, miss 3). A truncation
/// error is a smooth function of position (it follows the third and fifth
/// derivatives of the flow), while the estimator's noise decorrelates over a
/// few nodes across its fit, so the box mean estimates the local mean
/// square truncation with several times less noise. The larger of the node's
/// own and the pooled value is kept: a truncation that changes sign at a
/// node (its own `D` near zero, its neighbours' large: the under-resolved
/// cores of miss 4) takes its neighbourhood's size, and a sharp peak keeps
/// its own. Where the flow has no truncation both average to about zero.
/// Where the node's own estimate is unknown (an edge or mask node where the
/// degree-5 fit does not fit) the box mean of its neighbours stands in: an
/// edge stencil's truncation is rarely smaller than its neighbours', and
/// leaving it out made the demo's edge nodes in the wake (x = 20 and 98 mm)
/// report the noise alone, at up to 3.8 u from the truth. NaN where the node
/// has no samples or no node of its box has an estimate. `grid` gives the node layout
/// (`k = j*nx + i`).
pub(super) fn systematic(s: &Scalar, ratio: &[f64], grid: &Grid) -> Vec<f64> {
    let d: Vec<f64> = (0..s.n.len())
        .map(|k| systematic_sq(s, k, ratio[k]))
        .collect();
    pooled(&d, &s.n, grid)
}

/// The debiased mean square of the per-frame truncation at node `k`, not
/// clipped: `mean(b_f^2) - mean(v_b) = b_mean^2 + m2_b / N_b - sum(v_b) / N_b`
/// with each frame's model noise variance `v_b` of its estimate (the
/// scatter cannot stand in here: a truncation that changes from frame to
/// frame is part of what one frame's value carries). A version-1 partial
/// state: the mean square of the per-frame debiased estimates. NaN where no
/// estimate was made.
fn systematic_inst_sq(s: &Scalar, k: usize) -> f64 {
    let nb = s.tb_n[k];
    if nb >= 1.0 {
        let m = s.tb_mean[k];
        m * m + (s.tb_m2[k] - s.tb_var[k]) / nb
    } else if s.bias_n[k] > 0.0 {
        s.bias2[k] / s.bias_n[k]
    } else {
        f64::NAN
    }
}

/// The systematic part of one instantaneous value at every node: the RMS
/// truncation over the frames (`systematic_inst_sq`), pooled over the
/// 3 x 3 box like that of the mean (`systematic`, same reasons). It
/// replaces the RMS of per-frame debiased estimates, whose clipping at zero
/// left a floor of about 0.48 times the estimator's noise variance where the
/// flow has no truncation (issue 11): `omega_bias_inst`, and combined with
/// the random part into `omega_inst_unc`.
pub(super) fn systematic_inst(s: &Scalar, grid: &Grid) -> Vec<f64> {
    let d: Vec<f64> = (0..s.n.len()).map(|k| systematic_inst_sq(s, k)).collect();
    pooled(&d, &s.n, grid)
}

/// `sqrt(max(0, d_k, box mean of d))` at every node with samples (`n` > 0),
/// the box mean alone where `d_k` is unknown, NaN where the box has no
/// estimate (`systematic`).
fn pooled(d: &[f64], n: &[f64], grid: &Grid) -> Vec<f64> {
    let half = POOL_HALF;
    let (nx, ny) = (grid.nx, grid.ny);
    (0..d.len())
        .map(|k| {
            if n[k] <= 0.0 {
                return f64::NAN; // no value at the node: nothing to qualify
            }
            let pool = box_mean(d, nx, ny, k / nx, k % nx, half);
            match (d[k].is_finite(), pool) {
                (true, Some(m)) => clip0(d[k].max(m)).sqrt(),
                (true, None) => clip0(d[k]).sqrt(),
                (false, Some(m)) => clip0(m).sqrt(),
                (false, None) => f64::NAN,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A Scalar whose signed truncation estimates at the mean are
    /// `truth(k) + e`, e ~ N(0, 1) (a seeded Monte Carlo): one "frame" of
    /// each node with the noise variance 1 as its model variance.
    fn noisy_truncation(grid: &Grid, truth: &dyn Fn(usize) -> f64, seed: u64) -> Scalar {
        use rand_distr::{Distribution, StandardNormal};
        let mut r = crate::testutil::rng(seed);
        let mut s = Scalar::new(grid.len());
        for k in 0..grid.len() {
            let e: f64 = StandardNormal.sample(&mut r);
            s.n[k] = 1.0;
            s.tb_n[k] = 1.0;
            s.tb_mean[k] = truth(k) + e;
            s.tb_var[k] = 1.0;
        }
        s
    }

    fn grid(n: usize) -> Grid {
        crate::testutil::grid(n, n, 1.0)
    }

    #[test]
    fn pooled_truncation_finds_a_smooth_bias_below_one_nodes_noise() {
        // A uniform truncation of 0.8 with an estimator noise of 1 at the
        // mean (Monte Carlo, 40 x 40 nodes): one node's debiased estimate
        // max(0, b^2 - 1) is zero wherever |b| < 1, about 42 % of nodes
        // (P(|N(0.8, 1)| < 1) = Phi(0.2) - Phi(-1.8) = 0.543; normal table);
        // the 3 x 3 box mean of b^2 - 1 is 0.64 with a standard deviation of
        // about sqrt(2 + 4 * 0.64) / 3 = 0.71 if the nodes were independent.
        let g = grid(40);
        let s = noisy_truncation(&g, &|_| 0.8, 7);
        let ones = vec![1.0; g.len()];
        let b = systematic(&s, &ones, &g);
        let zero = b.iter().filter(|&&x| x == 0.0).count() as f64 / g.len() as f64;
        // both below zero: about P(Z < -0.9) = 0.18 of the box means,
        // fewer where the node's own value is positive (0.14 on this seed)
        assert!(zero < 0.2, "{zero} of the nodes report no truncation");
        let own_zero = (0..g.len())
            .filter(|&k| systematic_sq(&s, k, 1.0) <= 0.0)
            .count() as f64
            / g.len() as f64;
        assert!((0.45..0.65).contains(&own_zero), "{own_zero}");
        let rms = (b.iter().map(|x| x * x).sum::<f64>() / b.len() as f64).sqrt();
        // max(D, <D>) is above the truth on average: within [0.8, 1.5].
        assert!((0.8..1.5).contains(&rms), "{rms}");
    }

    #[test]
    fn pooled_truncation_stays_near_zero_where_there_is_none() {
        // No truncation, estimator noise 1: the reported systematic part
        // is the positive part of max(D, <D>). The RMS of the raw estimates
        // would be 1; the node's own debiased value alone gives
        // sqrt(E[(Z^2 - 1)+]) = sqrt(2 phi(1)) = 0.696 (normal table: standard normal
        // density phi(1) = 0.2420); the pooled maximum adds to it (the box
        // mean of nine is N(0, 0.47); 0.88 on this seed), staying below 1.
        let g = grid(40);
        let s = noisy_truncation(&g, &|_| 0.0, 11);
        let b = systematic(&s, &vec![1.0; g.len()], &g);
        let rms = (b.iter().map(|x| x * x).sum::<f64>() / b.len() as f64).sqrt();
        assert!((0.69..0.95).contains(&rms), "{rms}");
        // a sign change between two halves of +-2: every node keeps a
        // systematic part of about 2, also on the line where it changes
        let s = noisy_truncation(&g, &|k| if k % 40 < 20 { 2.0 } else { -2.0 }, 3);
        let b = systematic(&s, &vec![1.0; g.len()], &g);
        let least = b.iter().cloned().fold(f64::INFINITY, f64::min);
        assert!(least > 0.5, "{least}");
        let on_line: Vec<f64> = (0..g.len())
            .filter(|k| k % 40 == 19 || k % 40 == 20)
            .map(|k| b[k])
            .collect();
        let med = crate::robust::median_of(on_line.iter().copied());
        assert!((1.5..2.6).contains(&med), "{med}");
    }

    #[test]
    fn pooled_truncation_fills_an_unknown_node_from_its_box_and_is_nan_without_one() {
        let g = grid(5);
        let mut s = noisy_truncation(&g, &|_| 3.0, 5);
        s.tb_n[12] = 0.0; // no estimate at the centre node
        let b = systematic(&s, &vec![1.0; g.len()], &g);
        assert!(b.iter().all(|x| x.is_finite()));
        // the centre takes the mean of its eight neighbours' b^2 - 1
        let nb = [6, 7, 8, 11, 13, 16, 17, 18];
        let want = (nb.iter().map(|&k| s.tb_mean[k].powi(2) - 1.0).sum::<f64>() / 8.0).sqrt();
        assert!((b[12] - want).abs() < 1e-12, "{} {want}", b[12]);
        // no estimate anywhere in the box of the corner node 0: NaN
        for k in [0, 1, 5, 6] {
            s.tb_n[k] = 0.0;
        }
        let b = systematic(&s, &vec![1.0; g.len()], &g);
        assert!(b[0].is_nan());
        assert!(b[1].is_finite());
        // a node without any sample (a body, a mask) gets none from its box
        s.n[12] = 0.0;
        assert!(systematic(&s, &vec![1.0; g.len()], &g)[12].is_nan());
    }
}
