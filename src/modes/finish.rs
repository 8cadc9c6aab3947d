//! From the sketch to the POD: modes, energies with their sampling error,
//! the noise floor, and every frame's temporal coefficients.
//!
//! Method (Tropp, Yurtsever, Udell & Cevher 2017, SIAM J. Matrix Anal.
//! Appl. 38:1454, §4.2; Halko, Martinsson & Tropp 2011, SIAM Review 53:217,
//! §5.5): Q = orth(Y') by a Householder QR (d × k); the frames' coordinates
//! in that basis, B ≈ Qᵀ X' (k × N), by least squares from the co-range
//! sketch, (ΨQ) B = Ψ X'; the SVD B = Ũ Σ Vᵀ gives the modes φ_j = Q ũ_j,
//! the energies λ_j = σ_j² / (N − 1) (variance captured, m²/s², summed
//! over nodes and both components) and the coefficients a_j(f) = φ_jᵀ x'_f
//! = (Ũᵀ B)_jf, so that Σ_f a_j(f)² / (N − 1) = λ_j.
//!
//! Exactness: when the fluctuations of the run span at most k dimensions
//! (N − 1 ≤ k frames, or a flow of at most k modes) X' = Q Qᵀ X' and both
//! steps are exact to round-off: the result equals an SVD of X' (checked
//! against NumPy in tests/it). Beyond that the leading modes are found to
//! the accuracy bounds of the two papers above, set by the energy beyond
//! mode k: raise `oversampling` when the spectrum decays slowly.
//!
//! The small factorisations use nalgebra (already in the build through
//! statrs; no second linear-algebra crate).
//!
//! Sign: each mode is turned so that its entry of largest magnitude is
//! positive (the SVD leaves the sign free), with its coefficients.

use nalgebra::DMatrix;

use super::sketch::ModeSketch;
use crate::error::{Error, Result};

/// The POD of one run.
#[derive(Debug, Clone)]
pub struct Pod {
    /// Frames the POD was built from (the run's used frames).
    pub n_frames: usize,
    /// Nodes of the grid (each mode has u then v of every node: 2 × nodes).
    pub nodes: usize,
    /// Total fluctuation energy Σ var(u) + var(v) over nodes (m²/s²).
    pub total_energy: f64,
    /// λ_j, descending.
    pub energy: Vec<f64>,
    /// North et al. (1982) sampling error λ_j sqrt(2 / N_eff,j).
    pub energy_unc: Vec<f64>,
    /// Effective number of independent samples of each mode's coefficients.
    pub n_eff: Vec<f64>,
    /// False when a neighbour's eigenvalue lies within the sampling error.
    pub separated: Vec<bool>,
    /// Eigenvalue level of uncorrelated measurement noise, when known.
    pub noise_floor: Option<f64>,
    /// Unit-norm modes, u of every node then v (2 × nodes each).
    pub modes: Vec<Vec<f64>>,
    /// Per frame (in frame order): index, time, and a_j for every mode.
    pub frame_index: Vec<u64>,
    /// Per frame: its time, s (`None`: the frame table gives none).
    pub frame_time: Vec<Option<f64>>,
    /// Per frame: the coefficient a_j of every mode, m/s (the projection
    /// of the frame's fluctuation on the unit-norm mode;
    /// `pod-coefficients.csv`).
    pub coefficients: Vec<Vec<f64>>,
    /// The POD's own mean (u of every node then v).
    pub mean: Vec<f64>,
}

/// Builds the POD from a merged sketch. `max_lag` caps the autocorrelation
/// sum behind N_eff.
pub fn finish(s: &ModeSketch, max_lag: usize) -> Result<Pod> {
    let n = s.n_frames();
    if n < 2 {
        return Err(Error::data(format!(
            "POD needs at least 2 frames; the run has {n}"
        )));
    }
    let (d, k, l) = (2 * s.nodes, s.k, s.l);
    let q = DMatrix::from_row_slice(d, k, &s.y).qr().q();
    let psi = DMatrix::from_row_slice(l, d, &s.psi);
    let a = &psi * &q;
    let zc = centred_corange(s, &psi);
    let b = a
        .svd(true, true)
        .solve(&zc, 1e-300)
        .map_err(|e| Error::data(format!("POD least squares failed: {e}")))?;
    // The left singular vectors of B as eigenvectors of the k × k Gram
    // matrix B Bᵀ (nalgebra's symmetric QR; its SVD with vectors lost 3e-4
    // in the angle of a mode of the NumPy reference case, tests/it/modes.rs).
    let gram = &b * b.transpose();
    let eig = gram.symmetric_eigen();
    let u = eig.eigenvectors;
    let mut order: Vec<usize> = (0..eig.eigenvalues.len()).collect();
    order.sort_by(|&i, &j| eig.eigenvalues[j].total_cmp(&eig.eigenvalues[i]));
    let r = s.params.modes.min(order.len()).min(n - 1);
    let mut modes = Vec::with_capacity(r);
    let mut coef_rows = Vec::with_capacity(r);
    let mut energy = Vec::with_capacity(r);
    for &j in order.iter().take(r) {
        let uj = u.column(j);
        let mut phi: Vec<f64> = (&q * uj).iter().copied().collect();
        let mut a_j: Vec<f64> = (uj.transpose() * &b).iter().copied().collect();
        let big = phi
            .iter()
            .copied()
            .fold(0.0f64, |m, x| if x.abs() > m.abs() { x } else { m });
        if big < 0.0 {
            phi.iter_mut().for_each(|x| *x = -*x);
            a_j.iter_mut().for_each(|x| *x = -*x);
        }
        // the Rayleigh quotient ‖ũ_jᵀ B‖² / (N − 1): consistent with the
        // coefficients, and second-order in the eigenvector's error
        energy.push(a_j.iter().map(|x| x * x).sum::<f64>() / (n - 1) as f64);
        modes.push(phi);
        coef_rows.push(a_j);
    }
    let n_eff: Vec<f64> = coef_rows
        .iter()
        .map(|a| n_eff_variance(a, max_lag))
        .collect();
    let energy_unc: Vec<f64> = energy
        .iter()
        .zip(&n_eff)
        .map(|(l, ne)| l * (2.0 / ne).sqrt())
        .collect();
    let separated = separation(&energy, &energy_unc);
    let total_energy = s.m2.iter().sum::<f64>() / (n - 1) as f64;
    let coefficients = (0..n)
        .map(|f| coef_rows.iter().map(|a| a[f]).collect())
        .collect();
    Ok(Pod {
        n_frames: n,
        nodes: s.nodes,
        total_energy,
        energy,
        energy_unc,
        n_eff,
        separated,
        noise_floor: noise_floor(s),
        modes,
        frame_index: s.frames.iter().map(|f| f.index).collect(),
        frame_time: s.frames.iter().map(|f| f.time_s).collect(),
        coefficients,
        mean: s.mean.clone(),
    })
}

