//! The sampling uncertainty of the ensemble mean of a phased run, with the
//! phase bins as strata.
//!
//! Why: in a periodic flow most of a node's scatter over the frames is the
//! coherent (phase-locked) motion. Frames taken at a fixed rate that is not
//! locked to the period sweep the phases almost evenly, so the mean does
//! not carry that scatter's sampling error as `s / sqrt(N)` would say: the
//! demo wake's peak mean vorticity had a random part of 2.9 1/s (23 %)
//! from a coherent swing of ±30 1/s, where the mean was in fact good to
//! under 1 1/s. What the mean does carry is (a) the sampling error of the
//! scatter *within* the bins (turbulence, jitter, noise) and (b) the
//! uneven share of the bins in the frames (a bin with more frames than its
//! 1/B share pulls the mean towards its phase).
//!
//! Method: post-stratification (Cochran 1977, *Sampling Techniques*, 3rd
//! ed., ch. 5, stratified random sampling; equation numbers from memory,
//! not quoted). With bins b = 1..B holding n_b of the node's N samples,
//! bin means m_b and within-bin sums of squared deviations M2_b:
//!
//! - random part: the plain mean is Σ_b (n_b / N) m_b, so its sampling
//!   variance given the bin counts is Σ_b (n_b / N)² s_b² / n_b
//!   = Σ_b n_b s_b² / N² with s_b² = M2_b / (n_b − 1); it is then scaled by
//!   N / N_eff of the node like the unstratified one (`table`), and its
//!   degrees of freedom are N − B (the pooled within-bin variance);
//! - systematic part: the imbalance d = (plain mean) − (1/B) Σ_b m_b, the
//!   difference from the phase-uniform mean; its own noise is small when
//!   the bins are evenly filled (the weights n_b / N − 1/B are), and it is
//!   taken as a known systematic effect of magnitude |d| (infinite degrees
//!   of freedom), not corrected: the ensemble columns stay the plain mean
//!   over the frames, as docs/interface.md defines them.
//!
//! When it applies: the bins partition the circle (no phase window
//! narrower than 360/B degrees, no frame outside every window), every
//! sample of the node lies in a bin (no frame without a phase), and every
//! bin holds at least 2 of the node's samples. Elsewhere the node keeps the
//! unstratified `s / sqrt(N_eff)`, which is right (if wide) for any
//! sampling. If the phases are unrelated to the flow, the within-bin
//! scatter is the whole scatter and the result equals the unstratified
//! one to within the bins' degrees of freedom.
//!
//! Assumption stated: the within-bin deviations of different frames are
//! treated with the node's N_eff of the whole series; for time-resolved
//! runs with many frames per period and slow turbulence this can be
//! optimistic (the coherent swing inflates the series' N_eff).

use super::moments::Scalar;

/// Per node: the stratified standard deviation whose `/ sqrt(N)` is the
/// random part of the mean (`sqrt(Σ n_b s_b² / N)`), and the imbalance d.
/// NaN at nodes where stratification does not apply.
#[derive(Debug, Clone)]
pub(super) struct Strata {
    pub std: Vec<f64>,
    pub imbalance: Vec<f64>,
    /// Degrees of freedom of the pooled within-bin variance, N − B.
    pub dof: Vec<f64>,
}

/// The strata of one scalar from the ensemble moments `all` and the bins'.
pub(super) fn strata(all: &Scalar, bins: &[&Scalar]) -> Strata {
    let nodes = all.n.len();
    let nan = vec![f64::NAN; nodes];
    let mut out = Strata {
        std: nan.clone(),
        imbalance: nan.clone(),
        dof: nan,
    };
    let b = bins.len();
    if b < 2 {
        return out;
    }
    for k in 0..nodes {
        let n = all.n[k];
        let counted: f64 = bins.iter().map(|s| s.n[k]).sum();
        // Every sample in a bin, every bin with a variance.
        if n < (2 * b) as f64 || counted != n || bins.iter().any(|s| s.n[k] < 2.0) {
            continue;
        }
        let mut var_sum = 0.0; // Σ n_b s_b²
        let mut uniform = 0.0; // Σ m_b
        for s in bins {
            let nb = s.n[k];
            var_sum += nb * s.m2[k] / (nb - 1.0);
            uniform += s.mean[k];
        }
        out.std[k] = (var_sum / n).sqrt();
        out.imbalance[k] = all.mean[k] - uniform / b as f64;
        out.dof[k] = n - b as f64;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scalar(samples: &[f64]) -> Scalar {
        let mut s = Scalar::new(1);
        let n = samples.len() as f64;
        let mean = samples.iter().sum::<f64>() / n;
        s.n[0] = n;
        s.mean[0] = mean;
        s.m2[0] = samples.iter().map(|x| (x - mean).powi(2)).sum();
        s
    }

    /// Hand-worked: bins {1, 3} and {10, 12, 14}. Plain mean 8; bin means
    /// 2 and 12, uniform mean 7, imbalance 1; s_1² = 2, s_2² = 4, so
    /// Σ n_b s_b² / N = (2·2 + 3·4) / 5 = 3.2.
    #[test]
    fn two_bins_by_hand() {
        let all = scalar(&[1.0, 3.0, 10.0, 12.0, 14.0]);
        let (a, b) = (scalar(&[1.0, 3.0]), scalar(&[10.0, 12.0, 14.0]));
        let s = strata(&all, &[&a, &b]);
        assert!((s.std[0] - 3.2f64.sqrt()).abs() < 1e-12);
        assert!((s.imbalance[0] - 1.0).abs() < 1e-12);
        assert_eq!(s.dof[0], 3.0);
    }

    #[test]
    fn a_bin_with_one_sample_or_a_sample_outside_the_bins_keeps_the_plain_rule() {
        let all = scalar(&[1.0, 3.0, 10.0, 12.0, 14.0]);
        let s = strata(&all, &[&scalar(&[1.0]), &scalar(&[3.0, 10.0, 12.0, 14.0])]);
        assert!(s.std[0].is_nan() && s.imbalance[0].is_nan());
        let s = strata(&all, &[&scalar(&[1.0, 3.0]), &scalar(&[10.0, 12.0])]);
        assert!(s.std[0].is_nan(), "a sample outside every bin");
    }
}
