//! `[statistics]` and `[phase]`: raw keys and their resolution into
//! `stats::Params`.
//!
//! Every key is optional; the defaults are those of `stats::Params`.
//! Errors name the section, the key, the value and what was expected.

use serde::{Deserialize, Serialize};

use super::ResolveCtx;
use crate::error::{Error, Result};
use crate::stats;

/// `[statistics]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawStatistics {
    /// Points whose running mean and standard deviation are traced frame by
    /// frame (the convergence table and figure), as `[[x, y], ...]` in the
    /// input's length unit; the nearest grid node is used.
    pub probes: Option<Vec<[f64; 2]>>,
    /// Coverage probability of the expanded-uncertainty columns
    /// (`*_mean_unc_p95` for 0.95, the default); strictly between 0 and 1.
    pub coverage: Option<f64>,
    /// Largest lag, in frames, summed in the autocorrelation that gives the
    /// effective number of independent samples of time-resolved runs
    /// (default 50). Memory grows with it: 32 bytes per node, lag and series.
    pub max_lag: Option<usize>,
    /// Relative standard uncertainty of the length calibration (metres per
    /// pixel), as a fraction (0.002 = 0.2 %); default 0. Enters velocities,
    /// their moments and every derived quantity by its unit.
    pub calibration_unc: Option<f64>,
    /// Relative standard uncertainty of the pulse separation, as a fraction;
    /// default 0.
    pub pulse_separation_unc: Option<f64>,
    /// Count replaced and filled vectors as samples of the statistics
    /// (default false: only valid measurements count).
    pub include_filled: Option<bool>,
    /// Final fraction of the frames over which convergence at the probes is
    /// judged (default 0.2); between 0.05 and 0.5.
    pub convergence_tail: Option<f64>,
}

/// `[phase]` as written.
#[derive(Debug, Clone, Default, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawPhase {
    /// Number of phase bins (default 12), between 1 and 3600.
    pub bins: Option<usize>,
    /// Width in degrees of each bin's phase window, centred on the bin
    /// centre; frames outside every window are left out of the phase
    /// statistics. Default: the whole bin (360 / bins). At most 360 / bins.
    pub width_deg: Option<f64>,
}

fn range(
    section: &str,
    key: &str,
    x: f64,
    lo: f64,
    hi: f64,
    open_lo: bool,
    expect: &str,
) -> Result<f64> {
    let ok = x.is_finite() && (if open_lo { x > lo } else { x >= lo }) && x <= hi;
    if ok {
        Ok(x)
    } else {
        Err(Error::usage(format!(
            "[{section}] {key} = {x} must be {expect}"
        )))
    }
}

/// Resolves `[statistics]` and `[phase]` into the statistics parameters.
pub(crate) fn resolve_stats(
    s: &RawStatistics,
    ph: &RawPhase,
    ctx: &ResolveCtx,
) -> Result<stats::Params> {
    let mut p = stats::Params::default();
    resolve_phase(ph, &mut p)?;
    if let Some(c) = s.coverage {
        if !(c > 0.0 && c < 1.0) {
            return Err(Error::usage(format!(
                "[statistics] coverage = {c} must be a probability strictly between 0 and 1 (e.g. 0.95)"
            )));
        }
        p.coverage = c;
    }
    if let Some(l) = s.max_lag {
        if l == 0 || l > 10_000 {
            return Err(Error::usage(format!(
                "[statistics] max_lag = {l} must be a number of frames between 1 and 10000"
            )));
        }
        p.max_lag = l;
    }
    resolve_relative_uncertainties(s, &mut p)?;
    if let Some(b) = s.include_filled {
        p.include_filled = b;
    }
    if let Some(t) = s.convergence_tail {
        p.convergence_tail = range(
            "statistics",
            "convergence_tail",
            t,
            0.05,
            0.5,
            false,
            "a fraction of the frames between 0.05 and 0.5",
        )?;
    }
    resolve_probes(s, ctx, &mut p)?;
    Ok(p)
}

