//! The coverage study: the matrix of cells, the fast subset, and the tables
//! (CSV and markdown) that docs/uncertainty.md quotes.
//!
//! Owns: which conditions are studied and how the results are tabled.
//! Every cell is built by `cell_for` from a `Spec` (flow, noise, gaps,
//! stages, time), so that the matrix reads as a list of conditions.
//!
//! The matrix (docs/uncertainty.md, "The study"): a uniform stream (no
//! gradient: every derived value is pure error), a Lamb–Oseen vortex with
//! its core resolved (core radius 4 h) and under-resolved (1.5 h); white
//! noise and window noise of 50 % and 75 % overlapping interrogation
//! windows; 0 and 5 % gaps (filled vectors); every smoother; independent
//! frames and AR(1) noise memory (a = 0.5, 0.9) at 15 frames/s; a pulsing
//! vortex in phase bins. Edges are a region of every cell.

use std::fmt::Write as _;

use super::cell::{Cell, Row};
use super::score::{verdict, Verdict};
use crate::synth::{Scenario, SynthOptions};

/// The flow of a cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FlowSpec {
    /// A uniform stream (no gradients): the `uniform` scenario.
    Uniform,
    /// Core radius in grid pitches.
    Vortex(f64),
    /// Pulsing vortex: core radius in pitches; phases in `bins` bins.
    Pulsing(f64, usize),
}

/// One condition of the matrix.
#[derive(Debug, Clone)]
pub struct Spec {
    /// The flow of the synthetic campaign.
    pub flow: FlowSpec,
    /// Window overlap of the noise: 0, 0.5, 0.75.
    pub overlap: f64,
    /// Fraction of nodes per frame that are gaps (filled vectors), 0 to 1.
    pub gaps: f64,
    /// `[smoothing]` body, e.g. `method = "gaussian"` (empty: none).
    pub smoothing: &'static str,
    /// `[derivatives] scheme`.
    pub scheme: &'static str,
    /// AR(1) coefficient of the noise in time.
    pub memory: f64,
    /// Frames per replica.
    pub frames: usize,
    /// Independent campaigns reduced and pooled (at least 2).
    pub replicas: usize,
    /// Seed of the first replica's random draws.
    pub seed: u64,
}

impl Default for Spec {
    fn default() -> Self {
        Spec {
            flow: FlowSpec::Vortex(4.0),
            overlap: 0.0,
            gaps: 0.0,
            smoothing: "",
            scheme: "least-squares",
            memory: 0.0,
            frames: 100,
            replicas: 4,
            seed: 2027,
        }
    }
}

impl Spec {
    /// A short unique name: flow/noise/gaps/smoother/scheme/time.
    pub(crate) fn name(&self) -> String {
        let flow = match self.flow {
            FlowSpec::Uniform => "uniform".to_string(),
            FlowSpec::Vortex(c) => format!("vortex-{c}h"),
            FlowSpec::Pulsing(c, b) => format!("pulsing-{c}h-{b}bins"),
        };
        let noise = match self.overlap {
            0.0 => "white".to_string(),
            o => format!("ov{:.0}", 100.0 * o),
        };
        let smooth = match self.smoothing {
            "" => "raw",
            s if s.contains("gaussian") => "gauss",
            s if s.contains("savitzky") => "sg",
            s if s.contains("pls") => "pls",
            _ => "smooth",
        };
        let scheme = match self.scheme {
            "least-squares" => "lsq",
            s => s,
        };
        let time = if self.memory > 0.0 {
            format!("ar{}", self.memory)
        } else {
            "indep".to_string()
        };
        format!(
            "{flow}/{noise}/gaps{:.0}/{smooth}/{scheme}/{time}",
            100.0 * self.gaps
        )
    }
}

/// Grid of the study's cells: 32 x 32 nodes at 1 mm.
pub const GRID: (usize, usize, f64) = (32, 32, 1.0e-3);

/// The cell of a condition.
pub fn cell_for(s: &Spec) -> Cell {
    let mut o = SynthOptions {
        frames: s.frames,
        seed: s.seed,
        nx: Some(GRID.0),
        ny: Some(GRID.1),
        pitch: Some(GRID.2),
        speeds: vec![0.2],
        noise_px: 0.1,
        outlier_fraction: 0.0,
        gap_fraction: s.gaps,
        noise_window: crate::synth::noise::window_of_overlap(s.overlap).unwrap_or(0),
        noise_memory: s.memory,
        ..SynthOptions::default()
    };
    let mut phase = String::new();
    match s.flow {
        FlowSpec::Uniform => o.scenario = Scenario::Uniform,
        FlowSpec::Vortex(c) => {
            o.scenario = Scenario::Vortex;
            o.core_pitches = Some(c);
        }
        FlowSpec::Pulsing(c, bins) => {
            o.scenario = Scenario::Vortex;
            o.core_pitches = Some(c);
            // 1.3 Hz at 15 frames/s: the phases of 100+ frames fill every bin
            o.pulse = Some((0.3, 1.3));
            o.phase_bins = bins;
            phase = format!("\n[phase]\nbins = {bins}\n");
        }
    }
    let smoothing = if s.smoothing.is_empty() {
        String::new()
    } else {
        format!("\n[smoothing]\n{}\n", s.smoothing)
    };
    let fill = if s.gaps > 0.0 {
        "\n[fill]\nmethod = \"neighbour-mean\"\n"
    } else {
        ""
    };
    let stages = format!(
        "[derivatives]\nscheme = \"{}\"\n\n[uncertainty]\nvelocity_noise = \"estimate\"\n{fill}{smoothing}{phase}",
        s.scheme
    );
    Cell {
        name: s.name(),
        synth: o,
        replicas: s.replicas,
        stages,
        instantaneous: !matches!(s.flow, FlowSpec::Pulsing(..)),
    }
}

