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
//! Uncertainty (`budget::integral`; GUM, JCGM 100:2008, eq. 13): each
//! integrated term is, to first order, one linear functional of the
//! velocity samples: the core's nodes' composite stencils (vorticity for
//! the unsteady term, on the neighbouring slices; Laplacian after the
//! vorticity stencils for diffusion; for advection and stretching the
//! linearised fields, with the slice's mean fields as coefficients),
//! scattered into one weight map, whose variance follows from the per-node
//! velocity variances the budget keeps (a bin's: of its means; a frame's:
//! its noise) and the run's velocity error correlation `vel`. Neighbouring
//! nodes' weights cancel where the operators telescope, so the diffusion's
//! integral carries only its boundary flux's uncertainty. The residual's
//! linear part (advection - stretching - diffusion, one map) and the
//! unsteady term (other slices: independent) give its variance with the
//! terms' correlation carried.
//! Not carried: the turbulent term (phase bins) is a divergence of
//! co-moments, whose cross-node covariances the one-pass accumulator does
//! not keep; its uncertainty is still `dA sqrt(sum_k u_k^2)` (nodes taken
//! as independent: overstated where the divergence telescopes), and it
//! enters the residual's variance as independent of the other terms. In
//! phase bins the spatial correlation of the turbulent scatter of the bin
//! means is taken as that of the noise (`vel`), as for the circulation
//! (docs/vortices.md). A term that is NaN at any node of the core is NaN
//! for the core (no partial integrals), and so is its uncertainty.

use super::corr::OmegaCorrelation;
use super::{find_cores, Core, Params, Slice, SliceKind};
use crate::budget::integral::Weights;
use crate::budget::ops::{F_W, NF};
use crate::budget::terms::{jacobians, SliceBudget};
use crate::budget::{Budget, SliceKind as BudgetKind, TERMS};
use crate::derive::quantities::clip0;
use crate::stencil::correlation::Correlation;

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

/// The circulation budget of every core of every slice of `b`; `vel` the
/// run's velocity error correlation between nodes.
pub(crate) fn core_budgets(
    b: &Budget,
    p: &Params,
    gamma_radius: usize,
    frequency: Option<f64>,
    vel: Correlation,
) -> Vec<CoreBudget> {
    let g = b.grid;
    let nan = vec![f64::NAN; g.len()];
    let mut out = Vec::new();
    let shape = Params {
        fit: false,
        ..p.clone()
    };
    for s in &b.slices {
        let (kind, time_s) = slice_kind(&s.kind, frequency);
        // the velocity uncertainty the budget keeps (a bin's of its means,
        // a frame's noise), for the swirl criterion
        let sd = |var: Option<&Vec<f64>>| {
            var.map_or_else(|| nan.clone(), |v| v.iter().map(|x| x.sqrt()).collect())
        };
        let (u_unc, v_unc) = (
            sd(s.lin.as_ref().map(|l| &l.noise.var_u)),
            sd(s.lin.as_ref().map(|l| &l.noise.var_v)),
        );
        let slice = Slice {
            kind,
            time_s,
            grid: g,
            u: &s.u,
            v: &s.v,
            omega: &s.omega,
            omega_unc: &nan,
            u_unc: &u_unc,
            v_unc: &v_unc,
        };
        let cores = find_cores(
            &slice,
            &shape,
            gamma_radius,
            &OmegaCorrelation::independent(),
        );
        for (ci, c) in cores.iter().enumerate() {
            out.push(core_budget(b, s, (kind, time_s, ci), c, vel));
        }
    }
    debug_assert_eq!(TERMS.len(), 5);
    out
}

/// The vortex slice kind and time of a budget slice (a bin's time is its
/// phase over `2 pi f`; NaN without `f`).
fn slice_kind(kind: &BudgetKind, frequency: Option<f64>) -> (SliceKind, f64) {
    match *kind {
        BudgetKind::Bin { bin, centre_deg } => (
            SliceKind::Bin {
                bin,
                phase_deg: centre_deg,
            },
            frequency.map_or(f64::NAN, |f| centre_deg / 360.0 / f),
        ),
        BudgetKind::Frame { index, time_s } => (SliceKind::Frame { index }, time_s),
    }
}

