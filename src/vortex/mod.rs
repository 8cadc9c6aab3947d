//! Vortex cores: found in a mean field, measured, and tracked across the
//! phase bins (or frames) of a run.
//!
//! Owns: the one mechanism that turns a field (`Slice`: u, v, omega and
//! its uncertainty on a grid) into cores, and cores into tracks.
//! - `label`: connected regions of a node mask (4-connectivity by default).
//! - `corr`: the spatial correlation of the omega errors that the run's
//!   stencils and noise model imply (for the circulation's uncertainty).
//! - `core`: each region's centre, circulation, radii, peak vorticity,
//!   each with a propagated standard uncertainty; `fit`: a Lamb-Oseen fit.
//! - `track`: cores matched from slice to slice by predicted position.
//! - `budget`: the circulation budget of each core (issue 13) from the
//!   vorticity transport budget's per-node terms.
//! - `swirl`: the second core criterion, a swirling strength significant
//!   at the run's coverage.
//! - `frames`: the cores of every frame as part of a run's state;
//!   `codec`: their bytes for shards.
//! - `table`: the output tables. The glue a run calls is
//!   `reduce::vortices`, the figures `plot::vortices`, the report's words
//!   `report::vortices`.
//!
//! Does not own: the statistics that make the mean fields (`stats`), the
//! budget's terms (`budget`), Gamma1/Gamma2 themselves
//! (`derive::quantities::gamma`), files (`io`).
//!
//! Identification (default; Graftieaux, Michard & Grosjean 2001, Meas. Sci. Technol.
//! 12:1422): a core is a connected region where `|Gamma2| > 2/pi` (the
//! threshold at which rotation dominates strain in the disc around a node),
//! all nodes of one sign, at least `min_nodes` nodes, every node with a
//! finite omega. Gamma2 is taken from the slice's own mean velocity (the
//! phase-mean field, not the mean of instantaneous Gamma2), over a disc of
//! `[derivatives] gamma_radius` nodes. See docs/vortices.md.

pub(crate) mod budget;
pub(crate) mod codec;
pub(crate) mod core;
pub(crate) mod corr;
pub(crate) mod fit;
pub(crate) mod frames;
pub(crate) mod label;
pub(crate) mod swirl;
pub(crate) mod table;
pub(crate) mod track;

#[cfg(test)]
mod tests;

pub(crate) use self::core::Core;
pub(crate) use label::Connectivity;
pub use track::Track;

use crate::field::Grid;

/// Resolved `[vortices]` parameters.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Params {
    /// Threshold on |Gamma2| (default 2/pi).
    pub threshold: f64,
    /// Smallest region kept, in nodes (default 4).
    pub min_nodes: usize,
    /// Which neighbours join a region (default 4-connectivity).
    pub connectivity: Connectivity,
    /// Tracking gate: the largest distance between a core and the track's
    /// predicted position, in grid pitches (default 3).
    pub gate: f64,
    /// Fit a Lamb-Oseen vortex to each core (default true).
    pub fit: bool,
    /// Which nodes are core (default `Gamma2`).
    pub criterion: Criterion,
    /// Coverage factor of the swirl's significance test: the two-sided
    /// normal quantile of `[statistics] coverage` (1.96 for 0.95).
    pub swirl_k: f64,
    /// Also find cores in every used frame (default false: it costs a
    /// Gamma2 pass per frame), tracked across frames when the run is
    /// time-resolved.
    pub frames: bool,
}

/// Which nodes are core.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Criterion {
    /// `|Gamma2| > threshold` (Graftieaux et al. 2001); the sign is Gamma2's.
    Gamma2,
    /// The swirling strength is significant at the run's coverage
    /// (`swirl`); the sign is omega's.
    Swirl,
    /// Both: `|Gamma2| > threshold` and a significant swirl.
    Both,
}

impl Criterion {
    /// The pipeline's word for it.
    pub fn key(self) -> &'static str {
        match self {
            Criterion::Gamma2 => "gamma2",
            Criterion::Swirl => "swirl",
            Criterion::Both => "both",
        }
    }
}