/// The full matrix (slow: run by the ignored test `coverage_table`).
pub fn matrix() -> Vec<Spec> {
    let mut v = Vec::new();
    let flows = [
        FlowSpec::Uniform,
        FlowSpec::Vortex(4.0),
        FlowSpec::Vortex(1.5),
    ];
    // noise structure x flow, raw least squares
    for flow in flows {
        for overlap in [0.0, 0.5, 0.75] {
            v.push(Spec {
                flow,
                overlap,
                ..Spec::default()
            });
        }
    }
    // gaps, smoothers, schemes on the resolved and under-resolved vortex
    for flow in [FlowSpec::Vortex(4.0), FlowSpec::Vortex(1.5)] {
        v.push(Spec {
            flow,
            gaps: 0.05,
            ..Spec::default()
        });
        for smoothing in [
            "method = \"gaussian\"\nsigma = 1.0",
            "method = \"savitzky-golay\"\nhalf_width = 2\norder = 2",
            "method = \"pls\"\ns = 1.0",
        ] {
            v.push(Spec {
                flow,
                smoothing,
                ..Spec::default()
            });
        }
        for scheme in ["central", "richardson", "circulation", "auto"] {
            v.push(Spec {
                flow,
                scheme,
                ..Spec::default()
            });
        }
    }
    // noise memory (time-resolved), steady flows
    for flow in [FlowSpec::Uniform, FlowSpec::Vortex(4.0)] {
        for memory in [0.5, 0.9] {
            v.push(Spec {
                flow,
                memory,
                frames: 200,
                ..Spec::default()
            });
        }
    }
    // phase bins
    v.push(Spec {
        flow: FlowSpec::Pulsing(4.0, 8),
        frames: 240,
        ..Spec::default()
    });
    v.push(Spec {
        flow: FlowSpec::Pulsing(4.0, 8),
        frames: 240,
        memory: 0.5,
        ..Spec::default()
    });
    v
}

/// The rows shown in the markdown table: every column in the regions
/// `interior` and `edge`, and the mean and bias of omega also in `core`
/// and `far` (the CSV holds every region).
pub(crate) fn shown(r: &Row) -> bool {
    match r.region.as_str() {
        "interior" | "edge" => true,
        "core" | "far" => r.column == "omega_mean_unc" || r.column == "omega_inst_unc",
        _ => false,
    }
}

/// Number formatting of the tables: 3 decimals, `-` for NaN.
fn num(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.3}")
    } else {
        "-".into()
    }
}

/// The markdown table of `rows` (those `shown`), one line per row.
pub fn markdown(rows: &[Row]) -> String {
    let mut s = String::new();
    s.push_str("| cell | table | column | region | n | coverage (k=2) | width ratio | verdict |\n");
    s.push_str("|---|---|---|---|---:|---:|---:|---|\n");
    for r in rows.iter().filter(|r| shown(r)) {
        let _ = writeln!(
            s,
            "| {} | {} | {} | {} | {} | {} | {} | {} |",
            r.cell,
            r.table,
            r.column,
            r.region,
            r.score.n,
            num(r.score.coverage),
            num(r.score.ratio),
            verdict(&r.score).name()
        );
    }
    s
}

/// The CSV of every row: cell, table, column, region, n, n_unknown,
/// coverage, ratio, rms_error, median_unc, verdict.
pub fn csv(rows: &[Row]) -> String {
    let mut s = String::from(
        "cell,table,column,region,n,n_unknown,coverage,ratio,rms_error,median_unc,verdict\n",
    );
    for r in rows {
        let _ = writeln!(
            s,
            "{},{},{},{},{},{},{},{},{},{},{}",
            r.cell,
            r.table,
            r.column,
            r.region,
            r.score.n,
            r.score.n_unknown,
            r.score.coverage,
            r.score.ratio,
            r.score.rms_error,
            r.score.median_unc,
            verdict(&r.score).name()
        );
    }
    s
}

/// A one-line count of verdicts among the shown rows.
pub fn summary(rows: &[Row]) -> String {
    let shown: Vec<&Row> = rows.iter().filter(|r| shown(r)).collect();
    let count = |v: Verdict| shown.iter().filter(|r| verdict(&r.score) == v).count();
    format!(
        "{} rows: {} meet both targets, {} too small, {} too large, {} mixed, {} unknown",
        shown.len(),
        count(Verdict::Meets),
        count(Verdict::TooSmall),
        count(Verdict::TooLarge),
        count(Verdict::Mixed),
        count(Verdict::Unknown)
    )
}
