//! Statistics over the frames of a run: the one mergeable accumulator, the
//! ensemble and phase-bin tables, effective sample size, GUM combination.
//!
//! Owns: everything that sums over frames. Does not own: per-frame values
//! (`derive`), writing files (`io`), the command line of shards (`cli`).
//!
//! The flow: the driver makes one `RunAccumulator` per fixed-size chunk of
//! frames, `push`es the chunk's frames in frame order, and `merge`s the
//! chunk accumulators in frame order; a shard's partial state is
//! `to_bytes` of its accumulator, and `merge` of the partials in frame order
//! gives the same statistics as one run (to round-off; bit-identical for a
//! fixed chunking, whatever the number of threads). `finish` turns the
//! accumulated sums into tables.
//!
//! What counts as a sample (the rule behind docs/interface.md `n_valid`): a node's
//! velocity counts in a frame when its status is VALID and u, v are finite;
//! a derived quantity counts where the node's velocity counts and its value
//! is finite. With `include_filled` replaced and filled vectors count too
//! (`n_valid` still counts only valid ones; `n_samples` is what was used).
//! Memory: a fixed number of values per node, quantity and moment for the
//! ensemble and each phase bin reached, the lag sums of `lags`, and three
//! numbers per frame and probe; nothing else grows with the frames.
//! Measured (`throughput_probe`, 100 x 100 nodes, omega and one more
//! quantity, 12 bins all reached): 41.6 MB of state; with `time_s` and
//! `max_lag = 50`, 114 MB (the lag sums: 96 bytes per node and lag).

mod codec;
pub(crate) mod finish;
pub(crate) mod frequency;
pub(crate) mod gum;
pub(crate) mod lags;
pub(crate) mod moments;
mod phase;
mod probes;
mod push;
pub(crate) use probes::nearest_node;
mod strata;
mod systematic;
mod table;
#[cfg(test)]
mod tests;

use crate::derive::Derived;
use crate::error::{Error, Result};
use crate::field::Table;
use crate::field::{Field, Grid, NodeTable, FILLED, REPLACED, VALID};

use lags::{Clock, Lags};
use moments::Moments;

/// The docs/interface.md `ensemble` columns after x, y, in order; every table of
/// `RunStats` (ensemble and each phase bin) starts with them.
#[cfg(test)]
pub(crate) const CONTRACT_COLUMNS: [&str; 12] = [
    "n_valid",
    "u_mean",
    "v_mean",
    "u_std",
    "v_std",
    "uv_cov",
    "omega_mean",
    "omega_std",
    "u_mean_unc",
    "v_mean_unc",
    "omega_mean_unc",
    "omega_inst_unc",
];

/// Resolved statistics parameters (from `[statistics]` and `[phase]`).
/// Missing fields deserialise to their defaults (partial states written by
/// an older build of the same format version stay readable).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(default)]
pub struct Params {
    /// Phase bins (docs/interface.md `[phase] bins`), used when frames have phases.
    pub phase_bins: usize,
    /// Width of each phase window in degrees, centred on the bin centre;
    /// `None`: the whole bin (360 / bins). Never wider than the spacing.
    pub phase_width_deg: Option<f64>,
    /// Probe points (x, y) in metres; the nearest node is traced.
    pub probes: Vec<(f64, f64)>,
    /// Coverage probability of the expanded uncertainties (default 0.95).
    pub coverage: f64,
    /// Largest lag (frames) of the autocorrelation sum for N_eff.
    pub max_lag: usize,
    /// Relative standard uncertainty of the length calibration (fraction).
    pub calibration_unc: f64,
    /// Relative standard uncertainty of the pulse separation (fraction).
    pub pulse_separation_unc: f64,
    /// Count replaced and filled vectors as samples (default false).
    pub include_filled: bool,
    /// Final fraction of the frames over which convergence is judged.
    pub convergence_tail: f64,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            phase_bins: 12,
            phase_width_deg: None,
            probes: Vec::new(),
            coverage: 0.95,
            max_lag: 50,
            calibration_unc: 0.0,
            pulse_separation_unc: 0.0,
            include_filled: false,
            convergence_tail: 0.2,
        }
    }
}

