//! Phase bins and the triple decomposition.
//!
//! Owns: which bin a frame's phase falls in, bin centres, and the split of
//! the velocity fluctuation into a coherent (phase-locked) and a stochastic
//! part. Does not own: the per-bin moments (`moments`), the tables (`table`).
//!
//! Binning (docs/interface.md): with K bins, bin k holds the frames whose phase,
//! taken modulo 360, lies in [k 360/K, (k+1) 360/K); its centre is
//! (k + 1/2) 360/K. With a window width w < 360/K, a frame is kept only when
//! its phase lies in [centre - w/2, centre + w/2); the others are counted
//! and left out of the bins (they stay in the ensemble). A NaN phase is
//! "no phase".
//!
//! Triple decomposition (Reynolds & Hussain 1972, J. Fluid Mech. 54:263,
//! from memory): u = U + u~ + u'', with U the mean, u~ = `<u>_phase` - U the
//! coherent part and u'' the stochastic rest. Over the binned samples of a
//! node (N_b of them, bin counts n_k, bin means m_k, bin second central sums
//! M2_k, M' = sum n_k m_k / N_b) the total sum of squares splits exactly
//! (law of total variance): `sum M2_k + sum n_k (m_k - M')^2`. We report
//! `k_stochastic = 1/2 sum_k (M2u_k + M2v_k) / (N_b - 1)` and
//! `k_coherent = 1/2 sum_k n_k ((mu_k - M'u)^2 + (mv_k - M'v)^2) / (N_b - 1)`,
//! so that k_coherent + k_stochastic = k = (u_std^2 + v_std^2)/2 whenever
//! every frame is binned (then M' = U). Nodes with fewer than 2 binned
//! samples get NaN.
//!
//! Noise of the bin means: each bin mean carries the scatter of its samples
//! (measurement noise and turbulence), so the between-bin sum is biased,
//! `E[SS_b] = (K - 1) sigma^2 + sum n_k delta_k^2` (the expected mean
//! squares of one-way analysis of variance; e.g. Montgomery, Design and
//! Analysis of Experiments, ch. 3, common textbook result), K the bins
//! reached. With the pooled within-bin variance
//! `s_w^2 = SS_w / (N_b - K)` (unbiased), per component
//! `SS_b' = SS_b - (K - 1) s_w^2` is unbiased for the coherent sum and
//! `k_coherent = 1/2 sum_(u,v) SS_b' / (N_b - 1)`,
//! `k_stochastic = 1/2 sum_(u,v) s_w^2`, which still add up to k. With no
//! coherent motion k_coherent scatters about 0 (it can be negative, which
//! says "zero within its uncertainty"; it is not clipped, so sums over nodes
//! stay unbiased). Its standard uncertainty (`k_coherent_unc`), from the
//! variance of a non-central chi-square, `Var(SS_b) = 2 (K - 1) sigma^4 +
//! 4 sigma^2 sum n_k delta_k^2` (Johnson, Kotz & Balakrishnan, Continuous
//! Univariate Distributions 2, ch. 29, from memory), plus the uncertainty
//! of `s_w^2` (`2 sigma^4 / (N_b - K)`, times (K - 1)^2), u and v taken as
//! independent, samples as independent and Gaussian:
//! `u(k_c)^2 = 1/4 sum_(u,v) [2 (K-1) s_w^4 (1 + (K-1)/(N_b-K)) +
//! 4 s_w^2 max(0, SS_b')] / (N_b - 1)^2`. Where every bin holds one sample
//! (N_b = K) the within-bin variance is unknown: no correction, NaN
//! uncertainty.
//!
//! Per bin (the phase tables): `k_coherent = 1/2 sum_(u,v) [(m_k - U)^2 -
//! s_k^2 (1/n_k - 1/N)]`, the bin's squared coherent velocity less the
//! noise variance of `m_k - U` (bin mean against the ensemble mean of N
//! samples, of which the bin is part), with uncertainty
//! `1/2 sqrt(sum_(u,v) 2 v^2 + 4 v max(0, ...))`, v that noise variance.

use super::moments::{Moments, Scalar};
use super::Params;
use crate::derive::quantities::clip0;

pub(super) enum Binned {
    Bin(usize),
    NoPhase,
    Outside,
}

/// The centre of bin `k` of `bins`, in degrees.
pub(crate) fn centre_deg(bins: usize, k: usize) -> f64 {
    (k as f64 + 0.5) * 360.0 / bins as f64
}

/// A phase in degrees taken into [0, 360).
fn folded(phase_deg: f64) -> f64 {
    let ph = phase_deg.rem_euclid(360.0);
    // rem_euclid can return 360.0 for tiny negative inputs; fold it back.
    if ph >= 360.0 {
        0.0
    } else {
        ph
    }
}

/// The bin of a finite phase in degrees among `bins` equal bins: bin k
/// holds [k 360/K, (k+1) 360/K) after folding into [0, 360)
/// (docs/interface.md). The one rule for the reduction and `synth`'s truth.
pub(crate) fn bin_index(phase_deg: f64, bins: usize) -> usize {
    let spacing = 360.0 / bins as f64;
    ((folded(phase_deg) / spacing).floor() as usize).min(bins - 1)
}