/// `[phase]`: the number of phase bins and their width.
fn resolve_phase(ph: &RawPhase, p: &mut stats::Params) -> Result<()> {
    if let Some(b) = ph.bins {
        if b == 0 || b > 3600 {
            return Err(Error::usage(format!(
                "[phase] bins = {b} must lie between 1 and 3600"
            )));
        }
        p.phase_bins = b;
    }
    if let Some(w) = ph.width_deg {
        let spacing = 360.0 / p.phase_bins as f64;
        let expect = format!("a width in degrees above 0 and at most 360 / bins = {spacing}");
        range(
            "phase",
            "width_deg",
            w,
            0.0,
            spacing * (1.0 + 1e-12),
            true,
            &expect,
        )?;
        p.phase_width_deg = (w < spacing).then_some(w);
    }
    Ok(())
}

/// The relative uncertainties of the calibration and the pulse separation.
fn resolve_relative_uncertainties(s: &RawStatistics, p: &mut stats::Params) -> Result<()> {
    if let Some(r) = s.calibration_unc {
        p.calibration_unc = range(
            "statistics",
            "calibration_unc",
            r,
            0.0,
            0.5,
            false,
            "a relative uncertainty between 0 and 0.5 (0.002 = 0.2 %)",
        )?;
    }
    if let Some(r) = s.pulse_separation_unc {
        p.pulse_separation_unc = range(
            "statistics",
            "pulse_separation_unc",
            r,
            0.0,
            0.5,
            false,
            "a relative uncertainty between 0 and 0.5 (0.001 = 0.1 %)",
        )?;
    }
    Ok(())
}

/// The probe points, scaled to metres.
fn resolve_probes(s: &RawStatistics, ctx: &ResolveCtx, p: &mut stats::Params) -> Result<()> {
    if let Some(pr) = &s.probes {
        for (i, &[x, y]) in pr.iter().enumerate() {
            if !(x.is_finite() && y.is_finite()) {
                return Err(Error::usage(format!(
                    "[statistics] probes[{i}] = [{x}, {y}] must be two finite coordinates"
                )));
            }
            p.probes.push((x * ctx.length_scale, y * ctx.length_scale));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ctx() -> ResolveCtx {
        ResolveCtx {
            velocity_scale: 1.0,
            px_velocity: None,
            length_scale: 1e-3,
        }
    }

    fn parse(text: &str) -> Result<stats::Params> {
        #[derive(Deserialize)]
        struct T {
            #[serde(default)]
            statistics: RawStatistics,
            #[serde(default)]
            phase: RawPhase,
        }
        let t: T = toml::from_str(text).map_err(|e| Error::usage(e.message().to_string()))?;
        resolve_stats(&t.statistics, &t.phase, &ctx())
    }

    #[test]
    fn keys_resolve_to_si_and_defaults_hold() {
        let p = parse("[statistics]\nprobes = [[10.0, -2.5]]\ncoverage = 0.99\nmax_lag = 20\ncalibration_unc = 0.002\n[phase]\nbins = 8\nwidth_deg = 15\n").unwrap();
        assert_eq!(p.probes, vec![(0.01, -0.0025)]);
        assert_eq!((p.coverage, p.max_lag, p.phase_bins), (0.99, 20, 8));
        assert_eq!(p.phase_width_deg, Some(15.0));
        assert_eq!(p.calibration_unc, 0.002);
        assert!(!p.include_filled);
        assert_eq!(parse("").unwrap(), stats::Params::default());
        // The full bin width is the same as no window.
        assert_eq!(
            parse("[phase]\nbins = 4\nwidth_deg = 90\n")
                .unwrap()
                .phase_width_deg,
            None
        );
    }

    #[test]
    fn bad_values_name_the_key_and_what_was_expected() {
        let e = parse("[statistics]\ncoverage = 1.5\n").unwrap_err();
        assert!(
            e.message.contains("coverage = 1.5") && e.message.contains("between 0 and 1"),
            "{e}"
        );
        let e = parse("[phase]\nbins = 12\nwidth_deg = 40\n").unwrap_err();
        assert!(
            e.message.contains("width_deg = 40") && e.message.contains("30"),
            "{e}"
        );
        let e = parse("[statistics]\nmax_lag = 0\n").unwrap_err();
        assert!(e.message.contains("max_lag = 0"), "{e}");
        let e = parse("[statistics]\nconvergence_tail = 0.9\n").unwrap_err();
        assert!(e.message.contains("convergence_tail"), "{e}");
        let e = parse("[statistics]\nprobe = [[1.0, 2.0]]\n").unwrap_err();
        assert!(e.message.contains("probe"), "{e}");
        assert_eq!(e.exit_code(), 2);
    }
}