impl Default for Params {
    fn default() -> Self {
        Params {
            threshold: 2.0 / std::f64::consts::PI,
            min_nodes: 4,
            connectivity: Connectivity::Four,
            gate: 3.0,
            fit: true,
            criterion: Criterion::Gamma2,
            swirl_k: crate::stats::gum::coverage_factor(0.95, f64::INFINITY),
            frames: false,
        }
    }
}

impl Params {
    /// What makes a node core, in words ("|Gamma2| > 0.6366").
    pub(crate) fn rule(&self) -> String {
        let swirl = format!(
            "a swirling strength above {:.2} times its standard uncertainty",
            self.swirl_k
        );
        match self.criterion {
            Criterion::Gamma2 => format!("|Gamma2| > {:.4}", self.threshold),
            Criterion::Swirl => swirl,
            Criterion::Both => format!("|Gamma2| > {:.4} and {swirl}", self.threshold),
        }
    }

    /// The parameters in plain words, for `curlew check` and the report.
    pub(crate) fn describe(&self) -> String {
        let rule = self.rule();
        format!(
            "vortex cores: connected regions ({}) of {rule} with at least {} nodes; circulation, centre, radii{}; tracked across slices within {} grid pitches of the predicted position{}",
            self.connectivity.describe(),
            self.min_nodes,
            if self.fit { ", Lamb-Oseen fit" } else { "" },
            self.gate,
            if self.frames { "; also in every frame" } else { "" }
        )
    }
}

/// What a slice is: the run's mean, a phase bin or a frame.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SliceKind {
    /// The run's mean field (`slice_kind` `mean`, `slice` -1 in
    /// `vortices.csv`).
    Mean,
    /// Phase bin `bin` centred on `phase_deg`.
    Bin {
        /// Bin number from 0 (the `slice` column).
        bin: usize,
        /// The bin's centre, degrees (the `phase_deg` column).
        phase_deg: f64,
    },
    /// Frame `index` (run-wide, 0-based).
    Frame {
        /// Run-wide frame index from 0 (the `slice` column).
        index: u64,
    },
}

/// One field in which cores are found. Arrays are row-major over `grid`
/// (node `k = j nx + i`), NaN where there is no value. `omega_unc`,
/// `u_unc` and `v_unc` are the standard uncertainties of `omega`, `u` and
/// `v` (NaN: unknown; the swirl criterion then finds nothing).
#[derive(Debug, Clone, Copy)]
pub struct Slice<'a> {
    /// Which field this is: the mean, a phase bin or a frame.
    pub kind: SliceKind,
    /// Time of the slice in s: `phase / (2 pi f)` for a bin, the frame's
    /// time for a frame, NaN when unknown (and for the mean).
    pub time_s: f64,
    /// The grid the arrays lie on (m).
    pub grid: Grid,
    /// Velocity along x, m/s.
    pub u: &'a [f64],
    /// Velocity along y, m/s.
    pub v: &'a [f64],
    /// Vorticity, 1/s.
    pub omega: &'a [f64],
    /// Standard uncertainty of `omega`, 1/s.
    pub omega_unc: &'a [f64],
    /// Standard uncertainty of `u`, m/s.
    pub u_unc: &'a [f64],
    /// Standard uncertainty of `v`, m/s.
    pub v_unc: &'a [f64],
}

/// The cores of one slice.
#[derive(Debug, Clone)]
pub struct SliceCores {
    /// The slice the cores were found in.
    pub kind: SliceKind,
    /// The slice's time, s (NaN when unknown, and for the mean).
    pub time_s: f64,
    /// The cores, in the order of their `core` index in `vortices.csv`.
    pub cores: Vec<Core>,
}

/// Everything the vortex analysis found in a run.
#[derive(Debug, Clone)]
pub struct Vortices {
    /// The run's grid (m).
    pub grid: Grid,
    /// The mean field's cores first, then one entry per phase bin (or
    /// frame), in order.
    pub slices: Vec<SliceCores>,
    /// Tracks over the phase bins (or frames).
    pub tracks: Vec<Track>,
    /// Per-core circulation budget, when the run has a budget.
    pub budget: Vec<budget::CoreBudget>,
    /// The `[vortices]` parameters the analysis ran with.
    pub params: Params,
    /// The error-correlation model the circulation's uncertainty used,
    /// in words.
    pub correlation: String,
    /// Why parts were skipped (no mean columns, no frequency, untracked
    /// frames), for the manifest and the report.
    pub warnings: Vec<String>,
}

