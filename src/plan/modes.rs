//! `[modes]`: raw keys and their resolution into `modes::Params`.
//!
//! Every key is optional; the section is off unless `pod = true` (or
//! `phase = true`, which needs the POD). Errors name the section, the key,
//! the value and what was expected.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::modes;

/// `[modes]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawModes {
    /// Compute the POD of the velocity fluctuations (default false). Costs
    /// memory of about 3 × (modes + oversampling) numbers per vector
    /// component and node, and about as many operations per frame.
    pub pod: Option<bool>,
    /// Modes reported (default 10), between 1 and 500.
    pub modes: Option<usize>,
    /// Extra sketch columns beyond `modes` (default 20); the POD is exact
    /// when the fluctuations span at most `modes + oversampling` dimensions.
    pub oversampling: Option<usize>,
    /// Seed of the random test matrices (default 1).
    pub seed: Option<u64>,
    /// Estimate every frame's phase from modes 1 and 2 and write it as a
    /// frame table, `<run>/phase-from-modes.csv` (default false; implies pod).
    pub phase: Option<bool>,
    /// Modes drawn as maps (default 4, at most `modes`).
    pub figure_modes: Option<usize>,
}

/// Resolves `[modes]`.
pub(crate) fn resolve_modes(raw: &RawModes) -> Result<modes::Params> {
    let d = modes::Params::default();
    let phase = raw.phase.unwrap_or(d.phase);
    let m = raw.modes.unwrap_or(d.modes);
    if !(1..=500).contains(&m) {
        return Err(Error::usage(format!(
            "[modes] modes = {m} must lie between 1 and 500"
        )));
    }
    let over = raw.oversampling.unwrap_or(d.oversampling);
    if over > 1000 {
        return Err(Error::usage(format!(
            "[modes] oversampling = {over} must be at most 1000"
        )));
    }
    if phase && m < 2 {
        return Err(Error::usage(
            "[modes] phase = true needs modes >= 2 (the phase comes from modes 1 and 2)",
        ));
    }
    Ok(modes::Params {
        enabled: raw.pod.unwrap_or(false) || phase,
        modes: m,
        oversampling: over,
        seed: raw.seed.unwrap_or(d.seed),
        phase,
        figure_modes: raw.figure_modes.unwrap_or(d.figure_modes).min(m),
    })
}

/// `[spectra]` as written (time-resolved runs only).
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSpectra {
    /// Welch spectra at the probes and of the POD coefficients (default:
    /// on for runs whose frames have evenly spaced times and that have
    /// probes or `[modes] pod = true`; cheap: a few series per run).
    pub psd: Option<bool>,
    /// Samples per Welch segment (default: the largest power of two up to
    /// a quarter of the frames); the frequency resolution is fs / segment.
    pub segment: Option<usize>,
    /// Overlap of consecutive segments, a fraction in [0, 0.9] (default 0.5).
    pub overlap: Option<f64>,
    /// POD coefficients whose spectra are taken (default 4).
    pub modes: Option<usize>,
}

/// Resolves `[spectra]`.
pub(crate) fn resolve_spectra(raw: &RawSpectra) -> Result<crate::spectra::run::Params> {
    let d = crate::spectra::run::Params::default();
    if let Some(s) = raw.segment {
        if s < 8 {
            return Err(Error::usage(format!(
                "[spectra] segment = {s} must be at least 8 samples"
            )));
        }
    }
    let overlap = raw.overlap.unwrap_or(d.overlap);
    if !(0.0..=0.9).contains(&overlap) {
        return Err(Error::usage(format!(
            "[spectra] overlap = {overlap} must lie between 0 and 0.9 (a fraction of a segment)"
        )));
    }
    Ok(crate::spectra::run::Params {
        enabled: raw.psd,
        segment: raw.segment,
        overlap,
        modes: raw.modes.unwrap_or(d.modes),
    })
}
