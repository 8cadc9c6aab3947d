//! Spectra of time-resolved series: Welch's power spectral density with
//! chi-squared confidence intervals, and the dominant frequency.
//!
//! Owns: the PSD estimate and its interval, the peak and its uncertainty.
//! Does not own: where the series come from (the POD coefficients of
//! `modes`; the probes of `stats`) nor writing them.
//!
//! Method (Welch 1967, IEEE Trans. Audio Electroacoust. 15:70; the interval
//! from Bendat & Piersol, Random Data, ch. 8, from memory): the series is cut
//! into K segments of `nperseg` samples overlapping by `noverlap`; each is
//! detrended by its mean, multiplied by the periodic Hann window w, and
//! transformed; P(f) = mean over segments of |X(f)|² / (fs Σ w²), doubled
//! at every frequency but 0 and the Nyquist frequency (one-sided density,
//! units²/Hz). These are the conventions of `scipy.signal.welch` with its
//! defaults (checked against it in tests/it/spectra.rs).
//!
//! Interval: ν P / P_true follows χ²_ν with ν equivalent degrees of
//! freedom; for K independent segments ν = 2K (Bendat & Piersol). With
//! overlap the segments are correlated and ν = 2K / (1 + 2 Σ_{m=1}^{K−1}
//! (1 − m/K) ρ(m)²), ρ(m) the window's overlap correlation
//! Σ_t w_t w_{t+mS} / Σ_t w_t² at shift m S (Welch 1967, eq. for the
//! variance of the averaged periodogram; from memory). The two-sided
//! interval of probability p is [ν P / χ²_ν((1+p)/2), ν P / χ²_ν((1−p)/2)].
//! Valid for a stationary Gaussian series away from 0 and Nyquist.
//!
//! Edge behaviour: a series with a non-finite value, or shorter than
//! `nperseg`, is an error naming the series; nperseg must be ≥ 2.

pub mod run;

use rustdct::rustfft::{num_complex::Complex, FftPlanner};
use statrs::distribution::{ChiSquared, ContinuousCDF};

use crate::error::{Error, Result};

/// A one-sided PSD with its confidence interval.
#[derive(Debug, Clone)]
pub struct Psd {
    pub freq: Vec<f64>,
    pub psd: Vec<f64>,
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    /// Segments averaged and the equivalent degrees of freedom.
    pub segments: usize,
    pub dof: f64,
    /// Frequency resolution fs / nperseg (Hz).
    pub df: f64,
}

/// The periodic Hann window of length n (scipy's `get_window('hann', n)`).
pub fn hann(n: usize) -> Vec<f64> {
    (0..n)
        .map(|t| 0.5 - 0.5 * (std::f64::consts::TAU * t as f64 / n as f64).cos())
        .collect()
}

/// Welch's PSD of `x` sampled at `fs` Hz (see the module doc); `coverage`
/// is the probability of the interval (e.g. 0.95).
pub fn welch(
    name: &str,
    x: &[f64],
    fs: f64,
    nperseg: usize,
    noverlap: usize,
    coverage: f64,
) -> Result<Psd> {
    if nperseg < 2 || noverlap >= nperseg {
        return Err(Error::usage(format!(
            "{name}: Welch segments of {nperseg} samples overlapping by {noverlap} are not possible"
        )));
    }
    if x.len() < nperseg {
        return Err(Error::data(format!(
            "{name}: {} samples are fewer than one segment of {nperseg}",
            x.len()
        )));
    }
    if let Some(i) = x.iter().position(|v| !v.is_finite()) {
        return Err(Error::data(format!(
            "{name}: sample {i} is {} (not a number)",
            x[i]
        )));
    }
    let w = hann(nperseg);
    let step = nperseg - noverlap;
    let k = (x.len() - nperseg) / step + 1;
    let fft = FftPlanner::<f64>::new().plan_fft_forward(nperseg);
    let nf = nperseg / 2 + 1;
    let mut acc = vec![0.0; nf];
    let mut buf = vec![Complex::new(0.0, 0.0); nperseg];
    for s in 0..k {
        let seg = &x[s * step..s * step + nperseg];
        let mean = seg.iter().sum::<f64>() / nperseg as f64;
        for ((b, v), wt) in buf.iter_mut().zip(seg).zip(&w) {
            *b = Complex::new((v - mean) * wt, 0.0);
        }
        fft.process(&mut buf);
        for (a, b) in acc.iter_mut().zip(&buf) {
            *a += b.norm_sqr();
        }
    }
    let scale = 1.0 / (fs * w.iter().map(|v| v * v).sum::<f64>() * k as f64);
    let psd: Vec<f64> = acc
        .iter()
        .enumerate()
        .map(|(i, a)| {
            let one_sided = if i == 0 || (nperseg % 2 == 0 && i == nf - 1) {
                1.0
            } else {
                2.0
            };
            a * scale * one_sided
        })
        .collect();
    let dof = dof_welch(&w, step, k);
    let chi = ChiSquared::new(dof).map_err(|e| Error::data(format!("{name}: {e}")))?;
    let (hi_q, lo_q) = (
        chi.inverse_cdf(0.5 + 0.5 * coverage),
        chi.inverse_cdf(0.5 - 0.5 * coverage),
    );
    Ok(Psd {
        freq: (0..nf).map(|i| i as f64 * fs / nperseg as f64).collect(),
        lower: psd.iter().map(|p| dof * p / hi_q).collect(),
        upper: psd.iter().map(|p| dof * p / lo_q).collect(),
        psd,
        segments: k,
        dof,
        df: fs / nperseg as f64,
    })
}

