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

use super::moments::Moments;
use super::Params;

pub(super) enum Binned {
    Bin(usize),
    NoPhase,
    Outside,
}

/// The centre of bin `k` of `bins`, in degrees.
pub fn centre_deg(bins: usize, k: usize) -> f64 {
    (k as f64 + 0.5) * 360.0 / bins as f64
}

pub(super) fn bin_of(p: &Params, phase: Option<f64>) -> Binned {
    let Some(ph) = phase.filter(|x| x.is_finite()) else {
        return Binned::NoPhase;
    };
    let kb = p.phase_bins;
    let spacing = 360.0 / kb as f64;
    let ph = ph.rem_euclid(360.0);
    // rem_euclid can return 360.0 for tiny negative inputs; fold it back.
    let ph = if ph >= 360.0 { 0.0 } else { ph };
    let k = ((ph / spacing).floor() as usize).min(kb - 1);
    if let Some(w) = p.phase_width_deg {
        let off = ph - centre_deg(kb, k);
        if !(off >= -0.5 * w && off < 0.5 * w) {
            return Binned::Outside;
        }
    }
    Binned::Bin(k)
}

/// Ensemble maps of the decomposition: (k_coherent, k_stochastic) per node.
pub(super) fn energy_split(bins: &[&Moments], nodes: usize) -> (Vec<f64>, Vec<f64>) {
    let mut coh = vec![f64::NAN; nodes];
    let mut sto = vec![f64::NAN; nodes];
    for k in 0..nodes {
        let nb: f64 = bins.iter().map(|m| m.u.n[k]).sum();
        if nb < 2.0 {
            continue;
        }
        let mu = bins.iter().map(|m| m.u.n[k] * m.u.mean[k]).sum::<f64>() / nb;
        let mv = bins.iter().map(|m| m.v.n[k] * m.v.mean[k]).sum::<f64>() / nb;
        let (mut c, mut s) = (0.0, 0.0);
        for m in bins.iter().filter(|m| m.u.n[k] > 0.0) {
            let du = m.u.mean[k] - mu;
            let dv = m.v.mean[k] - mv;
            c += m.u.n[k] * (du * du + dv * dv);
            s += m.u.m2[k] + m.v.m2[k];
        }
        coh[k] = 0.5 * c / (nb - 1.0);
        sto[k] = 0.5 * s / (nb - 1.0);
    }
    (coh, sto)
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
