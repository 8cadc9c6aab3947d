//! One vortex core measured: centre, circulation, radii, peak vorticity,
//! each with a propagated standard uncertainty.
//!
//! Owns: `Core` and `measure`. Does not own: finding the region (`label`,
//! `find_cores`), the error correlation (`corr`), the fit (`fit`).
//!
//! Definitions (dA = dx dy; sums over the region's nodes; docs/vortices.md):
//! - circulation `Gamma = sum omega dA` (Stokes: the line integral of u
//!   round the region), variance `dA^2 sum_a sum_b s_a s_b rho(a - b)`
//!   with `s` the nodes' omega uncertainty and `rho` the omega error
//!   correlation of the run (`corr`; GUM eq. 13);
//! - centre: the vorticity-weighted centroid `x_c = sum omega x / sum
//!   omega`, its uncertainty through `d x_c / d omega_k = (x_k - x_c) / sum
//!   omega` with the same correlation; and the node of largest |Gamma1|
//!   (Graftieaux et al. 2001), a centre that needs no vorticity;
//! - `radius_eq = sqrt(area / pi)`, the radius of the disc of the region's
//!   area (no uncertainty: the region is a threshold);
//! - `radius_moment = sqrt(sum omega r^2 / sum omega)`, r from the centroid:
//!   the second moment of vorticity, which equals rc for a whole
//!   Lamb-Oseen vortex but is smaller inside a truncated region; its
//!   uncertainty to first order (the centroid's shift is second order);
//! - peak vorticity: the value of largest |omega| and its uncertainty.
//!
//! NaN: a node without an omega uncertainty makes the uncertainties NaN
//! (unknown, never 0); values stay.

use super::corr::OmegaCorrelation;
use super::fit::{self, FitData, LambOseen};
use super::label::Region;
use super::Slice;

/// One core of one slice.
#[derive(Debug, Clone, PartialEq)]
pub struct Core {
    /// +1 anticlockwise (positive omega), -1 clockwise.
    pub sign: i8,
    /// Row-major nodes of the region, sorted.
    pub nodes: Vec<usize>,
    pub x: f64,
    pub y: f64,
    pub x_unc: f64,
    pub y_unc: f64,
    /// The node of largest |Gamma1| in the region.
    pub x_gamma1: f64,
    pub y_gamma1: f64,
    pub area: f64,
    pub radius_eq: f64,
    pub radius_moment: f64,
    pub radius_moment_unc: f64,
    pub circulation: f64,
    pub circulation_unc: f64,
    pub peak_omega: f64,
    pub peak_omega_unc: f64,
    pub fit: Option<LambOseen>,
    /// The region touches the end of the data (grid edge, mask, gap).
    pub edge: bool,
}

/// Measures the core on `region` of slice `s`; `g1` is Gamma1 on the grid.
pub(crate) fn measure(
    region: &Region,
    s: &Slice,
    g1: &[f64],
    corr: &OmegaCorrelation,
    with_fit: bool,
) -> Core {
    let g = s.grid;
    let nodes = &region.nodes;
    let da = g.dx * g.dy;
    let xy: Vec<(f64, f64)> = nodes
        .iter()
        .map(|&k| (g.x(k % g.nx), g.y(k / g.nx)))
        .collect();
    let om: Vec<f64> = nodes.iter().map(|&k| s.omega[k]).collect();
    let sig: Vec<f64> = nodes.iter().map(|&k| s.omega_unc[k]).collect();
    let sum: f64 = om.iter().sum();
    let (x, y) = (
        om.iter().zip(&xy).map(|(w, p)| w * p.0).sum::<f64>() / sum,
        om.iter().zip(&xy).map(|(w, p)| w * p.1).sum::<f64>() / sum,
    );
    // NaN stays NaN (f64::max would turn it into 0).
    let sd = |c: Vec<f64>| {
        let v = corr.variance(nodes, &c, &sig, g.nx);
        if v < 0.0 {
            0.0
        } else {
            v.sqrt()
        }
    };
    let circulation_unc = da * sd(vec![1.0; nodes.len()]);
    let x_unc = sd(xy.iter().map(|p| (p.0 - x) / sum).collect());
    let y_unc = sd(xy.iter().map(|p| (p.1 - y) / sum).collect());
    let (radius_moment, radius_moment_unc) = radius_moment(&om, &xy, (x, y), sum, sd);
    let peak = (0..nodes.len())
        .max_by(|&a, &b| om[a].abs().total_cmp(&om[b].abs()))
        .expect("a region has nodes");
    let g1_peak = (0..nodes.len())
        .max_by(|&a, &b| g1[nodes[a]].abs().total_cmp(&g1[nodes[b]].abs()))
        .expect("a region has nodes");
    let area = da * nodes.len() as f64;
    let radius_eq = (area / std::f64::consts::PI).sqrt();
    let d = FitData {
        nodes,
        nx: g.nx,
        xy: &xy,
        omega: &om,
        sig: &sig,
    };
    let fit = with_fit
        .then(|| fit_from(&d, (x, y), om[peak], radius_eq, radius_moment, corr))
        .flatten();
    Core {
        sign: region.sign,
        nodes: nodes.clone(),
        x,
        y,
        x_unc,
        y_unc,
        x_gamma1: xy[g1_peak].0,
        y_gamma1: xy[g1_peak].1,
        area,
        radius_eq,
        radius_moment,
        radius_moment_unc,
        circulation: da * sum,
        circulation_unc,
        peak_omega: om[peak],
        peak_omega_unc: sig[peak],
        fit,
        edge: false,
    }
}

/// The Lamb-Oseen fit of a core, started at its centroid with the radius
/// `max(radius_eq, 1.5 radius_moment)` and the circulation that gives the
/// core's peak vorticity at the centre.
fn fit_from(
    d: &FitData,
    (x, y): (f64, f64),
    peak_omega: f64,
    radius_eq: f64,
    radius_moment: f64,
    corr: &OmegaCorrelation,
) -> Option<fit::LambOseen> {
    let rc0 = radius_eq.max(1.5 * radius_moment);
    let p0 = [x, y, peak_omega * std::f64::consts::PI * rc0 * rc0, rc0];
    fit::fit(d, p0, radius_eq, corr)
}

/// The vorticity-weighted second-moment radius about the centroid `(x, y)`
/// (`sum` the vorticity's sum) and its standard uncertainty from `sd`, the
/// standard deviation of a linear functional of the nodes' vorticity (NaN
/// for a radius of 0).
fn radius_moment(
    om: &[f64],
    xy: &[(f64, f64)],
    (x, y): (f64, f64),
    sum: f64,
    sd: impl Fn(Vec<f64>) -> f64,
) -> (f64, f64) {
    let r2: Vec<f64> = xy
        .iter()
        .map(|p| (p.0 - x).powi(2) + (p.1 - y).powi(2))
        .collect();
    let m2 = om.iter().zip(&r2).map(|(w, r)| w * r).sum::<f64>() / sum;
    let radius_moment = m2.max(0.0).sqrt();
    let m2_unc = sd(r2.iter().map(|r| (r - m2) / sum).collect());
    let unc = if radius_moment > 0.0 {
        m2_unc / (2.0 * radius_moment)
    } else {
        f64::NAN
    };
    (radius_moment, unc)
}