/// Equivalent degrees of freedom of K averaged segments of window `w`
/// shifted by `step` (see the module doc): 2K for no overlap.
pub fn dof_welch(w: &[f64], step: usize, k: usize) -> f64 {
    let e: f64 = w.iter().map(|v| v * v).sum();
    let mut sum = 0.0;
    for m in 1..k {
        let shift = m * step;
        if shift >= w.len() {
            break;
        }
        let rho: f64 = w[..w.len() - shift]
            .iter()
            .zip(&w[shift..])
            .map(|(a, b)| a * b)
            .sum::<f64>()
            / e;
        sum += (1.0 - m as f64 / k as f64) * rho * rho;
    }
    2.0 * k as f64 / (1.0 + 2.0 * sum)
}

/// The dominant frequency: the largest PSD bin above 0 Hz, refined by a
/// parabola through the logarithms of it and its two neighbours (common
/// practice, exact for a Gaussian peak), with a standard uncertainty of
/// df / sqrt(12) (the peak known to lie within its bin, uniformly; common
/// practice). None when the largest bin is at an end of the spectrum.
pub fn dominant(p: &Psd) -> Option<(f64, f64)> {
    let n = p.psd.len();
    let i = (1..n).max_by(|&a, &b| p.psd[a].total_cmp(&p.psd[b]))?;
    if i + 1 >= n || p.psd[i].is_nan() || p.psd[i] <= 0.0 {
        return None;
    }
    let (a, b, c) = (p.psd[i - 1].ln(), p.psd[i].ln(), p.psd[i + 1].ln());
    let den = a - 2.0 * b + c;
    let off = if den < 0.0 && den.is_finite() {
        0.5 * (a - c) / den
    } else {
        0.0
    };
    Some((p.freq[i] + off.clamp(-0.5, 0.5) * p.df, p.df / 12f64.sqrt()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn white_noise_has_its_variance_spread_evenly() {
        // Parseval: Σ P df ≈ variance; a unit-variance alternating series
        // puts everything at Nyquist.
        let x: Vec<f64> = (0..256)
            .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
            .collect();
        let p = welch("x", &x, 10.0, 64, 32, 0.95).unwrap();
        let total: f64 = p.psd.iter().sum::<f64>() * p.df;
        // the Hann window's energy correction makes Σ P df equal the
        // windowed variance: 1 for a pure tone at Nyquist
        assert!((total - 1.0).abs() < 1e-12, "{total}");
        assert_eq!(p.segments, 7);
    }

    #[test]
    fn no_overlap_gives_two_degrees_of_freedom_per_segment() {
        assert_eq!(dof_welch(&hann(32), 32, 5), 10.0);
        // 50 % Hann overlap: ρ(1) = 1/6 (from the window), ν slightly below 2K
        let nu = dof_welch(&hann(64), 32, 7);
        assert!(nu < 14.0 && nu > 12.0, "{nu}");
    }

    #[test]
    fn a_tone_between_bins_is_found_within_its_uncertainty() {
        let fs = 100.0;
        let f0 = 7.3;
        let x: Vec<f64> = (0..2000)
            .map(|i| (std::f64::consts::TAU * f0 * i as f64 / fs).sin())
            .collect();
        let p = welch("x", &x, fs, 256, 128, 0.95).unwrap();
        let (f, u) = dominant(&p).unwrap();
        assert!((f - f0).abs() < 2.0 * u, "{f} ± {u}");
    }
}
