//! The node sets a cell is scored over: interior and edge nodes, and for a
//! vortex its core and its far field.
//!
//! Owns: the definitions, in one place. Edge: nodes within `EDGE` nodes of
//! the grid's border (where stencils are cut and one-sided); interior: the
//! rest. Core: interior nodes within `CORE` core radii of the vortex centre
//! (the origin); far: interior nodes beyond `FAR` core radii. `all`: every
//! node.

use super::truth;
use crate::synth::RunSetup;

/// Nodes from the border counted as edge nodes (the half-width of the
/// default 5 x 5 least-squares stencil).
pub(crate) const EDGE: usize = 2;
/// Core region radius, in core radii.
pub(crate) const CORE: f64 = 2.0;
/// Far field beyond this many core radii.
pub(crate) const FAR: f64 = 3.0;

/// A named set of nodes (flags in node order).
#[derive(Debug, Clone)]
pub(crate) struct Region {
    pub name: &'static str,
    pub member: Vec<bool>,
}

impl Region {
    pub(crate) fn contains(&self, node: usize) -> bool {
        self.member.get(node).copied().unwrap_or(false)
    }
    pub(crate) fn count(&self) -> usize {
        self.member.iter().filter(|&&m| m).count()
    }
}

/// The regions of a run's grid: all, interior, edge, and with a vortex
/// core and far (empty regions are left out).
pub(crate) fn regions(setup: &RunSetup) -> Vec<Region> {
    let g = setup.grid;
    let mut all = Vec::new();
    let (mut interior, mut edge, mut core, mut far) = (vec![], vec![], vec![], vec![]);
    let rc = truth::vortex_core(setup);
    for j in 0..g.ny {
        for i in 0..g.nx {
            let d = i.min(j).min(g.nx - 1 - i).min(g.ny - 1 - j);
            let inner = d >= EDGE;
            all.push(true);
            interior.push(inner);
            edge.push(!inner);
            let r = g.x(i).hypot(g.y(j));
            core.push(inner && rc.is_some_and(|rc| r <= CORE * rc));
            far.push(inner && rc.is_some_and(|rc| r > FAR * rc));
        }
    }
    [
        ("all", all),
        ("interior", interior),
        ("edge", edge),
        ("core", core),
        ("far", far),
    ]
    .into_iter()
    .map(|(name, member)| Region { name, member })
    .filter(|r| r.count() > 0)
    .collect()
}