impl Params {
    /// The statistics settings in plain words, for `curlew check` and the
    /// report: "coverage 95 %, autocorrelation up to lag 50 frames, 12 phase
    /// bins (each the whole 30°), …".
    pub(crate) fn describe(&self) -> String {
        use crate::describe::{num, percent};
        let bin = 360.0 / self.phase_bins.max(1) as f64;
        let width = match self.phase_width_deg {
            Some(w) => format!("windows {}° wide", num(w, 3)),
            None => format!("each the whole {}°", num(bin, 3)),
        };
        let mut parts = vec![
            format!("coverage {}", percent(self.coverage)),
            format!("autocorrelation up to lag {} frames", self.max_lag),
            format!(
                "{} phase bins when frames have phases ({width})",
                self.phase_bins
            ),
        ];
        if self.calibration_unc > 0.0 || self.pulse_separation_unc > 0.0 {
            parts.push(format!(
                "systematic: calibration {}, pulse separation {}",
                percent(self.calibration_unc),
                percent(self.pulse_separation_unc)
            ));
        }
        parts.push(
            if self.include_filled {
                "replaced and filled vectors count as samples"
            } else {
                "only valid vectors are samples"
            }
            .into(),
        );
        if !self.probes.is_empty() {
            parts.push(format!(
                "{} probe(s), convergence judged over the last {} of the frames",
                self.probes.len(),
                percent(self.convergence_tail)
            ));
        }
        parts.join(", ")
    }

    /// Names of the fields in which `self` and `other` differ.
    fn differences(&self, other: &Params) -> Vec<String> {
        let (a, b) = (serde_json::to_value(self), serde_json::to_value(other));
        match (a, b) {
            (Ok(serde_json::Value::Object(a)), Ok(serde_json::Value::Object(b))) => a
                .iter()
                .filter(|(k, v)| b.get(*k) != Some(*v))
                .map(|(k, _)| k.clone())
                .collect(),
            _ => vec!["(unreadable)".into()],
        }
    }
}

/// One probe's trace: the node and, per frame, (index, u, v, omega), NaN
/// where the node had no sample.
#[derive(Debug, Clone, PartialEq)]
struct Trace {
    node: usize,
    rows: Vec<(u64, [f64; 3])>,
}

/// One frame's row of a probe trace: the run-wide frame index and u, v,
/// omega at the probe's node (NaN where the node had no sample).
pub(crate) type ProbeRow = (u64, [f64; 3]);

/// The accumulators of one run (ensemble, phase bins, lags, probes). One per
/// chunk of frames; chunks merge in frame order.
#[derive(Debug, Clone)]
pub(crate) struct RunAccumulator {
    pub grid: Grid,
    params: Params,
    quantities: Vec<String>,
    /// Unit of each quantity, learnt from the first frame ("" before).
    units: Vec<String>,
    ens: Moments,
    /// One per phase bin, allocated when the first frame reaches it.
    bins: Vec<Option<Moments>>,
    /// Frames without a phase, and with a phase outside every window.
    unphased: u64,
    outside: u64,
    /// Lagged sums for N_eff, when frames carry `time_s`.
    lags: Option<Lags>,
    clock: Clock,
    traces: Vec<Trace>,
    /// Run-wide index of the first and last frame pushed.
    span: Option<(u64, u64)>,
}