/// Ψ x'_f for every frame (l × N): z_f − Ψ m, with the gap nodes' part of
/// Ψ m added back (their fluctuation is taken as zero).
fn centred_corange(s: &ModeSketch, psi: &DMatrix<f64>) -> DMatrix<f64> {
    let (n, d) = (s.nodes, 2 * s.nodes);
    let m = nalgebra::DVector::from_column_slice(&s.mean);
    let pm = psi * &m;
    let mut z = DMatrix::zeros(s.l, s.n_frames());
    for (f, fr) in s.frames.iter().enumerate() {
        for q in 0..s.l {
            let mut v = fr.z[q] - pm[q];
            for &g in &fr.gaps {
                let g = g as usize;
                v += s.psi[q * d + g] * s.mean[g] + s.psi[q * d + n + g] * s.mean[n + g];
            }
            z[(q, f)] = v;
        }
    }
    z
}

/// Effective number of independent samples for a variance (Bartlett's
/// large-lag formula, from memory): N / (1 + 2 Σ_τ ρ(τ)²), the sum over the
/// lags before the autocorrelation first drops to zero or below (common
/// practice) and at most `max_lag`. The series has zero mean by
/// construction. Clamped to [1, N]; N for a series of zeros.
pub(crate) fn n_eff_variance(a: &[f64], max_lag: usize) -> f64 {
    let n = a.len();
    let c0: f64 = a.iter().map(|x| x * x).sum();
    if n < 3 || c0 <= 0.0 {
        return n as f64;
    }
    let mut sum = 0.0;
    for tau in 1..=max_lag.min(n - 2) {
        let c: f64 = a[..n - tau].iter().zip(&a[tau..]).map(|(x, y)| x * y).sum();
        let rho = c / c0;
        if rho <= 0.0 {
            break;
        }
        sum += rho * rho;
    }
    (n as f64 / (1.0 + 2.0 * sum)).clamp(1.0, n as f64)
}

/// North et al. (1982, Mon. Weather Rev. 110:699) rule of thumb: mode j is
/// not separated when a neighbouring eigenvalue lies within δλ_j of λ_j.
/// The last mode's lower neighbour is unknown and not judged.
pub(crate) fn separation(energy: &[f64], unc: &[f64]) -> Vec<bool> {
    (0..energy.len())
        .map(|j| {
            let near = |i: usize| (energy[j] - energy[i]).abs() < unc[j].max(unc[i]);
            !((j > 0 && near(j - 1)) || (j + 1 < energy.len() && near(j + 1)))
        })
        .collect()
}

/// The largest eigenvalue that uncorrelated noise alone would give: the
/// mean noise variance per component σ̄² (from the propagated standard
/// uncertainties of u and v) times the Marchenko–Pastur upper edge
/// (1 + sqrt(d / (N − 1)))² (Marchenko & Pastur 1967, from memory), d the
/// components that have samples. A mode whose energy is below this is
/// indistinguishable from noise. None when no uncertainty was known.
fn noise_floor(s: &ModeSketch) -> Option<f64> {
    let n = s.nodes;
    let (mut sum, mut rows) = (0.0, 0usize);
    for r in 0..2 * n {
        let c = s.count[r % n];
        if c > 0 {
            sum += s.unc2[r] / c as f64;
            rows += 1;
        }
    }
    let nf = s.n_frames();
    if rows == 0 || sum <= 0.0 || nf < 2 {
        return None;
    }
    let var = sum / rows as f64;
    Some(var * (1.0 + (rows as f64 / (nf - 1) as f64).sqrt()).powi(2))
}
