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

pub(crate) mod run;

use rustdct::rustfft::{num_complex::Complex, FftPlanner};
use statrs::distribution::{ChiSquared, ContinuousCDF};

use crate::error::{Error, Result};

/// A one-sided PSD with its confidence interval.
#[derive(Debug, Clone)]
pub struct Psd {
    /// Frequencies, 0 to fs/2 in steps of `df`, Hz (`freq_hz` of
    /// `spectra.csv`).
    pub freq: Vec<f64>,
    /// One-sided power spectral density, (unit of the series)²/Hz (`psd`).
    pub psd: Vec<f64>,
    /// Lower end of the chi-squared interval at the requested coverage,
    /// same unit (`psd_lower`).
    pub lower: Vec<f64>,
    /// Upper end of that interval (`psd_upper`).
    pub upper: Vec<f64>,
    /// Segments averaged and the equivalent degrees of freedom.
    pub segments: usize,
    /// Equivalent degrees of freedom of the chi-squared interval (`dof`
    /// of `spectral-peaks.csv`).
    pub dof: f64,
    /// Frequency resolution fs / nperseg (Hz).
    pub df: f64,
    /// Each averaged segment's own one-sided periodogram (same scale as
    /// `psd`, which is their mean): what the peak's jackknife needs.
    pub per_segment: Vec<Vec<f64>>,
}

/// The periodic Hann window of length n (scipy's `get_window('hann', n)`).
pub(crate) fn hann(n: usize) -> Vec<f64> {
    (0..n)
        .map(|t| 0.5 - 0.5 * (std::f64::consts::TAU * t as f64 / n as f64).cos())
        .collect()
}

/// Welch's PSD of `x` sampled at `fs` Hz (see the module doc); `coverage`
/// is the probability of the interval (e.g. 0.95). Every sample must be
/// finite (`welch_gapped` averages only the segments without gaps).
pub fn welch(
    name: &str,
    x: &[f64],
    fs: f64,
    nperseg: usize,
    noverlap: usize,
    coverage: f64,
) -> Result<Psd> {
    if let Some(i) = x.iter().position(|v| !v.is_finite()) {
        return Err(Error::data(format!(
            "{name}: sample {i} is {} (not a number)",
            x[i]
        )));
    }
    welch_gapped(name, x, fs, nperseg, noverlap, coverage)
}

/// Welch's PSD over the segments of `x` that hold no NaN (a series with
/// holes: the segments that touch one are left out), with the equivalent
/// degrees of freedom of the segments kept (`dof_segments`, which for
/// consecutive segments is `dof_welch`). With no hole this is `welch`
/// exactly. An error when no segment is whole.
pub(crate) fn welch_gapped(
    name: &str,
    x: &[f64],
    fs: f64,
    nperseg: usize,
    noverlap: usize,
    coverage: f64,
) -> Result<Psd> {
    let starts = whole_segments(name, x, nperseg, noverlap)?;
    let w = hann(nperseg);
    let per_segment = segment_periodograms(x, fs, &w, &starts);
    let k = starts.len();
    let nf = nperseg / 2 + 1;
    // the mean in the order `welch` always summed (segment by segment)
    let mut acc = vec![0.0; nf];
    for p in &per_segment {
        for (a, v) in acc.iter_mut().zip(p) {
            *a += v;
        }
    }
    let psd: Vec<f64> = acc.iter().map(|a| a / k as f64).collect();
    let dof = dof_segments(&w, &starts);
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
        per_segment,
    })
}

/// The start of every Welch segment of `x` (`nperseg` samples, shifted by
/// `nperseg - noverlap`) that holds no NaN; a usage error for impossible
/// segments, a data error when the series is shorter than one segment or
/// no segment is whole.
fn whole_segments(name: &str, x: &[f64], nperseg: usize, noverlap: usize) -> Result<Vec<usize>> {
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
    let step = nperseg - noverlap;
    let k_all = (x.len() - nperseg) / step + 1;
    let starts: Vec<usize> = (0..k_all)
        .map(|s| s * step)
        .filter(|&t| x[t..t + nperseg].iter().all(|v| v.is_finite()))
        .collect();
    if starts.is_empty() {
        return Err(Error::data(format!(
            "{name}: no segment of {nperseg} samples is free of missing samples"
        )));
    }
    Ok(starts)
}