/// The budget of core `c` of slice `s` (`at`: the slice's kind and time,
/// the core's index in the slice): every term and the residual summed over
/// the core's nodes times `dA`, with their uncertainties.
fn core_budget(
    b: &Budget,
    s: &SliceBudget,
    (kind, time_s, core): (SliceKind, f64, usize),
    c: &Core,
    vel: Correlation,
) -> CoreBudget {
    let da = b.grid.dx * b.grid.dy;
    let sum = |v: &[f64]| c.nodes.iter().map(|&k| v[k]).sum::<f64>() * da;
    let rss = |v: &[f64]| c.nodes.iter().map(|&k| v[k] * v[k]).sum::<f64>().sqrt() * da;
    let value: [f64; 5] = std::array::from_fn(|t| sum(&s.value[t]));
    let residual = sum(&s.residual);
    let (lin, var_lin) = integrated(b, s, &c.nodes, vel);
    // The linear functional where every stencil fits; next to the
    // field's edge or a gap (the integral kernel refuses a cut
    // stencil: NaN) the node uncertainties' root sum of squares,
    // the independent-node rule, which overstates a divergence's
    // integral (docs/vortices.md). Never f64::max(NaN, 0), which
    // is 0: a zero uncertainty.
    let mut unc: [f64; 5] = std::array::from_fn(|t| {
        if t < 4 && value[t].is_finite() {
            if lin[t].is_finite() {
                clip0(lin[t]).sqrt()
            } else {
                rss(&s.unc[t])
            }
        } else {
            f64::NAN
        }
    });
    unc[4] = rss(&s.unc[4]);
    let var_t = if value[4].is_finite() {
        unc[4] * unc[4]
    } else {
        0.0
    };
    CoreBudget {
        kind,
        time_s,
        core,
        sign: c.sign,
        x: c.x,
        y: c.y,
        n_nodes: c.nodes.len(),
        circulation: c.circulation,
        value,
        unc,
        residual,
        residual_unc: if !residual.is_finite() {
            f64::NAN
        } else if (lin[0] + var_lin).is_finite() {
            clip0(lin[0] + var_lin + var_t).sqrt()
        } else {
            rss(&s.residual_unc)
        },
    }
}

/// The variances of the integrals over `nodes` (times dA) of unsteady,
/// advection, stretching and diffusion, and of the residual's linear part
/// (advection - stretching - diffusion), by `budget::integral`. NaN where
/// the slice lacks the inputs or a stencil leaves the grid.
fn integrated(b: &Budget, s: &SliceBudget, nodes: &[usize], vel: Correlation) -> ([f64; 4], f64) {
    let nan = ([f64::NAN; 4], f64::NAN);
    let Some(lin) = &s.lin else { return nan };
    let g = b.grid;
    let da = g.dx * g.dy;
    let mut w: [Weights; 5] = std::array::from_fn(|_| Weights::new(&g));
    let mut ok = true;
    let mut cw = [0.0; NF];
    cw[F_W] = da;
    for &k in nodes {
        let [ja, js, jd] = jacobians(&lin.mean[k * NF..(k + 1) * NF], b.nu);
        let jr: [f64; NF] = std::array::from_fn(|f| (ja[f] - js[f] - jd[f]) * da);
        let scaled = |j: [f64; NF]| j.map(|x| x * da);
        ok &= w[0].add_fields(&b.ops, k, &cw);
        ok &= w[1].add_fields(&b.ops, k, &scaled(ja));
        ok &= w[2].add_fields(&b.ops, k, &scaled(js));
        ok &= w[3].add_fields(&b.ops, k, &scaled(jd));
        ok &= w[4].add_fields(&b.ops, k, &jr);
    }
    if !ok {
        return nan;
    }
    let var = |w: &Weights, n| match &b.smoother {
        Some(m) => w.after(m).variance(n, vel),
        None => w.variance(n, vel),
    };
    let unst = lin.unsteady.as_ref().map_or(f64::NAN, |(p, q, f)| {
        f * f * (var(&w[0], p) + var(&w[0], q))
    });
    (
        [
            unst,
            var(&w[1], &lin.noise),
            var(&w[2], &lin.noise),
            var(&w[3], &lin.noise),
        ],
        var(&w[4], &lin.noise),
    )
}
