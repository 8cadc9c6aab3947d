//! The circulation budget of each vortex core (issue 13): the vorticity
//! transport budget's per-node terms integrated over the core.
//!
//! Owns: `CoreBudget` and `core_budgets`. Does not own: the terms
//! (`crate::budget`), finding cores (`find_cores`).
//!
//! For a fixed region A, integrating the vorticity transport equation
//! (docs/budget.md) over A gives the circulation budget
//! `dGamma/dt = int_A d omega/dt dA = -int_A advection + int_A stretching +
//! int_A diffusion + int_A turbulent + (unseen)`. Each budget slice (phase
//! bin or frame) is searched for cores with the one mechanism of
//! `find_cores`, on the slice's own mean fields, and every term, and the
//! residual, is summed over each core's nodes times `dA = dx dy`.
//!
//! Uncertainty: `dA sqrt(sum_k u_k^2)`, the node errors of a term taken as
//! independent between nodes. This neglects their spatial covariance: the
//! diffusion and turbulent terms are divergences, whose area integrals
//! telescope into boundary fluxes, so their node errors anticorrelate and
//! the independent sum overstates their uncertainty; advection and
//! stretching are products of smooth fields and may correlate positively
//! (understated). The correlation between terms at one node is carried in
//! the residual's own uncertainty (`budget::terms`). A term that is NaN at
//! any node of the core is NaN for the core (no partial integrals).

use super::corr::OmegaCorrelation;
use super::{find_cores, Params, Slice, SliceKind};
use crate::budget::{Budget, SliceKind as BudgetKind, TERMS};

/// The circulation budget of one core of one budget slice.
#[derive(Debug, Clone, PartialEq)]
pub struct CoreBudget {
    pub kind: SliceKind,
    /// Time of the slice, s (a bin: phase / (2 pi f); NaN without f).
    pub time_s: f64,
    /// Index of the core in its slice.
    pub core: usize,
    pub sign: i8,
    pub x: f64,
    pub y: f64,
    pub n_nodes: usize,
    /// The region's circulation, m²/s.
    pub circulation: f64,
    /// Integrated terms (`TERMS` order), m²/s², and their uncertainties.
    pub value: [f64; 5],
    pub unc: [f64; 5],
    pub residual: f64,
    pub residual_unc: f64,
}

/// The circulation budget of every core of every slice of `b`.
pub fn core_budgets(
    b: &Budget,
    p: &Params,
    gamma_radius: usize,
    frequency: Option<f64>,
) -> Vec<CoreBudget> {
    let g = b.grid;
    let da = g.dx * g.dy;
    let nan = vec![f64::NAN; g.len()];
    let mut out = Vec::new();
    let shape = Params {
        fit: false,
        ..p.clone()
    };
    for s in &b.slices {
        let (kind, time_s) = match s.kind {
            BudgetKind::Bin { bin, centre_deg } => (
                SliceKind::Bin {
                    bin,
                    phase_deg: centre_deg,
                },
                frequency.map_or(f64::NAN, |f| centre_deg / 360.0 / f),
            ),
            BudgetKind::Frame { index, time_s } => (SliceKind::Frame { index }, time_s),
        };
        let slice = Slice {
            kind,
            time_s,
            grid: g,
            u: &s.u,
            v: &s.v,
            omega: &s.omega,
            omega_unc: &nan,
        };
        let cores = find_cores(
            &slice,
            &shape,
            gamma_radius,
            &OmegaCorrelation::independent(),
        );
        for (ci, c) in cores.iter().enumerate() {
            let sum = |v: &[f64]| c.nodes.iter().map(|&k| v[k]).sum::<f64>() * da;
            let rss = |v: &[f64]| c.nodes.iter().map(|&k| v[k] * v[k]).sum::<f64>().sqrt() * da;
            out.push(CoreBudget {
                kind,
                time_s,
                core: ci,
                sign: c.sign,
                x: c.x,
                y: c.y,
                n_nodes: c.nodes.len(),
                circulation: c.circulation,
                value: std::array::from_fn(|t| sum(&s.value[t])),
                unc: std::array::from_fn(|t| rss(&s.unc[t])),
                residual: sum(&s.residual),
                residual_unc: rss(&s.residual_unc),
            });
        }
    }
    debug_assert_eq!(TERMS.len(), 5);
    out
}