/// The one-sided periodogram of each segment starting at `starts`: the
/// segment's mean removed, the window `w` applied, `|FFT|^2 / (fs sum w^2)`,
/// doubled but at zero and (even length) Nyquist frequency.
fn segment_periodograms(x: &[f64], fs: f64, w: &[f64], starts: &[usize]) -> Vec<Vec<f64>> {
    let nperseg = w.len();
    let fft = FftPlanner::<f64>::new().plan_fft_forward(nperseg);
    let nf = nperseg / 2 + 1;
    let scale = 1.0 / (fs * w.iter().map(|v| v * v).sum::<f64>());
    let one_sided = |i: usize| {
        if i == 0 || (nperseg % 2 == 0 && i == nf - 1) {
            1.0
        } else {
            2.0
        }
    };
    let mut per_segment = Vec::with_capacity(starts.len());
    let mut buf = vec![Complex::new(0.0, 0.0); nperseg];
    for &t in starts {
        let seg = &x[t..t + nperseg];
        let mean = seg.iter().sum::<f64>() / nperseg as f64;
        for ((b, v), wt) in buf.iter_mut().zip(seg).zip(w) {
            *b = Complex::new((v - mean) * wt, 0.0);
        }
        fft.process(&mut buf);
        per_segment.push(
            (0..nf)
                .map(|i| buf[i].norm_sqr() * scale * one_sided(i))
                .collect::<Vec<f64>>(),
        );
    }
    per_segment
}

