//! The spectra of a time-resolved run: Welch PSD of the velocity at every
//! probe and of the leading POD coefficients, the dominant frequency of
//! each series with its uncertainty, its Strouhal number, and the
//! comparison with the run's known frequency.
//!
//! Owns: turning a run's per-frame series into spectra and their tables.
//! Does not own: the PSD kernel (`super::welch`), the series (the probe
//! traces of `stats`, the coefficients of `modes`).
//!
//! Time-resolved means (rule of our own, stated in docs/modes.md): every
//! frame of the run has a `time_s` and the steps between consecutive
//! frames agree within 1 % of their median. The series is laid on that
//! clock, frame by frame; a sample missing at a probe (no valid vector, or
//! a rejected frame) is filled by linear interpolation between its
//! neighbours in time (Welch needs an even clock; filling a few holes
//! lowers the PSD at high frequency slightly). A series with more than 10 %
//! of its samples missing is not filled: its spectrum averages only the
//! segments without a missing sample (`welch_gapped`, with the degrees of
//! freedom of the segments kept), with a warning; none when no segment is
//! whole.
//!
//! Strouhal number St = f L / U with the run's `[run.conditions]` velocity
//! and length (common practice), its standard uncertainty u(f) L / U (U and
//! L taken as exact). The comparison with the run's frequency (given in
//! the conditions, or estimated from the frame table's phases and times,
//! `report::conditions`) is the difference in units of u(f).

use serde::{Deserialize, Serialize};

use super::{dominant, welch, welch_gapped, Psd};
use crate::error::Result;
use crate::io::{Table, Values};

/// Resolved `[spectra]`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Params {
    /// `Some(true)`: on (a warning when the run is not time-resolved);
    /// `Some(false)`: off; `None` (default): on for time-resolved runs that
    /// have probes or a POD.
    pub enabled: Option<bool>,
    /// Samples per segment; `None`: the largest power of two up to a
    /// quarter of the frames (at least 8).
    pub segment: Option<usize>,
    /// Overlap of consecutive segments, a fraction in [0, 1) (default 0.5).
    pub overlap: f64,
    /// POD coefficients whose spectra are taken (default 4).
    pub modes: usize,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            enabled: None,
            segment: None,
            overlap: 0.5,
            modes: 4,
        }
    }
}

/// One series' spectrum and its dominant frequency.
#[derive(Debug, Clone)]
pub struct SeriesSpectrum {
    /// "probe0_u", "probe0_v", "a1", …
    pub name: String,
    /// Unit of the series ("m/s").
    pub unit: String,
    pub psd: Psd,
    /// Samples filled by interpolation.
    pub filled: usize,
    /// Dominant frequency and its standard uncertainty (Hz).
    pub peak: Option<(f64, f64)>,
}