impl RunAccumulator {
    pub(crate) fn new(p: &Params, grid: Grid, quantities: &[&'static str]) -> Self {
        let nodes = grid.len();
        let traces = p
            .probes
            .iter()
            .map(|&(x, y)| Trace {
                node: probes::nearest_node(&grid, x, y),
                rows: Vec::new(),
            })
            .collect();
        RunAccumulator {
            grid,
            params: p.clone(),
            quantities: quantities.iter().map(|s| s.to_string()).collect(),
            units: vec![String::new(); quantities.len()],
            ens: Moments::new(nodes, quantities.len()),
            bins: vec![None; p.phase_bins],
            unphased: 0,
            outside: 0,
            lags: None,
            clock: Clock::new(),
            traces,
            span: None,
        }
    }

    /// Each probe's node and its rows (run-wide frame index; u, v, omega,
    /// NaN where the node had no sample), in frame order.
    pub(crate) fn probe_series(&self) -> Vec<(usize, &[ProbeRow])> {
        self.traces
            .iter()
            .map(|t| (t.node, t.rows.as_slice()))
            .collect()
    }

    /// Index of "omega" among the quantities.
    fn omega(&self) -> Option<usize> {
        self.quantities.iter().position(|q| q == "omega")
    }

    /// Merges the accumulator of the frames that follow `self`'s. Panics
    /// when the two cannot merge (see `try_merge`): chunk accumulators of
    /// one run always can.
    #[cfg(test)]
    pub(crate) fn merge(&mut self, later: RunAccumulator) {
        if let Err(e) = self.try_merge(later) {
            panic!("{e}");
        }
    }

    /// Merges `later` (frames after `self`'s) or says why not: a different
    /// grid, quantity list or accumulation parameters, or frames that do not
    /// follow. `self` is unchanged on error.
    pub(crate) fn try_merge(&mut self, later: RunAccumulator) -> Result<()> {
        if let Some(d) = self.grid.difference(&later.grid, 1e-9) {
            return Err(Error::data(format!("cannot merge partial statistics: {d}")));
        }
        if self.quantities != later.quantities {
            return Err(Error::data(format!(
                "cannot merge partial statistics of quantities [{}] with [{}]",
                later.quantities.join(", "),
                self.quantities.join(", ")
            )));
        }
        let diff = self.params.differences(&later.params);
        if !diff.is_empty() {
            return Err(Error::data(format!(
                "cannot merge partial statistics made with different [statistics] or [phase] settings ({})",
                diff.join(", ")
            )));
        }
        if let (Some((_, a)), Some((b, _))) = (self.span, later.span) {
            if b <= a {
                return Err(Error::data(format!(
                    "cannot merge partial statistics out of order: frames from {b} after frames up to {a}"
                )));
            }
        }
        for (u, l) in self.units.iter_mut().zip(&later.units) {
            if u.is_empty() {
                *u = l.clone();
            }
        }
        self.ens.merge(&later.ens);
        for (a, b) in self.bins.iter_mut().zip(later.bins) {
            match (a.as_mut(), b) {
                (Some(a), Some(b)) => a.merge(&b),
                (None, Some(b)) => *a = Some(b),
                (_, None) => {}
            }
        }
        self.unphased += later.unphased;
        self.outside += later.outside;
        match (self.lags.as_mut(), later.lags) {
            (Some(a), Some(b)) => a.merge(b),
            (None, Some(b)) => self.lags = Some(b),
            (_, None) => {}
        }
        self.clock.merge(&later.clock);
        for (a, b) in self.traces.iter_mut().zip(later.traces) {
            a.rows.extend(b.rows);
        }
        self.span = match (self.span, later.span) {
            (Some((a, _)), Some((_, b))) => Some((a, b)),
            (s, None) => s,
            (None, s) => s,
        };
        Ok(())
    }

    /// The finished statistics with the uncertainty settings of `p`
    /// (coverage, systematic components, convergence tail, lag cap up to
    /// the accumulated `max_lag`).
    pub(crate) fn finish(&self, p: &Params) -> RunStats {
        finish::finish(self, p)
    }
}

/// One phase bin's table.
#[derive(Debug, Clone)]
pub struct PhaseBin {
    /// Bin number from 0 (`phase_bin` of `phase.csv`).
    pub bin: usize,
    /// Bin centre in degrees.
    pub centre_deg: f64,
    /// Frames in the bin (`n_frames`).
    pub n_frames: usize,
    /// The bin's node table: every `ensemble` column, then `u_coherent`,
    /// `v_coherent`, `omega_coherent`.
    pub table: NodeTable,
}

/// The finished statistics of a run.
#[derive(Debug, Clone)]
pub struct RunStats {
    /// Every docs/interface.md `ensemble` column (after x, y), then our own.
    pub ensemble: NodeTable,
    /// Empty when the run has no phases.
    pub phase: Vec<PhaseBin>,
    /// Running statistics at probe points, when probes are named.
    pub convergence: Option<Table>,
    /// Effective number of independent samples (time-resolved runs): the
    /// mean over nodes of the velocity N_eff.
    pub n_eff: Option<f64>,
    /// Scalar results for campaign.csv, name and value in SI.
    pub summary: Vec<(String, f64)>,
    /// What the statistics could not do as asked, for the manifest and the
    /// report.
    pub warnings: Vec<String>,
}

pub(crate) use phase::bin_index as phase_bin_index;

/// Per node: does this frame's vector count as a sample? Its status counts
/// (valid, or replaced or filled when `include_filled`) and u, v are
/// finite: the one sample rule of the statistics and the two-point
/// correlations alike.
pub(crate) fn sample_mask(field: &Field, d: &Derived, include_filled: bool) -> Vec<bool> {
    field
        .status
        .iter()
        .zip(d.u.iter().zip(d.v.iter()))
        .map(|(&s, (u, v))| {
            (s == VALID || (include_filled && (s == REPLACED || s == FILLED)))
                && u.is_finite()
                && v.is_finite()
        })
        .collect()
}

/// The phase bin a frame of phase `phase_deg` falls in under `p`'s binning
/// (`None`: no phase, or outside every window).
pub(crate) fn phase_bin(p: &Params, phase_deg: Option<f64>) -> Option<usize> {
    match phase::bin_of(p, phase_deg) {
        phase::Binned::Bin(b) => Some(b),
        _ => None,
    }
}