/// Equivalent degrees of freedom of K averaged segments of window `w`
/// shifted by `step` (see the module doc): 2K for no overlap.
#[cfg(test)]
pub(crate) fn dof_welch(w: &[f64], step: usize, k: usize) -> f64 {
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

/// Equivalent degrees of freedom of the equal-weight mean of the
/// periodograms of segments of window `w` starting at `starts` (samples):
/// `2 K² / Σ_i Σ_j ρ(s_i − s_j)²`, ρ the window's overlap correlation at
/// that shift (0 beyond the window; `starts` ascending). The variance of a mean of K
/// periodograms correlated as ρ² (Welch 1967, from memory, as in the
/// module doc); for K consecutive segments it is `dof_welch`'s formula.
pub(crate) fn dof_segments(w: &[f64], starts: &[usize]) -> f64 {
    let e: f64 = w.iter().map(|v| v * v).sum();
    let mut memo: std::collections::HashMap<usize, f64> = Default::default();
    let mut rho = |shift: usize| -> f64 {
        *memo.entry(shift).or_insert_with(|| {
            w[..w.len() - shift]
                .iter()
                .zip(&w[shift..])
                .map(|(a, b)| a * b)
                .sum::<f64>()
                / e
        })
    };
    // starts ascend; pairs a window or more apart do not correlate
    let mut sum = 0.0;
    for (i, &a) in starts.iter().enumerate() {
        sum += 1.0;
        for &b in starts[i + 1..].iter().take_while(|&&b| b - a < w.len()) {
            let r = rho(b - a);
            sum += 2.0 * r * r;
        }
    }
    let k = starts.len() as f64;
    2.0 * k * k / sum
}

/// The largest bin above 0 Hz of `psd` refined by a parabola through the
/// logarithms of it and its two neighbours, in bins; None when it is at an
/// end of the spectrum or not positive.
fn peak_bin(psd: &[f64]) -> Option<f64> {
    let n = psd.len();
    let i = (1..n).max_by(|&a, &b| psd[a].total_cmp(&psd[b]))?;
    if i + 1 >= n || psd[i].is_nan() || psd[i] <= 0.0 {
        return None;
    }
    Some(i as f64 + parabola(psd[i - 1], psd[i], psd[i + 1]))
}

/// The vertex offset (bins, within ±0.5) of the parabola through the
/// logarithms of three neighbouring powers; 0 when they do not curve down.
fn parabola(lo: f64, mid: f64, hi: f64) -> f64 {
    let (a, b, c) = (lo.ln(), mid.ln(), hi.ln());
    let den = a - 2.0 * b + c;
    let off = if den < 0.0 && den.is_finite() {
        0.5 * (a - c) / den
    } else {
        0.0
    };
    off.clamp(-0.5, 0.5)
}

/// The standard uncertainty, in bins, of the log-parabola peak of a pure
/// tone seen through the periodic Hann window of `n` samples, when the
/// tone's place within its bin is unknown (uniform): the root mean square
/// over that place of the interpolation's error. Computed here from the
/// window's spectrum (a complex tone at `n/4 + d` bins, d on 201 points of
/// [-0.5, 0.5], its DFT at the three bins about the largest), not recalled.
pub(crate) fn interpolation_unc_bins(n: usize) -> f64 {
    let w = hann(n);
    let m = (n / 4).max(2) as f64;
    let power = |f0: f64, k: f64| {
        let (mut re, mut im) = (0.0, 0.0);
        for (t, wt) in w.iter().enumerate() {
            let ph = std::f64::consts::TAU * (f0 - k) * t as f64 / n as f64;
            re += wt * ph.cos();
            im += wt * ph.sin();
        }
        re * re + im * im
    };
    let steps = 200;
    let mut sq = 0.0;
    for s in 0..=steps {
        let f0 = m - 0.5 + s as f64 / steps as f64;
        let i = f0.round();
        let est = i + parabola(power(f0, i - 1.0), power(f0, i), power(f0, i + 1.0));
        sq += (est - f0).powi(2);
    }
    (sq / (steps + 1) as f64).sqrt()
}

/// The dominant frequency (Hz) with its standard uncertainty: the largest
/// PSD bin above 0 Hz, refined by a parabola through the logarithms of it
/// and its two neighbours (common practice, exact for a Gaussian peak).
///
/// Uncertainty: two independent parts in quadrature (GUM eq. 10).
/// (1) Sampling: the delete-one jackknife over the averaged segments
/// (Efron & Stein 1981; the jackknife variance of a smooth statistic,
/// `(K-1)/K sum (f_i - f_mean)²` with `f_i` the peak without segment i),
/// taking the segments as independent, which Hann segments overlapping by
/// half nearly are (the periodograms' correlation is ρ² = 0.028, Welch
/// 1967). (2) Interpolation: `interpolation_unc_bins` times the bin width,
/// the error of the parabola on a pure tone placed anywhere in its bin.
/// With one segment (no jackknife) the uncertainty is the bin's own,
/// `df / sqrt(12)` (the peak known only to lie within its bin). None when
/// the largest bin is at an end of the spectrum.
pub(crate) fn dominant(p: &Psd) -> Option<(f64, f64)> {
    let f = peak_bin(&p.psd)? * p.df;
    let k = p.per_segment.len();
    if k < 2 {
        return Some((f, p.df / 12f64.sqrt()));
    }
    let n = p.psd.len();
    let total: Vec<f64> = (0..n)
        .map(|i| p.per_segment.iter().map(|s| s[i]).sum::<f64>())
        .collect();
    let loo: Vec<f64> = p
        .per_segment
        .iter()
        .map(|s| {
            let rest: Vec<f64> = (0..n).map(|i| total[i] - s[i]).collect();
            peak_bin(&rest).map_or(f64::NAN, |b| b * p.df)
        })
        .collect();
    let mean = loo.iter().sum::<f64>() / k as f64;
    let jack =
        ((k - 1) as f64 / k as f64 * loo.iter().map(|x| (x - mean).powi(2)).sum::<f64>()).sqrt();
    let nperseg = 2 * (n - 1);
    let interp = interpolation_unc_bins(nperseg) * p.df;
    Some((f, jack.hypot(interp)))
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
    fn the_interpolation_error_of_real_tones_matches_its_stated_rms() {
        // A real, mean-detrended sine through the whole Welch chain, placed
        // at 41 points across one bin: the RMS error of the refined peak
        // equals the window-only figure (0.01145 bins; measured 0.01134 for
        // the real tone, whose negative-frequency image adds little at bin
        // 12 of 64) to within 10 %.
        let (fs, n) = (64.0, 64);
        let mut sq = 0.0;
        for s in 0..=40 {
            let f0 = 12.0 - 0.5 + s as f64 / 40.0;
            let x: Vec<f64> = (0..640)
                .map(|i| (std::f64::consts::TAU * f0 * i as f64 / fs + 0.3).sin())
                .collect();
            let p = welch("x", &x, fs, n, n / 2, 0.95).unwrap();
            sq += (dominant(&p).unwrap().0 - f0).powi(2);
        }
        let rms = (sq / 41.0).sqrt();
        let stated = interpolation_unc_bins(n);
        assert!((rms / stated - 1.0).abs() < 0.1, "{rms} vs {stated}");
        assert!((stated - 0.01145).abs() < 5e-5, "{stated}");
    }

    #[test]
    fn the_jackknife_uncertainty_of_a_noisy_peak_matches_its_scatter() {
        // A narrow-band random process (AR(2) with poles at radius 0.97 and
        // angle 2 pi 0.2, white input), 300 seeds of 2048 samples, Welch
        // with 128-sample segments: the scatter of the dominant frequency
        // over seeds against the root mean square of its reported
        // uncertainty (the jackknife's, Efron & Stein 1981). Measured 0.93
        // (scatter 9.1e-4 Hz, against the bin's df / sqrt(12) = 2.3e-3).
        use rand::Rng;
        use rand_distr::StandardNormal;
        let (r, th) = (0.97f64, std::f64::consts::TAU * 0.2);
        let (a1, a2) = (2.0 * r * th.cos(), -r * r);
        let mut rng = crate::testutil::rng(17);
        let (mut est, mut unc2) = (Vec::new(), 0.0);
        for _ in 0..300 {
            let mut x = vec![0.0; 2048 + 200];
            for i in 2..x.len() {
                x[i] = a1 * x[i - 1] + a2 * x[i - 2] + rng.sample::<f64, _>(StandardNormal);
            }
            let p = welch("x", &x[200..], 1.0, 128, 64, 0.95).unwrap();
            let (f, u) = dominant(&p).unwrap();
            est.push(f);
            unc2 += u * u;
        }
        let m = est.iter().sum::<f64>() / est.len() as f64;
        let sd = (est.iter().map(|f| (f - m).powi(2)).sum::<f64>() / (est.len() - 1) as f64).sqrt();
        let ratio = sd / (unc2 / est.len() as f64).sqrt();
        assert!(ratio > 0.8 && ratio < 1.25, "scatter / reported {ratio}");
        // and it is far below the bin's own df / sqrt(12) = 0.00226
        assert!(sd < 0.5 * (1.0 / 128.0) / 12f64.sqrt(), "{sd}");
    }

    #[test]
    fn segments_with_holes_are_left_out_and_their_runs_add_degrees_of_freedom() {
        let x: Vec<f64> = (0..512).map(|i| ((i * 37 % 101) as f64).sin()).collect();
        // holes only after sample 300: the same segments as the first 300
        let mut holed = x.clone();
        for v in holed[300..].iter_mut().step_by(7) {
            *v = f64::NAN;
        }
        let a = welch_gapped("x", &holed, 10.0, 64, 32, 0.95).unwrap();
        let b = welch("x", &x[..300], 10.0, 64, 32, 0.95).unwrap();
        assert_eq!(
            (a.segments, a.psd.clone(), a.dof),
            (b.segments, b.psd, b.dof)
        );
        // a hole in the middle splits the segments into two runs: 15
        // segments of 64 by 32 in 512 samples; sample 256 spoils segments
        // 7 and 8 (starting at 224 and 256), leaving runs of 7 and 6 that
        // share no sample. The equal-weight mean of 13 periodograms has
        // variance (S_7 + S_6) / 13², S_K = 2 K² / dof_welch(K) the summed
        // correlations of a run, so dof = 2 · 13² / (S_7 + S_6).
        let mut mid = x.clone();
        mid[256] = f64::NAN;
        let c = welch_gapped("x", &mid, 10.0, 64, 32, 0.95).unwrap();
        assert_eq!(c.segments, 13);
        let w = hann(64);
        let s_of = |k: usize| 2.0 * (k * k) as f64 / dof_welch(&w, 32, k);
        let want = 2.0 * 169.0 / (s_of(7) + s_of(6));
        assert!((c.dof - want).abs() < 1e-12 * want, "{} {want}", c.dof);
        // consecutive segments: the general rule is dof_welch's
        let starts: Vec<usize> = (0..7).map(|s| 32 * s).collect();
        let (a, b) = (dof_segments(&w, &starts), dof_welch(&w, 32, 7));
        assert!((a - b).abs() < 1e-12 * b, "{a} {b}");
        assert!(welch("x", &mid, 10.0, 64, 32, 0.95).is_err());
        let none = vec![f64::NAN; 100];
        assert!(welch_gapped("x", &none, 10.0, 64, 32, 0.95).is_err());
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