/// The spectra of a run.
#[derive(Debug, Clone)]
pub struct RunSpectra {
    /// Sampling frequency (Hz) and samples per segment.
    pub fs: f64,
    pub nperseg: usize,
    pub noverlap: usize,
    pub coverage: f64,
    pub series: Vec<SeriesSpectrum>,
    /// (U, L) of the run's conditions, for the Strouhal number.
    pub scales: Option<(f64, f64)>,
    /// The run's frequency (Hz) and where it came from ("given",
    /// "frame table").
    pub reference: Option<(f64, &'static str)>,
}

/// The sampling frequency when `times` (one per frame, frame order) are
/// all known and evenly spaced (see the module doc); else why not.
pub(crate) fn clock(times: &[Option<f64>]) -> std::result::Result<f64, String> {
    if times.len() < 16 {
        return Err(format!(
            "{} frames are too few for a spectrum (at least 16)",
            times.len()
        ));
    }
    let t: Vec<f64> = times
        .iter()
        .map(|t| t.filter(|x| x.is_finite()))
        .collect::<Option<Vec<f64>>>()
        .ok_or("not every frame has a time (frame table with time_s)")?;
    let mut steps: Vec<f64> = t.windows(2).map(|w| w[1] - w[0]).collect();
    steps.sort_by(f64::total_cmp);
    let med = steps[steps.len() / 2];
    if med <= 0.0 || steps.iter().any(|s| (s - med).abs() > 0.01 * med) {
        return Err(format!(
            "frame times are not evenly spaced (steps from {:.4e} to {:.4e} s)",
            steps[0],
            steps[steps.len() - 1]
        ));
    }
    Ok(1.0 / med)
}

/// Fills NaN samples by linear interpolation between the nearest finite
/// neighbours (constant beyond the ends); returns how many were filled,
/// `None` when no sample is finite.
pub(crate) fn fill_gaps(x: &mut [f64]) -> Option<usize> {
    let known: Vec<usize> = (0..x.len()).filter(|&i| x[i].is_finite()).collect();
    let (&first, &last) = (known.first()?, known.last()?);
    let mut filled = 0;
    for i in 0..x.len() {
        if x[i].is_finite() {
            continue;
        }
        filled += 1;
        x[i] = if i < first {
            x[first]
        } else if i > last {
            x[last]
        } else {
            let k = known.partition_point(|&j| j < i);
            let (a, b) = (known[k - 1], known[k]);
            x[a] + (x[b] - x[a]) * (i - a) as f64 / (b - a) as f64
        };
    }
    Some(filled)
}

/// The segment length of `p` for `n` samples (see `Params::segment`).
pub(crate) fn segment_length(p: &Params, n: usize) -> usize {
    p.segment.unwrap_or_else(|| {
        let quarter = (n / 4).max(8);
        1usize << (usize::BITS - 1 - quarter.leading_zeros())
    })
}

/// The spectra of named series sampled at `fs` (see the module doc);
/// warnings name series skipped.
pub(crate) fn spectra(
    p: &Params,
    fs: f64,
    coverage: f64,
    series: Vec<(String, String, Vec<f64>)>,
    warnings: &mut Vec<String>,
) -> Result<Option<RunSpectra>> {
    let Some(n) = series.first().map(|s| s.2.len()) else {
        return Ok(None);
    };
    let nperseg = segment_length(p, n).min(n);
    let noverlap = ((p.overlap * nperseg as f64).round() as usize).min(nperseg - 1);
    let mut out = Vec::new();
    for (name, unit, mut x) in series {
        let missing = x.iter().filter(|v| !v.is_finite()).count();
        let (psd, filled) = if missing * 10 > x.len() {
            // too many holes to fill: only the segments without one
            match welch_gapped(&name, &x, fs, nperseg, noverlap, coverage) {
                Ok(p) => {
                    let all = (n - nperseg) / (nperseg - noverlap) + 1;
                    warnings.push(format!(
                        "{name}: {missing} of {} samples missing (more than 10 %); the spectrum averages the {} of {all} segments without a missing sample",
                        x.len(),
                        p.segments
                    ));
                    (p, 0)
                }
                Err(e) => {
                    warnings.push(format!(
                        "{name}: {missing} of {} samples missing (more than 10 %) and {}; no spectrum",
                        x.len(),
                        e.message.trim_start_matches(&format!("{name}: "))
                    ));
                    continue;
                }
            }
        } else {
            let filled = fill_gaps(&mut x).unwrap_or(0);
            (welch(&name, &x, fs, nperseg, noverlap, coverage)?, filled)
        };
        let peak = dominant(&psd);
        out.push(SeriesSpectrum {
            name,
            unit,
            psd,
            filled,
            peak,
        });
    }
    Ok(Some(RunSpectra {
        fs,
        nperseg,
        noverlap,
        coverage,
        series: out,
        scales: None,
        reference: None,
    }))
}

/// `spectra.csv`: one row per series and frequency: `series, freq_hz,
/// psd, psd_lower, psd_upper` (units²/Hz; the interval at the run's
/// coverage).
pub(crate) fn spectra_table(s: &RunSpectra) -> Table {
    let mut name = Vec::new();
    let mut cols: [Vec<f64>; 4] = Default::default();
    for ser in &s.series {
        let p = &ser.psd;
        for i in 0..p.freq.len() {
            name.push(ser.name.clone());
            for (c, v) in cols
                .iter_mut()
                .zip([p.freq[i], p.psd[i], p.lower[i], p.upper[i]])
            {
                c.push(v);
            }
        }
    }
    let mut t = Table::new();
    t.push("series", Values::Str(name));
    let [f, psd, lo, hi] = cols;
    t.push("freq_hz", Values::F64(f));
    t.push("psd", Values::F64(psd));
    t.push("psd_lower", Values::F64(lo));
    t.push("psd_upper", Values::F64(hi));
    t
}

/// `spectral-peaks.csv`: one row per series: `series, unit, peak_hz,
/// peak_unc_hz, strouhal, strouhal_unc, reference_hz, difference_over_unc,
/// segments, dof, df_hz, nperseg, noverlap, fs_hz, filled` (empty where
/// unknown).
pub(crate) fn peaks_table(s: &RunSpectra) -> Table {
    let mut t = Table::new();
    let col = |f: &dyn Fn(&SeriesSpectrum) -> f64| Values::F64(s.series.iter().map(f).collect());
    let peak = |x: &SeriesSpectrum| x.peak.map_or(f64::NAN, |p| p.0);
    let unc = |x: &SeriesSpectrum| x.peak.map_or(f64::NAN, |p| p.1);
    let st = |f: f64| s.scales.map_or(f64::NAN, |(u, l)| f * l / u);
    let reff = s.reference.map_or(f64::NAN, |r| r.0);
    t.push(
        "series",
        Values::Str(s.series.iter().map(|x| x.name.clone()).collect()),
    );
    t.push(
        "unit",
        Values::Str(s.series.iter().map(|x| x.unit.clone()).collect()),
    );
    t.push("peak_hz", col(&peak));
    t.push("peak_unc_hz", col(&unc));
    t.push("strouhal", col(&|x| st(peak(x))));
    t.push("strouhal_unc", col(&|x| st(unc(x))));
    t.push("reference_hz", col(&|_| reff));
    t.push("difference_over_unc", col(&|x| (peak(x) - reff) / unc(x)));
    t.push("segments", col(&|x| x.psd.segments as f64));
    t.push("dof", col(&|x| x.psd.dof));
    t.push("df_hz", col(&|x| x.psd.df));
    t.push("nperseg", col(&|_| s.nperseg as f64));
    t.push("noverlap", col(&|_| s.noverlap as f64));
    t.push("fs_hz", col(&|_| s.fs));
    t.push("filled", col(&|x| x.filled as f64));
    t
}