/// Finds and measures the cores of `s`: the one entry point of the
/// identification (used for mean fields, phase bins, frames and the budget's
/// slices alike). `gamma_radius` is the Gamma1/Gamma2 disc radius in nodes.
pub(crate) fn find_cores(
    s: &Slice,
    p: &Params,
    gamma_radius: usize,
    corr: &corr::OmegaCorrelation,
) -> Vec<Core> {
    let g = s.grid;
    let arr = |d: &[f64]| {
        ndarray::Array2::from_shape_vec(g.shape(), d.to_vec()).expect("slice has the grid's nodes")
    };
    let (u, v) = (arr(s.u), arr(s.v));
    let ok = ndarray::Zip::from(&u)
        .and(&v)
        .map_collect(|a, b| a.is_finite() && b.is_finite());
    let (g1, g2) = crate::derive::quantities::gamma(&u, &v, &ok, gamma_radius, g.dx, g.dy);
    let g1: Vec<f64> = g1.iter().copied().collect();
    let g2: Vec<f64> = g2.iter().copied().collect();
    let (mask, judged) = core_mask(s, p, &g2);
    label::regions(&mask, g.nx, g.ny, p.connectivity)
        .into_iter()
        .filter(|r| r.nodes.len() >= p.min_nodes)
        .map(|r| {
            let mut c = core::measure(&r, s, &g1, corr, p.fit);
            c.edge = touches_edge(&r.nodes, g, &judged);
            c
        })
        .collect()
}

/// The sign of every node that is core under `p.criterion` (0: not core)
/// and whether the criterion can be judged at each node. Gamma2's sign for
/// the Gamma2 rules, omega's for the swirl alone. A node is judged where
/// omega and Gamma2 are finite and, for the swirl rules, the swirl and its
/// uncertainty are (the end of the data for `touches_edge`).
fn core_mask(s: &Slice, p: &Params, g2: &[f64]) -> (Vec<i8>, Vec<bool>) {
    let sw = (p.criterion != Criterion::Gamma2)
        .then(|| swirl::swirl(s.grid, s.u, s.v, s.u_unc, s.v_unc));
    let judged: Vec<bool> = (0..g2.len())
        .map(|k| {
            s.omega[k].is_finite()
                && g2[k].is_finite()
                && sw
                    .as_ref()
                    .is_none_or(|(l, u)| l[k].is_finite() && u[k].is_finite())
        })
        .collect();
    let mask = (0..g2.len())
        .map(|k| {
            if !judged[k] {
                return 0;
            }
            let (w, x) = (s.omega[k], g2[k]);
            let gamma = x.abs() > p.threshold;
            let swirls = sw
                .as_ref()
                .is_some_and(|(l, u)| swirl::significant(l[k], u[k], p.swirl_k));
            let (core, sign) = match p.criterion {
                Criterion::Gamma2 => (gamma, x),
                Criterion::Swirl => (swirls, w),
                Criterion::Both => (gamma && swirls, x),
            };
            match (core, sign > 0.0, sign < 0.0) {
                (true, true, _) => 1,
                (true, _, true) => -1,
                _ => 0,
            }
        })
        .collect();
    (mask, judged)
}

/// Does a region touch the end of the data: a node on the grid's edge or
/// whose 4-neighbour cannot be judged (no vorticity, no Gamma2, or no swirl
/// under the swirl rules: the field's edge, a mask, a gap)? Such a core is
/// cut: its centroid is pulled inward and its circulation is low.
fn touches_edge(nodes: &[usize], g: Grid, judged: &[bool]) -> bool {
    nodes.iter().any(|&k| {
        let (j, i) = (k / g.nx, k % g.nx);
        if j == 0 || i == 0 || j + 1 == g.ny || i + 1 == g.nx {
            return true;
        }
        [k - 1, k + 1, k - g.nx, k + g.nx]
            .iter()
            .any(|&n| !judged[n])
    })
}