pub(super) fn bin_of(p: &Params, phase: Option<f64>) -> Binned {
    let Some(ph) = phase.filter(|x| x.is_finite()) else {
        return Binned::NoPhase;
    };
    let kb = p.phase_bins;
    let k = bin_index(ph, kb);
    let ph = folded(ph);
    if let Some(w) = p.phase_width_deg {
        let off = ph - centre_deg(kb, k);
        if !(off >= -0.5 * w && off < 0.5 * w) {
            return Binned::Outside;
        }
    }
    Binned::Bin(k)
}

/// Ensemble maps of the decomposition: (k_coherent, k_stochastic,
/// k_coherent_unc) per node (module doc).
pub(super) fn energy_split<'a>(bins: &[&'a Moments], nodes: usize) -> [Vec<f64>; 3] {
    let mut coh = vec![f64::NAN; nodes];
    let mut sto = vec![f64::NAN; nodes];
    let mut unc = vec![f64::NAN; nodes];
    for k in 0..nodes {
        let nb: f64 = bins.iter().map(|m| m.u.n[k]).sum();
        if nb < 2.0 {
            continue;
        }
        let reached = bins.iter().filter(|m| m.u.n[k] > 0.0).count() as f64;
        let (mut c_sum, mut s_sum, mut var) = (0.0, 0.0, 0.0);
        for c in 0..2 {
            let sc = |m: &'a Moments| component(m, c);
            let mean = bins.iter().map(|m| sc(m).n[k] * sc(m).mean[k]).sum::<f64>() / nb;
            let (mut ssb, mut ssw) = (0.0, 0.0);
            for m in bins.iter().filter(|m| sc(m).n[k] > 0.0) {
                let d = sc(m).mean[k] - mean;
                ssb += sc(m).n[k] * d * d;
                ssw += sc(m).m2[k];
            }
            let free = nb - reached;
            if free >= 1.0 {
                let sw2 = ssw / free;
                let sb = ssb - (reached - 1.0) * sw2;
                c_sum += sb;
                s_sum += sw2 * (nb - 1.0);
                let km1 = reached - 1.0;
                var += 2.0 * km1 * sw2 * sw2 * (1.0 + km1 / free) + 4.0 * sw2 * clip0(sb);
            } else {
                c_sum += ssb;
                s_sum += ssw;
                var = f64::NAN;
            }
        }
        coh[k] = 0.5 * c_sum / (nb - 1.0);
        sto[k] = 0.5 * s_sum / (nb - 1.0);
        unc[k] = 0.5 * var.sqrt() / (nb - 1.0);
    }
    [coh, sto, unc]
}

/// u (0) or v (1) of a set of moments.
fn component(m: &Moments, c: usize) -> &Scalar {
    if c == 0 {
        &m.u
    } else {
        &m.v
    }
}

/// A bin's coherent kinetic energy per node, less the noise of its bin
/// mean, and the standard uncertainty (module doc). `ens` is the ensemble.
pub(super) fn bin_coherent(m: &Moments, ens: &Moments, nodes: usize) -> [Vec<f64>; 2] {
    let mut kc = vec![f64::NAN; nodes];
    let mut ku = vec![f64::NAN; nodes];
    for k in 0..nodes {
        let (n, nt) = (m.u.n[k], ens.u.n[k]);
        if n < 1.0 || nt < 1.0 {
            continue;
        }
        let (mut e, mut var) = (0.0, 0.0);
        for (b, t) in [(&m.u, &ens.u), (&m.v, &ens.v)] {
            let d = b.mean[k] - t.mean[k];
            // The noise variance of d: NaN with a single sample in the bin.
            let v = if n >= 2.0 {
                b.m2[k] / (n - 1.0) * clip0(1.0 / n - 1.0 / nt)
            } else {
                f64::NAN
            };
            let c = d * d - v;
            e += c;
            var += 2.0 * v * v + 4.0 * v * clip0(c);
        }
        kc[k] = 0.5 * e;
        ku[k] = 0.5 * var.sqrt();
    }
    [kc, ku]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn contract_bin_rule_with_wrapping_and_windows() {
        let mut p = Params {
            phase_bins: 4,
            ..Params::default()
        };
        let bin = |p: &Params, x: f64| match bin_of(p, Some(x)) {
            Binned::Bin(k) => k as i64,
            Binned::NoPhase => -1,
            Binned::Outside => -2,
        };
        // [0,90) -> 0, [90,180) -> 1 ... ; phases taken modulo 360 (docs/interface.md).
        assert_eq!(bin(&p, 0.0), 0);
        assert_eq!(bin(&p, 89.999), 0);
        assert_eq!(bin(&p, 90.0), 1);
        assert_eq!(bin(&p, 359.9), 3);
        assert_eq!(bin(&p, 360.0), 0);
        assert_eq!(bin(&p, -1.0), 3);
        assert_eq!(bin(&p, 725.0), 0);
        assert_eq!(bin(&p, -1e-17), 0);
        assert!(matches!(bin_of(&p, None), Binned::NoPhase));
        assert!(matches!(bin_of(&p, Some(f64::NAN)), Binned::NoPhase));
        assert_eq!(centre_deg(4, 1), 135.0);
        // A 30-degree window around each centre (45, 135, ...).
        p.phase_width_deg = Some(30.0);
        assert_eq!(bin(&p, 30.0), 0);
        assert_eq!(bin(&p, 59.999), 0);
        assert_eq!(bin(&p, 60.0), -2);
        assert_eq!(bin(&p, 29.0), -2);
    }
}
